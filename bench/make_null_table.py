"""Regenerate the tabulated noise null shipped in the package (``null_table.npz``).

Simulates every grid point of :mod:`cavitas.segment._null_table` (both connectivities in
2D and 3D) and writes the arrays, compressed, over the shipped file. Deterministic (fixed
seeds): rerunning it gives the same file contents. A few minutes on two cores.

Run: ``python -m bench.make_null_table [--workers N] [--out PATH]``.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from cavitas._shared.atomic import atomic_path
from cavitas.segment._null_table import TABLE_PATH, build_table


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m bench.make_null_table",
                                     description=__doc__.splitlines()[0])
    parser.add_argument("--workers", type=int, default=2, help="processes (default: 2)")
    parser.add_argument("--out", default=str(TABLE_PATH), help="file to write")
    args = parser.parse_args(argv)
    started = time.perf_counter()
    arrays = build_table(workers=args.workers)
    with atomic_path(args.out, force=True) as tmp, open(tmp, "wb") as fh:
        np.savez_compressed(fh, **arrays)  # type: ignore[arg-type]  # numpy's **kwds stub
    print(f"wrote {args.out} in {time.perf_counter() - started:.0f} s")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
