"""The month's (or week's) folder on disk: checked before, swapped in atomically after.

The destination is checked before the analysis starts; the finished folder replaces the old one
in a single step (renameat2 RENAME_EXCHANGE where the kernel has it).
"""

from __future__ import annotations

import errno
import os
import shutil
import sys
import tempfile
import warnings
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ..errors import DataWarning, InputError

if TYPE_CHECKING:  # pragma: no cover
    pass

_PARTIAL = ".partial-"
_OLD = ".replaced-"
_MIN_FREE = 20 * 2**20
_RENAME_EXCHANGE = 2  # linux/fs.h
_AT_FDCWD = -100  # linux/fcntl.h


def check_destination(out_dir: str | os.PathLike[str], month: str, *, overwrite: bool) -> Path:
    """Return the bundle folder for ``month``; InputError if it exists and overwrite is off.

    A previous pack left hidden by a replacing run that was killed half-way is put back first
    (with a :class:`~marchland.errors.DataWarning`).

    Parameters
    ----------
    out_dir : path-like
        Folder holding the monthly bundles.
    month : str
        ``"YYYY-MM"``.
    overwrite : bool

    Returns
    -------
    pathlib.Path
        ``out_dir / month``.

    Examples
    --------
    >>> import tempfile
    >>> d = tempfile.mkdtemp()
    >>> check_destination(d, "2026-10", overwrite=False).name
    '2026-10'
    """
    dest = Path(out_dir) / month
    if Path(out_dir).is_dir():
        _restore_replaced(Path(out_dir), month)
    if dest.exists() and not overwrite:
        raise InputError(
            "a bundle for this month exists already; pass --overwrite (overwrite=True) to "
            "replace it",
            file=dest,
        )
    if dest.exists() and not dest.is_dir():
        raise InputError("exists and is not a folder", file=dest)
    _check_writable(Path(out_dir), dest)
    return dest


def _check_writable(out: Path, dest: Path) -> None:
    """Refuse, before any analysis, an output folder that cannot take a bundle."""
    try:
        limit = os.pathconf(out.anchor or "/", "PC_PATH_MAX")
    except (OSError, ValueError, AttributeError):  # no pathconf (Windows) or no such limit
        limit = 4096
    # The deepest file of a bundle is about 80 characters below the month's folder.
    if len(os.fsencode(os.path.abspath(dest))) + 80 > limit:
        raise InputError(f"the output path is too long for this file system ({limit})", file=out)
    base = out
    while not base.exists():
        if base.parent == base:
            break
        base = base.parent
    if not base.is_dir():
        raise InputError("is a file, not a folder for the output", file=base)
    if not os.access(base, os.W_OK | os.X_OK):
        raise InputError("the output folder is not writable (permission denied)", file=base)
    try:
        with tempfile.NamedTemporaryFile(dir=base, prefix=".marchland-probe-"):
            pass
    except OSError as exc:
        raise InputError(
            f"cannot write into the output folder: {exc.strerror or exc}", file=base
        ) from None
    need = _MIN_FREE
    if dest.is_dir():
        need = max(need, sum(p.stat().st_size for p in dest.rglob("*") if p.is_file()))
    free = shutil.disk_usage(base).free
    if free < need:
        raise InputError(
            f"not enough free space for the bundle: {free / 2**20:.0f} MB free, about "
            f"{need / 2**20:.0f} MB needed",
            file=base,
        )


def replace_atomically(
    out_dir: str | os.PathLike[str],
    name: str,
    write: Callable[[Path], None],
    *,
    overwrite: bool = False,
) -> Path:
    """Write a pack into a hidden folder with ``write(folder)``, then put it at ``out_dir/name``.

    An existing pack is replaced only with ``overwrite`` and only once the new one is complete.
    On Linux the swap is one ``renameat2(RENAME_EXCHANGE)``: at every moment ``out_dir/name``
    is either the old pack or the new one. Elsewhere it is two renames (the old pack to a
    hidden ``.NAME.replaced-PID-*`` folder, the new one into place); a process killed between
    the two leaves no pack under the name, and the next run (or :func:`check_destination`)
    puts the old one back and says so.

    Parameters
    ----------
    out_dir : path-like
        Folder holding the packs; made if missing.
    name : str
        The pack's folder name (``YYYY-MM`` or ``YYYY-Www``).
    write : callable
        ``write(folder)`` fills the (empty, existing) temporary folder.
    overwrite : bool

    Returns
    -------
    pathlib.Path
        ``out_dir / name``.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> out = pathlib.Path(tempfile.mkdtemp())
    >>> def write(folder):
    ...     _ = (folder / "a.txt").write_text("new")
    >>> (replace_atomically(out, "2026-10", write) / "a.txt").read_text()
    'new'
    >>> sorted(p.name for p in out.iterdir())
    ['2026-10']
    """
    out = Path(out_dir)
    dest = check_destination(out, name, overwrite=overwrite)
    out.mkdir(parents=True, exist_ok=True)
    _remove_stale(out, name)
    tmp = Path(tempfile.mkdtemp(prefix=f".{name}{_PARTIAL}{os.getpid()}-", dir=out))
    try:
        write(tmp)
        os.chmod(tmp, 0o755)  # mkdtemp makes it private; a pack is meant to be shared
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    if not dest.exists():
        os.rename(tmp, dest)
        return dest
    if _exchange(tmp, dest):
        # One atomic swap: ``tmp`` now holds the old pack (a partial folder of this process
        # if a kill comes before the removal; the next run removes it).
        shutil.rmtree(tmp, ignore_errors=True)
        return dest
    old = Path(tempfile.mkdtemp(prefix=f".{name}{_OLD}{os.getpid()}-", dir=out))
    old.rmdir()
    os.rename(dest, old)
    _between_renames()
    try:
        os.rename(tmp, dest)
    except BaseException:
        os.rename(old, dest)
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    shutil.rmtree(old, ignore_errors=True)
    return dest


def _between_renames() -> None:
    """Nothing; the gap of the two-rename replacement (tests make a process die here)."""


def _renameat2() -> Any:
    """Return glibc's ``renameat2`` (2.28 and later) through ctypes, or None."""
    if not sys.platform.startswith("linux"):
        return None
    import ctypes
    import ctypes.util

    try:
        libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6", use_errno=True)
        fn = libc.renameat2
    except (OSError, AttributeError):
        return None
    fn.argtypes = [ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p, ctypes.c_uint]
    fn.restype = ctypes.c_int
    return fn


def _exchange(a: Path, b: Path) -> bool:
    """Swap two folders atomically (Linux ``RENAME_EXCHANGE``); False where not supported.

    The standard library has no atomic exchange, hence ctypes. A file system without support
    (EINVAL), an old kernel (ENOSYS) or another platform returns False: the caller falls back
    to two renames.
    """
    fn = _renameat2()
    if fn is None:
        return False
    import ctypes

    rc = fn(_AT_FDCWD, os.fsencode(a), _AT_FDCWD, os.fsencode(b), _RENAME_EXCHANGE)
    if rc == 0:
        return True
    err = ctypes.get_errno()
    if err in (errno.EINVAL, errno.ENOSYS, errno.EOPNOTSUPP, errno.EPERM):
        return False
    raise OSError(err, os.strerror(err), str(b))


def _restore_replaced(out: Path, name: str) -> None:
    """Put back a pack left in a ``.replaced-`` folder by a run killed between its renames.

    With a current pack in place, such folders are leftovers of an interrupted clean-up and
    are removed. Folders of a process still running are left alone.
    """
    prefix = f".{name}{_OLD}"
    dest = out / name
    for p in sorted(out.glob(f"{prefix}*")):
        try:
            pid = int(p.name[len(prefix) :].split("-")[0])
        except ValueError:
            continue
        if pid != os.getpid() and _alive(pid):
            continue
        if not dest.exists():
            os.rename(p, dest)
            warnings.warn(
                f"{dest}: restored the previous pack from {p.name} (a run replacing it was "
                "stopped before it finished)",
                DataWarning,
                stacklevel=3,
            )
        else:
            shutil.rmtree(p, ignore_errors=True)


def _remove_stale(out: Path, month: str) -> None:
    """Remove partial folders of this month left by a process that no longer runs."""
    for p in out.glob(f".{month}{_PARTIAL}*"):
        try:
            pid = int(p.name[len(f".{month}{_PARTIAL}") :].split("-")[0])
        except ValueError:
            continue
        if pid != os.getpid() and not _alive(pid):
            shutil.rmtree(p, ignore_errors=True)


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True
