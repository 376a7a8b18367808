"""Error classes shared by every stage, and the exit codes the command line uses.

Every user-facing error is one sentence that names the file or the parameter, what was
expected and what came. They all derive from :class:`CavitasError`, itself a ``ValueError``,
so library users can catch one class.

Exit codes of the ``cavitas`` command
-------------------------------------
==== =====================================================================
code meaning
==== =====================================================================
0    success
1    a batch finished, but some inputs failed (each failure is listed)
2    bad command line or bad parameter value (:class:`ParameterError`)
3    an input file is missing, unreadable or holds unusable data
     (:class:`InputFileError`)
4    an output could not be written, or exists and ``--force`` was not given
     (:class:`OutputError`)
5    an unexpected internal error (a bug: please report it with ``--debug``)
130  interrupted by the user (Ctrl-C); nothing half-written is left behind
==== =====================================================================
"""

from __future__ import annotations

EXIT_OK = 0
EXIT_SOME_FAILED = 1
EXIT_PARAMETER = 2
EXIT_INPUT = 3
EXIT_OUTPUT = 4
EXIT_INTERNAL = 5
EXIT_INTERRUPTED = 130


class CavitasError(ValueError):
    """Base class of every error cavitas raises on purpose."""

    exit_code = EXIT_INTERNAL


class ParameterError(CavitasError):
    """A parameter has a value that cannot be used (names the parameter)."""

    exit_code = EXIT_PARAMETER


class InputFileError(CavitasError):
    """An input file is missing, unreadable, corrupt or holds unusable data (names the file)."""

    exit_code = EXIT_INPUT


class OutputError(CavitasError):
    """An output cannot be written or already exists (names the file)."""

    exit_code = EXIT_OUTPUT
