"""Regenerate the bundled scenario: ``python -m marchland.demo``."""

from __future__ import annotations

import json
import time


def _main() -> None:
    from . import _ROOT, generate

    start = time.perf_counter()
    summary = generate()
    print(json.dumps(summary, indent=1, ensure_ascii=False))
    print(
        f"wrote {_ROOT / 'boundaries'} and {_ROOT / 'demo_data'} in "
        f"{time.perf_counter() - start:.1f} s"
    )


if __name__ == "__main__":
    _main()
