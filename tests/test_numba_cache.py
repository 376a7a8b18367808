"""A read-only install still runs: numba's cache goes to a private temporary folder when
neither the package's ``__pycache__`` nor the user's cache can be written (numba's own
rule: "no locator available" otherwise, numba.core.caching)."""

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
