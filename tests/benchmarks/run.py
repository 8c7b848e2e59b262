"""Run every benchmark beside this file (``bench_*.py``, each with a ``main()``).

``make bench`` calls this. Each module runs on its own; one that fails is reported and the
others still run. The exit status is 1 if any failed. Names on the command line pick
modules by substring, e.g. ``python tests/benchmarks/run.py grid``.
"""

from __future__ import annotations

import importlib.util
import platform
import sys
import time
import traceback
from pathlib import Path

HERE = Path(__file__).resolve().parent


def discover(patterns: list[str]) -> list[Path]:
    found = sorted(HERE.glob("bench_*.py"))
    if patterns:
        found = [p for p in found if any(s in p.stem for s in patterns)]
    return found


def load(path: Path):
    spec = importlib.util.spec_from_file_location(f"_bench_{path.stem}", path)
    module = importlib.util.module_from_spec(spec)
    assert spec.loader is not None
    spec.loader.exec_module(module)
    return module


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    # benchmarks may use the shared test support (tests/support)
    sys.path.insert(0, str(HERE.parent))
    print(f"# alveary benchmarks — Python {platform.python_version()} on {platform.machine()}")
    failed = []
    for path in discover(argv):
        print(f"\n## {path.stem}\n", flush=True)
        start = time.perf_counter()
        try:
            module = load(path)
            if not callable(getattr(module, "main", None)):
                raise TypeError(f"{path.name} has no main()")
            module.main()
        except Exception:  # report and go on with the next module
            traceback.print_exc()
            failed.append(path.stem)
        print(f"\n({path.stem}: {time.perf_counter() - start:.1f} s)", flush=True)
    if failed:
        print(f"\nFAILED: {', '.join(failed)}")
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
