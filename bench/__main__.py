"""Run the registered benchmarks and print one table: ``python -m bench [--only NAME]``."""

from __future__ import annotations

import argparse
import importlib
import sys

#: Benchmark modules, in the order they run (each has NAME and run(args) -> rows).
MODULES = [
    "bench.persistence",
    "bench.segment_accuracy",
    "bench.measure",
    "bench.batch",
    "bench.segment_scale",
    "bench.whole_run",
    "bench.memory_guard",
    "bench.real_scans",
    "bench.report",
    "bench.topology",
    "bench.chunked",
    "bench.whole_diagram",
]


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="python -m bench",
        description="Measure speed (as ratios to reference libraries) and memory of cavitas.",
        epilog="Example: python -m bench --only persistence --large",
    )
    parser.add_argument("--only", metavar="NAME", action="append",
                        help="run only this benchmark (repeatable); default: all")
    parser.add_argument("--large", action="store_true",
                        help="also run the large sizes (e.g. 512^3; needs several GB of RAM)")
    parser.add_argument("--list", action="store_true", help="list the benchmarks and exit")
    return parser


def _print_table(name: str, rows: list[dict]) -> None:
    cols = ("metric", "value", "target", "note")
    table = [[str(row.get(c, "")) for c in cols] for row in rows]
    widths = [max([len(c)] + [len(r[i]) for r in table]) for i, c in enumerate(cols)]
    print(f"\n== {name} ==")
    print("  ".join(c.ljust(w) for c, w in zip(cols, widths, strict=True)).rstrip())
    print("  ".join("-" * w for w in widths))
    for r in table:
        print("  ".join(v.ljust(w) for v, w in zip(r, widths, strict=True)).rstrip())
    sys.stdout.flush()


def main(argv: list[str] | None = None) -> int:
    args = _parser().parse_args(argv)
    modules = [importlib.import_module(m) for m in MODULES]
    if args.list:
        for module in modules:
            print(f"{module.NAME}: {(module.__doc__ or '').strip().splitlines()[0]}")
        return 0
    names = {module.NAME for module in modules}
    unknown = set(args.only or ()) - names
    if unknown:
        print(f"unknown benchmark(s) {sorted(unknown)}; known: {sorted(names)}", file=sys.stderr)
        return 2
    for module in modules:
        if args.only and module.NAME not in args.only:
            continue
        _print_table(module.NAME, module.run(args))
    return 0


if __name__ == "__main__":
    sys.exit(main())
