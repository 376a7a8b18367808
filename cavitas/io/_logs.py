"""Collect what a reading library logs, instead of letting it print to the terminal."""

from __future__ import annotations

import contextlib
import logging
from collections.abc import Iterator

__all__ = ["collect_log"]


class _Collector(logging.Handler):
    def __init__(self) -> None:
        super().__init__(logging.WARNING)
        self.records: list[logging.LogRecord] = []

    def emit(self, record: logging.LogRecord) -> None:
        self.records.append(record)

    def messages(self, level: int = logging.WARNING) -> list[str]:
        """Messages at ``level`` or above, without the library's object prefix."""
        return [r.getMessage().split("> ", 1)[-1] for r in self.records if r.levelno >= level]


@contextlib.contextmanager
def collect_log(name: str) -> Iterator[_Collector]:
    """Within the block, records of logger ``name`` go only to the yielded collector.

    Examples
    --------
    >>> with collect_log("some.library") as log:
    ...     logging.getLogger("some.library").warning("odd tag")
    >>> log.messages()
    ['odd tag']
    """
    logger = logging.getLogger(name)
    collector = _Collector()
    saved = logger.handlers[:], logger.propagate, logger.level
    logger.handlers[:] = [collector]
    logger.propagate = False
    logger.setLevel(logging.WARNING)  # collect warnings whatever the root level is (-q)
    try:
        yield collector
    finally:
        logger.handlers[:], logger.propagate = saved[0], saved[1]
        logger.setLevel(saved[2])
