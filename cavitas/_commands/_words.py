"""Messages in the words of the command line: Python parameter names become option names.

Errors name parameters as the Python API does (``spacing=``, ``force=True``,
``min_volume``) and list them in :attr:`cavitas._errors.CavitasError.parameters`. This is the
one place that turns those names into the options of the command that ran, taken from the
command's own parser (so ``--config`` and ``--params`` both lead to ``--params``, the first
option declared); a parameter the command has no option for is written the way options are
(``--key``).
"""

from __future__ import annotations

import argparse
import re
from collections.abc import Iterable, Mapping

__all__ = ["in_option_words", "option_names"]


def option_names(parser: argparse.ArgumentParser) -> dict[str, str]:
    """Parameter (``dest``) -> the first long option that sets it, for ``parser``.

    Examples
    --------
    >>> p = argparse.ArgumentParser()
    >>> _ = p.add_argument("--min-volume", type=float)
    >>> _ = p.add_argument("--config", dest="params")
    >>> option_names(p)["min_volume"], option_names(p)["params"]
    ('--min-volume', '--config')
    """
    names: dict[str, str] = {}
    for action in parser._actions:
        long = [o for o in action.option_strings if o.startswith("--")]
        if long:
            names.setdefault(action.dest, long[0])
    return names


def in_option_words(message: str, parameters: Iterable[str],
                    options: Mapping[str, str]) -> str:
    """``message`` with each of ``parameters`` written as its command-line option.

    ``name=True`` becomes the bare flag, ``name=VALUE`` (quoted or not) becomes
    ``--option VALUE`` and ``name=`` becomes ``--option``. A bare name is rewritten where
    it cannot be an ordinary word: when it has an underscore (``min_volume``) or opens the
    message as its subject (``spacing must be ...``); so "3 time points" stays as it is.
    Parts of file names are never rewritten.

    Examples
    --------
    >>> opts = {"force": "--force", "region": "--region", "level_fraction": "--level-fraction"}
    >>> in_option_words("Output 'a.csv' exists; use force=True to replace it.", ["force"], opts)
    "Output 'a.csv' exists; use --force to replace it."
    >>> in_option_words("level_fraction needs region='breach'.",
    ...                 ["level_fraction", "region"], opts)
    '--level-fraction needs --region breach.'
    >>> in_option_words("'a.tif' holds 3 time points; choose one with time=N.", ["time"], {})
    "'a.tif' holds 3 time points; choose one with --time N."
    >>> in_option_words("Mask 'min_volume/min_volume.tif' is empty.", ["min_volume"], {})
    "Mask 'min_volume/min_volume.tif' is empty."
    """
    for name in parameters:
        option = options.get(name) or "--" + name.replace("_", "-")
        word = rf"(?<![\w\-'./]){re.escape(name)}"
        message = re.sub(rf"{word}=True\b", option, message)

        def as_option(match: re.Match[str], option: str = option) -> str:
            return f"{option} {match.group(2)}" if match.group(2) else option

        message = re.sub(rf"{word}=(['\"]?)([^\s,;)'\"]*)\1", as_option, message)
        bare = rf"{word}(?![\w=/]|\.\w)"
        if "_" in name:
            message = re.sub(bare, option, message)
        elif re.match(bare, message):
            message = option + message[len(name):]
    return message
