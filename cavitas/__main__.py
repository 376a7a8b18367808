"""``python -m cavitas``: the ``cavitas`` command (:func:`cavitas.cli.console`)."""

from .cli import console

console()
