"""Speed and memory benchmarks of cavitas (not tests): ``python -m bench``.

Each benchmark is a module of this package listed in ``bench.__main__.MODULES``. A module
defines ``NAME`` (a short word used by ``--only``) and ``run(args) -> list[dict]``; each
dict is one row of the printed table with the keys ``metric``, ``value`` (a string, already
formatted) and optionally ``target`` (what the value should stay within) and ``note``.
``args`` is the parsed command line (``args.large`` asks for the large sizes).

Speed is always given as a ratio against a reference run in the same process (numpy,
scipy, scikit-image), so the figures compare across machines; absolute times are shown too.
"""
