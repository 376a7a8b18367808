"""The shared plumbing (`cavitas/_shared`): below every stage, and still reachable by the
public names it had in `cavitas.io` (project convention, DEVELOPERS.md's layout table)."""

from __future__ import annotations

import ast
import hashlib
from pathlib import Path

import numpy as np

import cavitas
import cavitas.io
from cavitas._shared import checksum, memory

STAGES = {"io", "cubical", "segment", "measure", "report", "batch", "scenes", "workflow",
          "compare", "cli", "_commands"}


def _imported_cavitas_modules(path: Path) -> set[str]:
    """First component below ``cavitas`` of every module ``path`` imports."""
    found = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom):
            if node.level == 2:  # from ..x import y
                names = [node.module] if node.module else [a.name for a in node.names]
                found.update(n.split(".")[0] for n in names)
            elif node.level == 0 and (node.module or "").startswith("cavitas."):
                found.add(node.module.split(".")[1])
        elif isinstance(node, ast.Import):
            found.update(a.name.split(".")[1] for a in node.names
                         if a.name.startswith("cavitas."))
    return found


def test_shared_modules_import_no_stage():
    folder = Path(cavitas.__file__).parent / "_shared"
    modules = sorted(folder.glob("*.py"))
    assert len(modules) >= 4
    for path in modules:
        assert not _imported_cavitas_modules(path) & STAGES, path.name


def test_io_keeps_its_public_memory_estimate():
    assert cavitas.io.estimate_memory_bytes is memory.estimate_memory_bytes
    assert "estimate_memory_bytes" in cavitas.io.__all__
    # input plus the measured work per voxel (DEVELOPERS.md: 66 bytes for uint16), common
    # practice for a budget
    assert cavitas.io.estimate_memory_bytes((100, 100, 100), np.uint16) >= 10**6 * (2 + 66)


def test_file_checksum_matches_hashlib_across_blocks(tmp_path):
    data = np.random.default_rng(0).bytes(3 * (1 << 20) + 17)  # several read blocks
    path = tmp_path / "blob.bin"
    path.write_bytes(data)
    assert checksum.file_checksum(path) == hashlib.sha256(data).hexdigest()  # reference: hashlib
