"""Reading and writing volumes: the :class:`Volume` type, :func:`read` and :func:`write`."""

from ._volume import Volume

__all__ = ["Volume"]
