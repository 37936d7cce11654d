"""Time the whole demo run (read, logs, model, simulations, volumes, exports, report) by stage.

Usage::

    python scripts/bench_demo.py [--realizations N] [--out FOLDER] [--site FOLDER]

Prints the wall-clock time of each stage and the total; the target is under 2 minutes on
2 cores for the default settings of the demo site.
"""

from __future__ import annotations

import argparse
import os
import platform
import tempfile
import time
import warnings
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--site", type=Path, default=ROOT / "demo_site", help="site folder")
    parser.add_argument("--out", type=Path, default=None, help="output folder (kept)")
    parser.add_argument(
        "--realizations", type=int, default=None, help="override [simulation] realizations"
    )
    args = parser.parse_args()

    start = time.perf_counter()
    from geo3d.errors import Geo3dWarning
    from geo3d.pipeline import run

    import_time = time.perf_counter() - start
    warnings.simplefilter("ignore", Geo3dWarning)
    with tempfile.TemporaryDirectory() as scratch:
        out = args.out or Path(scratch) / "demo-out"
        wall = time.perf_counter()
        results = run(args.site, out, overwrite=True, n_realizations=args.realizations)
        wall = time.perf_counter() - wall
        size = sum(p.stat().st_size for p in out.rglob("*") if p.is_file())

    ds = results.dataset
    cells = int(ds["mask"].sum()) if ds is not None else 0
    realizations = ds.sizes.get("realization", 0) if ds is not None else 0
    print(f"geo3d demo benchmark: {platform.python_version()}, {os.cpu_count()} CPU(s)")
    print(f"site {args.site}: {len(results.site.borings)} borings, {cells} model cells,")
    print(f"{realizations} realizations; outputs {size / 1e6:.1f} MB")
    print()
    print(f"{'stage':<10}{'seconds':>10}")
    print(f"{'import':<10}{import_time:>10.2f}")
    for stage, seconds in results.timings.items():
        if stage != "total":
            print(f"{stage:<10}{seconds:>10.2f}")
    print(f"{'total':<10}{import_time + wall:>10.2f}")


if __name__ == "__main__":
    main()
