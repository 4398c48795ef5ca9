"""Run every benchmark module `benchmarks/bench_*.py` (each has a `main()` that prints its table).

Usage: python -m benchmarks.run [NAME ...]   (NAME without the bench_ prefix; default all)
"""

from __future__ import annotations

import importlib
import pkgutil
import sys
import time

import benchmarks


def main(argv: list[str] | None = None) -> int:
    wanted = set(argv if argv is not None else sys.argv[1:])
    names = sorted(m.name for m in pkgutil.iter_modules(benchmarks.__path__) if m.name.startswith("bench_"))
    for name in names:
        if wanted and name.removeprefix("bench_") not in wanted:
            continue
        print(f"== {name}", flush=True)
        start = time.perf_counter()
        importlib.import_module(f"benchmarks.{name}").main()
        print(f"   ({time.perf_counter() - start:.1f} s)\n", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
