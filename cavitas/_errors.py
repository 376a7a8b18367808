"""Error classes shared by every stage, and the exit codes the command line uses.

Every user-facing error is one sentence that names the file or the parameter, what was
expected and what came. They all derive from :class:`CavitasError`, itself a ``ValueError``,
so library users can catch one class.

A message names parameters in the words of the Python API (``spacing=``, ``force=True``,
``min_volume``) and lists them in ``parameters``; the command line rewrites exactly those
names into its options (``--spacing``, ``--force``, ``--min-volume``), so each message is
written once and reads right in both places.

Exit codes of the ``cavitas`` command
-------------------------------------
==== =====================================================================
code meaning
==== =====================================================================
0    success
1    a batch finished, but some inputs failed (each failure is listed)
2    bad command line or bad parameter value (:class:`ParameterError`)
3    an input file is missing, unreadable or holds unusable data
     (:class:`InputFileError`); in a batch, an input named on the command line is
     missing (the others still run)
4    an output could not be written, or exists and ``--force`` was not given
     (:class:`OutputError`)
5    an unexpected internal error (a bug: please report it with ``--debug``)
130  interrupted by the user (Ctrl-C); nothing half-written is left behind
141  the reader of the output went away (e.g. ``cavitas info *.tif | head -1``)
==== =====================================================================
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

EXIT_OK = 0
EXIT_SOME_FAILED = 1
EXIT_PARAMETER = 2
EXIT_INPUT = 3
EXIT_OUTPUT = 4
EXIT_INTERNAL = 5
EXIT_INTERRUPTED = 130
EXIT_BROKEN_PIPE = 141  # 128 + SIGPIPE, as for any command whose reader stopped reading


def safe_text(text: str) -> str:
    """``text`` with bytes that are not UTF-8 (file names read with ``surrogateescape``)
    written as ``\\xNN`` escapes, so it can be printed and written as UTF-8.

    Examples
    --------
    >>> print(safe_text(b"caf\\xe9.tif".decode("utf-8", "surrogateescape")))
    caf\\xe9.tif
    """
    try:
        return text.encode("utf-8", "surrogateescape").decode("utf-8", "backslashreplace")
    except UnicodeEncodeError:  # a lone surrogate that no byte stands for
        return text.encode("utf-8", "backslashreplace").decode("utf-8")


def one_line(text: str) -> str:
    """``text`` on one printable line: control characters (a newline in a file name) and
    bytes that are not UTF-8 (names read with ``surrogateescape``) written as escapes.

    Examples
    --------
    >>> print(one_line("a" + chr(10) + "b.tif"))
    a\\nb.tif
    >>> print(one_line(b"caf\\xe9.tif".decode("utf-8", "surrogateescape")))
    caf\\xe9.tif
    """
    return "".join(c if c.isprintable() or c == " " else repr(c)[1:-1]
                   for c in safe_text(text))


class CavitasError(ValueError):
    """Base class of every error cavitas raises on purpose.

    Parameters
    ----------
    message : str
        One sentence; parameters are named as in the Python API.
    parameters : sequence of str
        The Python names of the parameters the message mentions (``"min_volume"``), which
        the command line rewrites into its option names.

    Examples
    --------
    >>> err = ParameterError("min_volume must be >= 0; got -1.", parameters=["min_volume"])
    >>> str(err), err.parameters, err.exit_code
    ('min_volume must be >= 0; got -1.', ('min_volume',), 2)
    """

    exit_code = EXIT_INTERNAL

    def __init__(self, message: str, *, parameters: Sequence[str] = ()) -> None:
        super().__init__(one_line(message))
        self.parameters = tuple(parameters)


class ParameterError(CavitasError):
    """A parameter has a value that cannot be used (names the parameter)."""

    exit_code = EXIT_PARAMETER


class InputFileError(CavitasError):
    """An input file is missing, unreadable, corrupt or holds unusable data (names the file)."""

    exit_code = EXIT_INPUT


class OutputError(CavitasError):
    """An output cannot be written or already exists (names the file)."""

    exit_code = EXIT_OUTPUT


class ChoiceNeeded(InputFileError):
    """A file holds several channels, time points or arrays, and none was chosen.

    ``parameters`` names the one option that chooses; ``choices`` lists what it accepts
    (indices from 0, or the names of the arrays), so a caller such as ``cavitas info`` can
    describe the file instead of refusing it.

    Examples
    --------
    >>> err = ChoiceNeeded("'a.tif' holds 3 channel(s); choose one with channel=N.",
    ...                    parameter="channel", choices=range(3))
    >>> err.parameters, err.choices
    (('channel',), [0, 1, 2])
    """

    def __init__(self, message: str, *, parameter: str = "",
                 choices: Sequence[Any] = ()) -> None:
        super().__init__(message, parameters=[parameter] if parameter else [])
        self.choices = list(choices)
