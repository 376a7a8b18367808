"""The ``cavitas`` command: wires the subcommands; no computation lives here.

Each subcommand is a module in :mod:`cavitas._commands` with ``register(subparsers)``,
which adds its parser and sets ``func(args) -> int``.
"""

from __future__ import annotations

import argparse
import importlib
import logging
import sys
from collections.abc import Sequence

from ._caution import RESEARCH_ONLY
from ._errors import EXIT_INTERNAL, EXIT_INTERRUPTED, EXIT_PARAMETER, CavitasError
from ._version import __version__

#: Subcommands in the order ``--help`` lists them.
COMMANDS: tuple[str, ...] = ("info", "diagram", "segment", "batch", "compare", "demo")

DESCRIPTION = f"""\
Find, segment and measure enclosed regions (cells, vesicles, capsules, pores, bubbles)
in 2D images and 3D volumes with cubical persistent homology.

{RESEARCH_ONLY}
"""

EPILOG = """\
examples:
  cavitas info scan.tif                 what is in the file, and what a run would need
  cavitas COMMAND --help                options of one command, with examples

exit codes: 0 ok, 1 some batch inputs failed, 2 bad parameter, 3 bad input file,
            4 output problem (exists without --force, cannot write), 5 internal error,
            130 interrupted.
"""


class _HelpFormatter(argparse.RawDescriptionHelpFormatter):
    """Keeps our line breaks and shows defaults."""

    def _get_help_string(self, action: argparse.Action) -> str | None:
        text = action.help or ""
        if "%(default)" not in text and action.default not in (None, False, argparse.SUPPRESS):
            if action.option_strings and not isinstance(action.default, bool):
                text += " (default: %(default)s)"
        return text


def build_parser() -> argparse.ArgumentParser:
    """Return the parser of the ``cavitas`` command with every subcommand registered."""
    parser = argparse.ArgumentParser(
        prog="cavitas", description=DESCRIPTION, epilog=EPILOG, formatter_class=_HelpFormatter
    )
    parser.add_argument("--version", action="version", version=f"cavitas {__version__}")
    common = argparse.ArgumentParser(add_help=False)
    common.add_argument("-v", "--verbose", action="count", default=0,
                        help="say more (repeat for debug messages)")
    common.add_argument("-q", "--quiet", action="store_true",
                        help="print only errors; no progress bars")
    common.add_argument("--debug", action="store_true",
                        help="show the full traceback of any error")
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMANDS:
        module = importlib.import_module(f"cavitas._commands.{name}")
        module.register(subparsers, parents=[common], formatter_class=_HelpFormatter)
    return parser


def _configure_logging(verbose: int, quiet: bool) -> None:
    level = logging.ERROR if quiet else (logging.WARNING, logging.INFO, logging.DEBUG)[
        min(verbose, 2)
    ]
    logging.basicConfig(level=level, format="cavitas: %(levelname)s: %(message)s", force=True)


def main(argv: Sequence[str] | None = None) -> int:
    """Run the ``cavitas`` command with ``argv`` (default: ``sys.argv[1:]``); return the exit code.

    Examples
    --------
    >>> main(["--version"])  # doctest: +SKIP
    cavitas 0.1.0
    """
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse exits 2 on usage errors, 0 on --help/--version
        return int(exc.code or 0)
    if args.command is None:
        parser.print_help()
        return EXIT_PARAMETER
    _configure_logging(args.verbose, args.quiet)
    try:
        return int(args.func(args) or 0)
    except CavitasError as exc:
        if args.debug:
            raise
        print(f"cavitas {args.command}: error: {exc}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        print(f"cavitas {args.command}: interrupted; nothing half-written was kept.",
              file=sys.stderr)
        return EXIT_INTERRUPTED
    except Exception as exc:  # a bug: say so plainly, the traceback on request
        if args.debug:
            raise
        print(f"cavitas {args.command}: internal error: {type(exc).__name__}: {exc} "
              "(run again with --debug for the traceback, and please report it)",
              file=sys.stderr)
        return EXIT_INTERNAL


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
