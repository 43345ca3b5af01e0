"""The executor front: same results on every backend, clear errors, config and CLI wiring.

Covered: serial, local processes (forked copies on Linux, joblib loky elsewhere) and a Dask
cluster (a ``distributed.LocalCluster`` started here, the public way to run Dask on one
machine) give identical seeded results; a bad scheduler address or worker count is refused by
the config reader and the executor; an unreachable scheduler is an InputError, not a
traceback. Work shared with a forked copy keeps task order, really runs in two processes,
brings back the copy's errors and warnings, and runs in-process where forking is unsafe.
"""

from __future__ import annotations

import dataclasses
import sys

import numpy as np
import pytest

from marchland.compute import Executor, get_executor
from marchland.config import config_from_dict, load_config
from marchland.demo import scenario_path
from marchland.errors import ConfigError, InputError


def _draw(n: int, scale: float, seed: np.random.SeedSequence) -> np.ndarray:
    # A seeded task: its result depends only on (n, scale, its own seed).
    return np.random.default_rng(seed).poisson(scale, size=n)


def _square(x: int) -> int:
    return x * x


@pytest.fixture(scope="module")
def cluster():
    distributed = pytest.importorskip("distributed")
    # Threads in this process: quick to start, and enough to exercise scatter/map/gather.
    # The HTTP server on a free port: with none given it takes 8787 and warns (an error
    # here) when another cluster, e.g. a second test worker's, holds it.
    with distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=False, dashboard_address=":0"
    ) as c:
        yield c


def test_seeded_results_are_the_same_on_every_backend(cluster):
    items = [3, 5, 8, 13, 21]
    with Executor(workers=1) as ex:
        serial = ex.map_seeded(_draw, items, 4.0, seed=2026)
    with Executor(workers=2) as ex:
        local = ex.map_seeded(_draw, items, 4.0, seed=2026)
    with Executor(scheduler=cluster.scheduler_address) as ex:
        assert ex.backend == "dask" and ex.parallelism == 2
        dask = ex.map_seeded(_draw, items, 4.0, seed=2026)
    for a, b, c in zip(serial, local, dask, strict=True):
        np.testing.assert_array_equal(a, b)
        np.testing.assert_array_equal(a, c)
    # The seed matters (tasks are not all drawn from one default stream)...
    other = Executor().map_seeded(_draw, items, 4.0, seed=2027)
    assert any(not np.array_equal(a, b) for a, b in zip(serial, other, strict=True))
    # ...and each task has its own stream: equal sizes do not repeat the same draws.
    twins = Executor().map_seeded(_draw, [50, 50], 4.0, seed=1)
    assert not np.array_equal(twins[0], twins[1])


def test_map_keeps_order_on_every_backend(cluster):
    items = list(range(7))
    want = [i * i for i in items]
    assert Executor().map(_square, items) == want
    assert Executor(workers=2).map(_square, items) == want
    with Executor(scheduler=cluster.scheduler_address) as ex:
        assert ex.map(_square, items) == want


@pytest.mark.parametrize(
    ("compute", "backend"),
    [
        ({"workers": 1}, "serial"),
        ({"workers": 2}, "processes"),
        ({"scheduler": "tcp://x:1"}, "dask"),
    ],
)
def test_monthly_backtest_step_runs_on_the_configs_executor(monkeypatch, compute, backend):
    # The monthly run's backtest hands its origins to the [compute] executor (the results'
    # equality across executors is tested in tests/test_risk.py).
    import types

    import marchland.risk
    from marchland.pack._steps import _Context

    seen = {}

    def fake_backtest(*args, executor=None, **kwargs):
        seen["backend"] = executor.backend
        return types.SimpleNamespace(summary="s", by_country="c")

    monkeypatch.setattr(marchland.risk, "run_backtest", fake_backtest, raising=False)
    cfg = load_config(scenario_path())
    cfg = dataclasses.replace(cfg, compute=dataclasses.replace(cfg.compute, **compute))
    ctx = types.SimpleNamespace(
        cfg=cfg, counts=None, units=[], graph=None, as_of=None, covariates=None
    )
    assert _Context.backtest(ctx) == {"backtest": "s", "backtest_by_country": "c"}
    assert seen["backend"] == backend


@pytest.mark.parametrize(
    ("compute", "key"),
    [
        ({"scheduler": "host:8786"}, "compute.scheduler"),
        ({"scheduler": "tcp://host:port"}, "compute.scheduler"),
        ({"workers": 0}, "compute.workers"),
        ({"workers": "two"}, "compute.workers"),
        ({"threads": 2}, "compute.threads"),
    ],
)
def test_config_refuses_bad_compute_settings(compute, key):
    raw = _raw_demo()
    raw["compute"] = compute
    with pytest.raises(ConfigError, match=key.replace(".", r"\.")):
        config_from_dict(raw, base_dir=scenario_path().parent)


def test_config_reads_compute_settings():
    raw = _raw_demo()
    raw["compute"] = {"scheduler": "tcp://10.0.0.5:8786", "workers": 3}
    cfg = config_from_dict(raw, base_dir=scenario_path().parent)
    assert cfg.compute.scheduler == "tcp://10.0.0.5:8786" and cfg.compute.workers == 3
    assert get_executor(cfg.compute).backend == "dask"
    # the command line wins over the config
    assert get_executor(cfg.compute, scheduler="", workers=1).backend == "serial"
    raw.pop("compute")
    assert config_from_dict(raw, base_dir=scenario_path().parent).compute.scheduler is None


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"scheduler": "localhost"}, "scheduler address"),
        ({"workers": 0}, "whole number"),
        ({"workers": True}, "whole number"),
    ],
)
def test_executor_refuses_bad_settings(kwargs, match):
    with pytest.raises(InputError, match=match):
        Executor(**kwargs)


def test_an_unreachable_scheduler_is_an_input_error():
    # Port 9 (discard) on this machine: nothing listens there in a test environment.
    ex = Executor(scheduler="tcp://127.0.0.1:9")
    with pytest.raises(InputError, match="cannot reach the Dask scheduler"):
        ex.map(_square, [1, 2])


def test_cli_refuses_a_bad_scheduler_address(tmp_path):
    from click.testing import CliRunner

    from marchland.cli import cli

    res = CliRunner().invoke(
        cli,
        [
            "run",
            str(scenario_path()),
            "--month",
            "2026-10",
            "--out",
            str(tmp_path),
            "--scheduler",
            "localhost:8786",
        ],
    )
    assert res.exit_code == 2
    assert "--scheduler" in res.output and "tcp://host:8786" in res.output


def _raw_demo() -> dict:
    import tomllib

    return tomllib.loads(scenario_path().read_text(encoding="utf-8"))


def test_reading_a_config_and_checking_it_import_nothing_heavy():
    # `marchland check` reads inputs and builds the graph (to list border pairs it leaves out)
    # but runs no analysis: no model, cluster or drawing library may be imported on that path
    # (measured with `python -X importtime`). libpysal (which imports joblib and numba) is the
    # graph's.
    import subprocess
    import sys

    code = (
        "import sys, warnings; warnings.simplefilter('ignore');"
        "from marchland.config.load import load_config; from marchland.demo import scenario_path;"
        "cfg = load_config(scenario_path());"
        "light = [m for m in ('joblib', 'distributed', 'numba') if m in sys.modules];"
        "from marchland.pack.region import check; check(cfg);"
        "heavy = [m for m in ('distributed', 'spopt', 'statsmodels', 'esda', "
        "'matplotlib') if m in sys.modules];"
        "print(light, heavy)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[] []"


# --- work shared with forked copies (figures, and local workers on Linux) -------------------
def _meet(folder):
    """A task that waits until two processes have each taken a task, then returns its pid."""
    import os
    import time

    def task(i: int) -> int:
        (folder / f"{os.getpid()}-{i}").touch()
        deadline = time.monotonic() + 60
        while len({p.name.split("-")[0] for p in folder.iterdir()}) < 2:
            if time.monotonic() > deadline:
                break
            time.sleep(0.01)
        return os.getpid()

    return task


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="forking is Linux-only here")
def test_share_tasks_uses_a_forked_copy_and_keeps_task_order(tmp_path):
    import os

    from marchland.compute import share_tasks

    pids = share_tasks(_meet(tmp_path), 4, workers=2)
    assert len(set(pids)) == 2 and os.getpid() in pids
    assert share_tasks(lambda i: i * i, 9, workers=2) == [i * i for i in range(9)]
    finished = []
    share_tasks(lambda i: i, 5, workers=2, done=lambda k, n: finished.append((k, n)))
    assert finished == [(k, 5) for k in range(1, 6)]


def test_share_tasks_raises_a_copys_error_and_repeats_its_warnings(tmp_path):
    import warnings

    from marchland.compute import share_tasks

    meet = _meet(tmp_path)

    def task(i: int) -> int:
        meet(i)
        if i == 1:
            warnings.warn(f"task {i} says so", UserWarning, stacklevel=1)
        return i

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        assert share_tasks(task, 2, workers=2) == [0, 1]
    assert [str(w.message) for w in caught] == ["task 1 says so"]

    def fails(i: int) -> int:
        meet(i)
        if i == 1:
            raise InputError("bad row", file="a.csv", row=3)
        return i

    with pytest.raises(InputError, match="bad row"):
        share_tasks(fails, 2, workers=2)


def test_share_tasks_runs_here_where_forking_is_not_safe(monkeypatch):
    import os

    import marchland.compute as compute

    monkeypatch.setattr(compute.sys, "platform", "darwin")
    assert compute.share_tasks(lambda i: os.getpid(), 4, workers=2) == [os.getpid()] * 4
    assert not Executor(workers=2).forks


def test_background_work_returns_its_value_warnings_and_errors():
    import os
    import warnings

    from marchland.compute import in_background

    def work() -> tuple[int, int]:
        warnings.warn("from the copy", UserWarning, stacklevel=1)
        return os.getpid(), sum(range(100))

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        job = in_background(work)
        pid, total = job.result()
        assert job.result() == (pid, total)  # asked twice: same value, warned once
        assert [str(w.message) for w in caught] == ["from the copy"]
        assert in_background(work, workers=1).result()[0] == os.getpid()  # or here, at once
    assert total == 4950 and len(caught) == 2
    if sys.platform.startswith("linux"):
        assert pid != os.getpid()  # it ran in a forked copy

    def fails() -> None:
        raise InputError("no such column", file="b.csv", column="cases")

    for workers in (1, 2):
        with pytest.raises(InputError, match="no such column"):
            in_background(fails, workers=workers).result()


def _resident_mb() -> float:
    with open("/proc/self/status", encoding="ascii") as fh:
        return int(fh.read().split("VmRSS:")[1].split()[0]) / 1024


@pytest.mark.skipif(
    not sys.platform.startswith("linux"), reason="reads /proc; glibc's heap is Linux's"
)
def test_release_memory_hands_freed_heap_back():
    from marchland.compute import _malloc_trim, release_memory

    if _malloc_trim() is None:
        pytest.skip("this C library has no malloc_trim (not glibc)")
    # 200 MB in 4 kB blocks (glibc's heap, not Python's small-object arenas); every 64th kept,
    # so the freed blocks sit between live ones and the heap cannot shrink from its top alone.
    blocks = [bytearray(4096) for _ in range(50_000)]
    kept = blocks[::64]
    del blocks
    before = _resident_mb()
    release_memory()
    after = _resident_mb()
    assert len(kept) == 782
    assert before - after > 100, (before, after)


def _blas_threads() -> list[int]:
    from threadpoolctl import threadpool_info

    return [i["num_threads"] for i in threadpool_info() if i["user_api"] == "blas"]


def test_one_blas_thread_here_and_in_forked_copies():
    from marchland.compute import in_background, one_blas_thread, share_tasks

    before = _blas_threads()
    assert before, "numpy's BLAS is found by threadpoolctl"
    with one_blas_thread():
        assert _blas_threads() == [1] * len(before)
        # Forked copies inherit the setting (figures, backtest origins, the forecast).
        assert share_tasks(lambda i: _blas_threads(), 2, workers=2) == [[1] * len(before)] * 2
        assert in_background(_blas_threads, workers=2).result() == [1] * len(before)
    assert _blas_threads() == before


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="PR_SET_PDEATHSIG is Linux's")
@pytest.mark.parametrize("how", ["in_background", "share_tasks"])
def test_forked_copies_die_with_a_killed_parent(how, tmp_path):
    # A run killed midway (SIGKILL) must not leave its forked copies working on: they would
    # keep writing into the month's partial folder that the next run clears.
    import signal
    import subprocess
    import time

    pids = tmp_path / "pids"
    work = (
        "compute.in_background(lambda: (note(), time.sleep(120)))"
        if how == "in_background"
        else "compute.share_tasks(lambda i: (note(), time.sleep(120)), 2, workers=2)"
    )
    script = f"""
import os, time
from marchland import compute
def note():
    with open({str(pids)!r}, "a") as f:
        f.write(f"{{os.getpid()}}\\n")
job = {work}
time.sleep(120)
"""
    parent = subprocess.Popen([sys.executable, "-c", script])
    try:
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline and not (pids.exists() and pids.read_text()):
            time.sleep(0.1)
        # (share_tasks runs a task in the calling process too: that one is the parent)
        deadline = time.monotonic() + 60
        copies: list[int] = []
        while time.monotonic() < deadline and not copies:
            copies = [int(p) for p in pids.read_text().split() if int(p) != parent.pid]
            time.sleep(0.1)
        assert copies
        parent.send_signal(signal.SIGKILL)
        parent.wait(timeout=30)
        deadline = time.monotonic() + 20
        alive = copies
        while alive and time.monotonic() < deadline:
            alive = [p for p in copies if _running(p)]
            time.sleep(0.1)
        assert not alive, f"forked copies {alive} outlived their killed parent"
    finally:
        if parent.poll() is None:
            parent.kill()


def _running(pid: int) -> bool:
    """True unless ``pid`` is gone or a zombie (dead, waiting to be reaped)."""
    try:
        with open(f"/proc/{pid}/stat") as f:
            return f.read().rsplit(")", 1)[1].split()[0] != "Z"
    except OSError:
        return False
