"""The ``cavitas`` command: wires the subcommands; no computation lives here.

Each subcommand is a module in :mod:`cavitas._commands` with ``register(subparsers)``,
which adds its parser and sets ``func(args) -> int``.
"""

from __future__ import annotations

import argparse
import difflib
import gc
import importlib
import logging
import os
import sys
from collections.abc import Callable, Sequence
from typing import NoReturn

from ._caution import RESEARCH_ONLY
from ._commands._words import in_option_words, option_names
from ._errors import (
    EXIT_BROKEN_PIPE,
    EXIT_INPUT,
    EXIT_INTERNAL,
    EXIT_INTERRUPTED,
    EXIT_PARAMETER,
    CavitasError,
)
from ._version import __version__

#: Subcommands in the order ``--help`` lists them.
COMMANDS: tuple[str, ...] = ("info", "diagram", "distance", "segment", "batch", "compare",
                             "demo")
#: Subcommands that run the compiled kernels in this process (say so when compiling them).
KERNEL_COMMANDS = ("diagram", "distance", "segment", "demo")

DESCRIPTION = f"""\
Find, segment and measure enclosed regions (cells, vesicles, capsules, pores, bubbles)
in 2D images and 3D volumes with cubical persistent homology.

{RESEARCH_ONLY}
"""

EPILOG = """\
examples:
  cavitas info scan.tif                 what is in the file, and what a run would need
  cavitas COMMAND --help                options of one command, with examples

exit codes: 0 ok, 1 some batch inputs failed, 2 bad parameter, 3 bad or missing input
            file, 4 output problem (exists without --force, cannot write), 5 internal
            error, 130 interrupted, 141 the reader of the output went away.
"""


class _Parser(argparse.ArgumentParser):
    """A parser that takes no abbreviated options (``--wall`` is not ``--walls``)."""

    def __init__(self, *args: object, **kwargs: object) -> None:
        kwargs["allow_abbrev"] = False
        super().__init__(*args, **kwargs)  # type: ignore[arg-type]

    def unknown(self, extras: Sequence[str]) -> None:
        """Exit with this parser's usage, naming the unknown options and the closest known."""
        known = {o.lstrip("-"): o for action in self._actions for o in action.option_strings}
        options = [e.split("=", 1)[0] for e in extras if e.startswith("-") and e != "-"]
        sentences = []
        for word in options:  # the values after an unknown option are not worth naming
            close = difflib.get_close_matches(word.lstrip("-"), known, n=1, cutoff=0.6)
            sentences.append(f"unknown option {word}" + (
                f" (the closest is {known[close[0]]})" if close else ""))
        if not options:
            sentences.append(f"unexpected argument(s): {' '.join(extras)}")
        self.error("; ".join(sentences))


class _HelpFormatter(argparse.RawDescriptionHelpFormatter):
    """Keeps our line breaks and shows defaults."""

    def _get_help_string(self, action: argparse.Action) -> str | None:
        text = action.help or ""
        if "%(default)" not in text and action.default not in (None, False, argparse.SUPPRESS):
            if action.option_strings and not isinstance(action.default, bool):
                text += " (default: %(default)s)"
        return text


def build_parser() -> _Parser:
    """Return the parser of the ``cavitas`` command with every subcommand registered."""
    parser = _Parser(
        prog="cavitas", description=DESCRIPTION, epilog=EPILOG, formatter_class=_HelpFormatter
    )
    parser.add_argument("--version", action="version", version=f"cavitas {__version__}")
    common = _Parser(add_help=False)
    common.add_argument("-v", "--verbose", action="count", default=0,
                        help="say more (repeat for debug messages)")
    common.add_argument("-q", "--quiet", action="store_true",
                        help="print only errors; no progress bars")
    common.add_argument("--debug", action="store_true",
                        help="show the full traceback of any error")
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name in COMMANDS:
        module = importlib.import_module(f"cavitas._commands.{name}")
        module.register(subparsers, parents=[common], formatter_class=_HelpFormatter)
    return parser


def _configure_logging(verbose: int, quiet: bool) -> None:
    level = logging.ERROR if quiet else (logging.WARNING, logging.INFO, logging.DEBUG)[
        min(verbose, 2)
    ]
    logging.basicConfig(level=level, format="cavitas: %(levelname)s: %(message)s", force=True)
    # Dask's loggers keep their own level: set it here and, through its configuration
    # variable, in the scheduler and worker processes a batch starts (which read it on import)
    logging.getLogger("distributed").setLevel(level)
    os.environ["DASK_LOGGING__DISTRIBUTED"] = logging.getLevelName(level).lower()


def _subcommand(parser: argparse.ArgumentParser, name: str) -> _Parser:
    """The parser of the subcommand ``name``."""
    for action in parser._subparsers._group_actions if parser._subparsers else ():
        if isinstance(action, argparse._SubParsersAction):
            return action.choices[name]
    raise KeyError(name)  # pragma: no cover - every command is registered


def _reader_gone() -> int:
    """The reader of stdout went away (``| head``): stop quietly, as other commands do."""
    try:  # later writes, including the interpreter's last flush, go nowhere
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
    except (OSError, ValueError):  # stdout is not a real file (e.g. captured by a test)
        pass
    return EXIT_BROKEN_PIPE


def _line_above_the_bar(prefix: str) -> Callable[[str], None]:
    """A writer of one line to stderr that leaves a progress bar intact."""
    def write(text: str) -> None:
        from tqdm import tqdm

        tqdm.write(prefix + text, file=sys.stderr)
    return write


def main(argv: Sequence[str] | None = None) -> int:
    """Run the ``cavitas`` command with ``argv`` (default: ``sys.argv[1:]``); return the exit code.

    Examples
    --------
    >>> main(["--version"])  # doctest: +SKIP
    cavitas 0.1.0
    """
    parser = build_parser()
    try:
        args, extras = parser.parse_known_args(argv)
        if extras:
            (_subcommand(parser, args.command) if args.command else parser).unknown(extras)
    except SystemExit as exc:  # argparse exits 2 on usage errors, 0 on --help/--version
        return int(exc.code or 0)
    if args.command is None:
        parser.print_help()
        return EXIT_PARAMETER
    _configure_logging(args.verbose, args.quiet)
    # progress bars only on a terminal: redirected to a file they are noise, and a bar
    # left half-drawn there would run into the next message
    args.progress = not args.quiet and sys.stderr.isatty()
    args.options = option_names(_subcommand(parser, args.command))  # for messages
    from ._numba_cache import announce_compilation, stop_announcing

    if args.command in KERNEL_COMMANDS and not args.quiet:
        announce_compilation(_line_above_the_bar(f"cavitas {args.command}: "))
    try:
        return int(args.func(args) or 0)
    except CavitasError as exc:
        if args.debug:
            raise
        print(f"cavitas {args.command}: error: "
              f"{in_option_words(str(exc), exc.parameters, args.options)}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        print(f"cavitas {args.command}: interrupted; nothing half-written was kept.",
              file=sys.stderr)
        return EXIT_INTERRUPTED
    except BrokenPipeError:
        return _reader_gone()
    except MemoryError:  # beyond what the memory checks foresaw
        if args.debug:
            raise
        print(f"cavitas {args.command}: error: the computation ran out of memory; crop or "
              "downsample the input, or run it on a machine with more memory.",
              file=sys.stderr)
        return EXIT_INPUT
    except Exception as exc:  # a bug: say so plainly, the traceback on request
        if args.debug:
            raise
        print(f"cavitas {args.command}: internal error: {type(exc).__name__}: {exc} "
              "(run again with --debug for the traceback, and please report it)",
              file=sys.stderr)
        return EXIT_INTERNAL
    finally:
        stop_announcing()  # a notice never outlives its command (main() called again)


def console() -> NoReturn:
    """The ``cavitas`` console command (and ``python -m cavitas``): :func:`main`, then exit
    with its code.

    Every output is written and closed when :func:`main` returns; what is left in memory
    (the libraries, the compiled kernels) is then frozen (:func:`gc.freeze`), so the
    interpreter's shutdown does not search it for reference cycles, which takes a
    noticeable part of a short run. Exit handlers still run, and the standard streams are
    flushed as always.
    """
    code = main()
    gc.freeze()
    sys.exit(code)


if __name__ == "__main__":  # pragma: no cover
    console()
