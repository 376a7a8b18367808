"""Doctests of modules that need an optional extra skip, visibly, when it is not installed."""

from __future__ import annotations

import importlib

import pytest

#: Module file (relative to the repository) -> the import its doctests need.
_DOCTESTS_NEED = {"cavitas/io/_zarr.py": "zarr"}


def _importable(module: str) -> bool:
    try:
        importlib.import_module(module)
    except ImportError:
        return False
    return True


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    for item in items:
        if not isinstance(item, pytest.DoctestItem):
            continue
        for path, module in _DOCTESTS_NEED.items():
            if item.path.as_posix().endswith(path) and not _importable(module):
                item.add_marker(pytest.mark.skip(reason=f"needs the optional extra {module}"))
