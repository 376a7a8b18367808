"""A place for numba's cache of compiled kernels, even when the install is read-only.

The kernels are compiled with ``cache=True``: numba keeps them beside the source
(``__pycache__``) or in the user's cache folder (``~/.cache/numba``) and fails with
"no locator available" when neither can be written (a system-wide install, a home
without a writable cache). :func:`ensure_cache_dir` then points numba at a private
folder in the temporary directory, before any kernel is compiled.

Compiling takes several seconds on the first run (later runs load the cache):
:func:`announce_compilation` makes the commands say so in one line instead of sitting
silent, and only when numba really compiles (not when it loads from its cache).
"""

from __future__ import annotations

import contextlib
import os
import sys
import tempfile
from collections.abc import Callable
from pathlib import Path
from typing import Any

__all__ = ["COMPILING", "announce_compilation", "choose_cache_dir", "ensure_cache_dir",
           "stop_announcing"]

#: The line shown when numba starts compiling (it does so once per install and version).
COMPILING = "compiling kernels (first run only; later runs load them from the cache)"


def _writable(folder: Path) -> bool:
    """Whether a file can be created in ``folder`` (made if missing), as numba checks."""
    try:
        folder.mkdir(parents=True, exist_ok=True)
        tempfile.TemporaryFile(dir=folder).close()
    except OSError:
        return False
    return True


def _user_cache() -> Path:
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "numba"


def choose_cache_dir(package: Path, user: Path, temporary: Path) -> Path | None:
    """The folder numba must be given, or None when one of its own places is writable.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> here = pathlib.Path(tempfile.mkdtemp())
    >>> choose_cache_dir(here, here, here) is None
    True
    >>> choose_cache_dir(pathlib.Path("/proc/no"), pathlib.Path("/proc/no"), here) == here
    True
    """
    if _writable(package) or _writable(user):
        return None
    if not _private(temporary):  # someone else's folder: never load code from it
        return Path(tempfile.mkdtemp(prefix="cavitas-numba-"))
    return temporary if _writable(temporary) else None


def _private(folder: Path) -> bool:
    """Whether ``folder`` is missing, or a real folder only this user can write to."""
    try:
        status = folder.lstat()
    except FileNotFoundError:
        return True
    except OSError:
        return False
    mine = not hasattr(os, "getuid") or status.st_uid == os.getuid()
    return folder.is_dir() and not folder.is_symlink() and mine and not status.st_mode & 0o022


def ensure_cache_dir() -> None:
    """Set ``NUMBA_CACHE_DIR`` to a private temporary folder when numba has no writable
    place of its own (and the user did not choose one)."""
    if os.environ.get("NUMBA_CACHE_DIR"):
        return
    package = Path(__file__).resolve().parent / "cubical" / "__pycache__"
    uid = os.getuid() if hasattr(os, "getuid") else "user"
    temporary = Path(tempfile.gettempdir()) / f"cavitas-numba-{uid}"
    chosen = choose_cache_dir(package, _user_cache(), temporary)
    if chosen is None:
        return
    with contextlib.suppress(OSError):
        chosen.chmod(0o700)  # private: cached code is loaded and run
    os.environ["NUMBA_CACHE_DIR"] = str(chosen)
    config: Any = sys.modules.get("numba.core.config")  # numba is not type-checked
    if config is not None:  # numba was imported first: it has read its settings already
        config.CACHE_DIR = str(chosen)


_armed: list[Callable[[str], None]] = []  # the writer to call at the next compilation
_listening: list[bool] = []                # whether the listener is registered


def stop_announcing() -> None:
    """Disarm :func:`announce_compilation`: a later compilation writes nothing.

    Examples
    --------
    >>> from numba import njit
    >>> lines = []
    >>> announce_compilation(lines.append); stop_announcing()
    >>> njit(lambda x: x + 3)(1), lines
    (4, [])
    """
    _armed.clear()


def announce_compilation(write: Callable[[str], None]) -> None:
    """Call ``write(COMPILING)`` once, at the next time numba compiles a kernel.

    Loading a kernel from numba's cache is no compilation (numba raises its
    ``numba:compile`` event only on a cache miss), so a warm install stays quiet.
    Calling again replaces the writer and arms it again.

    Examples
    --------
    >>> from numba import njit
    >>> lines = []
    >>> announce_compilation(lines.append)
    >>> njit(lambda x: x + 1)(1), njit(lambda x: x + 2)(1), lines == [COMPILING]
    (2, 3, True)
    """
    _armed[:] = [write]
    if _listening:
        return
    from numba.core import event

    class _FirstCompilation(event.Listener):
        def on_start(self, _event: Any) -> None:
            if _armed:
                _armed.pop()(COMPILING)

        def on_end(self, _event: Any) -> None:
            return None

    event.register("numba:compile", _FirstCompilation())
    _listening.append(True)
