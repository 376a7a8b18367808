"""A read-only install still runs: numba's cache goes to a private temporary folder when
neither the package's ``__pycache__`` nor the user's cache can be written (numba's own
rule: "no locator available" otherwise, numba.core.caching)."""

import os
import subprocess
import sys
from pathlib import Path

from cavitas._numba_cache import choose_cache_dir

#: No one can create folders under /proc (Linux), not even root.
UNWRITABLE = Path("/proc/cavitas-none/numba")


def test_own_places_are_used_when_writable(tmp_path):
    assert choose_cache_dir(tmp_path / "pkg", tmp_path / "user", tmp_path / "tmp") is None


def test_read_only_places_lead_to_a_private_temporary_folder(tmp_path):
    chosen = choose_cache_dir(UNWRITABLE, UNWRITABLE, tmp_path / "tmp")
    assert chosen == tmp_path / "tmp"


def test_someone_elses_folder_is_not_used(tmp_path):
    shared = tmp_path / "shared"
    shared.mkdir()
    shared.chmod(0o777)  # writable by everyone: cached code there could be anyone's
    chosen = choose_cache_dir(UNWRITABLE, UNWRITABLE, shared)
    assert chosen is not None and chosen != shared and chosen.is_dir()


KERNEL = """
from numba import njit


@njit(cache=True, nogil=True)
def twice(x):
    return 2 * x
"""

RUN = """
import sys
sys.path.insert(0, sys.argv[1])
from cavitas._numba_cache import announce_compilation
lines = []
announce_compilation(lines.append)
import kernel_module
assert kernel_module.twice(21) == 42
print(len(lines))
"""


def test_compiled_once_then_loaded_from_the_private_cache_in_silence(tmp_path):
    # numba's documented cache behaviour (numba docs, "Notes on Caching"): with
    # NUMBA_CACHE_DIR set, the first process compiles and stores the kernel, the next one
    # loads it. Here the folder is the one a read-only install is given; the first
    # process says it compiles, the second says nothing.
    source = tmp_path / "src"
    source.mkdir()
    (source / "kernel_module.py").write_text(KERNEL)
    cache = choose_cache_dir(UNWRITABLE, UNWRITABLE, tmp_path / "cache")
    env = dict(os.environ, NUMBA_CACHE_DIR=str(cache))
    said = [subprocess.run([sys.executable, "-c", RUN, str(source)], env=env, check=True,
                           capture_output=True, text=True).stdout.strip() for _ in range(2)]
    assert said == ["1", "0"]
    assert any(cache.rglob("*.nbi"))  # numba's index of cached kernels
