"""Plumbing every stage shares: atomic output, checksums and the memory model.

Each module here imports nothing from the stages (``io``, ``cubical``, ``segment``,
``measure``, ``report``, ``batch``), so any of them may import it:

- :mod:`.atomic`: write to a temporary file, then rename it into place;
- :mod:`.checksum`: the SHA-256 of a file;
- :mod:`.memory`: how much memory a segmentation needs, how much the machine has, and
  the guard that refuses what cannot fit.
"""
