"""Damaged files never cause an internal error: each read succeeds or fails in one sentence.

Hypothesis damages valid seed files of every reader (``tests/malformed.py``: cuts, bit
flips, overwritten runs, huge or negative numbers written over header fields, a wrong
signature; for Zarr also deleted chunks). The contract checked is the project's own
(design notes: "bad input gets one clear sentence naming the file and the problem"):
reading and describing the volume as ``cavitas info`` does either works or raises a
:class:`~cavitas._errors.CavitasError` whose message is one line, names the file, gives a
reason, and holds no library text (exception class names, Python internals). Any other
exception is the "exit 5" this test exists to catch.

``CAVITAS_FUZZ_EXAMPLES=N`` runs N cases per seed instead of the 150 of CI (two seeds
for TIFF, NIfTI and .npz, three Zarr stores: a few hundred cases per reader).
"""

import os
import re
import tempfile
from collections import Counter
from importlib.util import find_spec
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from cavitas._commands.info import describe
from cavitas._errors import CavitasError, InputFileError
from cavitas.cli import main
from cavitas.io import read
from tests import malformed

EXAMPLES = int(os.environ.get("CAVITAS_FUZZ_EXAMPLES", "150"))
FUZZ = settings(max_examples=EXAMPLES, deadline=None, derandomize=True,
                suppress_health_check=[HealthCheck.too_slow])
#: Outcome counts per seed ("clean error" / "success"), for the figures of issue 14.
OUTCOMES: dict[str, Counter] = {}

#: Library text that must not reach a user: exception class names and Python internals.
_LIBRARY_TEXT = re.compile(r"\b[A-Z]\w*(Error|Exception|Warning)\b|Traceback|<class |"
                           r"object has no attribute|not supported between|"
                           r"arg is an empty sequence|unexpected keyword|NoneType")

damages = st.builds(malformed.Damage,
                    kind=st.sampled_from(["cut", "flip", "overwrite", "inflate", "magic"]),
                    position=st.floats(0, 1), value=st.integers(0, 2**16))


def check_sentence(error: CavitasError, target: Path) -> None:
    """One line naming the file, with a reason, and no library text."""
    message = str(error)
    assert "\n" not in message and message.strip(), message
    assert target.name in message, message
    reason = message.split(target.name, 1)[1]
    assert len(re.findall(r"[a-z]{2,}", reason)) >= 3, message  # an actual reason
    assert not _LIBRARY_TEXT.search(message), message


def outcome(seed: str, target: Path, **options) -> str:
    """Read ``target`` and describe it as ``cavitas info`` does; tally and return the outcome."""
    try:
        describe(read(target, **options))
        result = "success"
    except CavitasError as exc:
        check_sentence(exc, target)
        result = "clean error"
    OUTCOMES.setdefault(seed, Counter())[result] += 1
    return result


@pytest.fixture(scope="module", autouse=True)
def tally():
    """With ``CAVITAS_FUZZ_EXAMPLES`` set, print the outcome counts per seed (``pytest -s``)."""
    yield
    if "CAVITAS_FUZZ_EXAMPLES" in os.environ:
        for seed, counts in sorted(OUTCOMES.items()):
            print(f"fuzz {seed}: {sum(counts.values())} cases, {dict(counts)}")


@pytest.fixture(scope="module")
def seeds(tmp_path_factory):
    """Bytes of each valid seed file, by reader (seed name -> (file name, bytes, options))."""
    folder = tmp_path_factory.mktemp("seeds")
    made = {
        "tiff": malformed.tiff_seed(folder, False), "tiff-zlib": malformed.tiff_seed(folder, True),
        "nifti": malformed.nifti_seed(folder, False),
        "nifti-gz": malformed.nifti_seed(folder, True), "npy": malformed.npy_seed(folder),
        "npz": malformed.npz_seed(folder, False), "npz-deflate": malformed.npz_seed(folder, True),
        "png": malformed.png_seed(folder), "raw": malformed.raw_seed(folder),
    }
    options = {"raw": {"shape": (3, 6, 7), "dtype": "uint16"}}
    if find_spec("h5py") is not None:
        made["hdf5"] = malformed.hdf5_seed(folder)
    return {name: (path.name, path.read_bytes(), options.get(name, {}))
            for name, path in made.items()}


@pytest.mark.parametrize("seed", ["tiff", "tiff-zlib", "nifti", "nifti-gz", "npy", "npz",
                                  "npz-deflate", "png", "raw", "hdf5"])
def test_damaged_file_reads_or_fails_in_one_sentence(seeds, seed):
    if seed not in seeds:
        pytest.skip(f"{seed} needs an optional package")
    name, data, options = seeds[seed]

    @FUZZ
    @given(damage=damages)
    def run(damage):
        with tempfile.TemporaryDirectory() as folder:
            target = Path(folder) / name
            target.write_bytes(damage.apply(data))
            outcome(seed, target, **options)

    run()
    assert sum(OUTCOMES[seed].values()) >= 1


@pytest.mark.parametrize("compressor", ["blosc", "zlib", "none"])
def test_damaged_zarr_store_reads_or_fails_in_one_sentence(tmp_path, compressor):
    pytest.importorskip("zarr")
    store = malformed.zarr_seed(tmp_path, compressor)
    files = sorted(p.relative_to(store) for p in store.rglob("*") if p.is_file())
    contents = {p: (store / p).read_bytes() for p in files}

    @FUZZ
    @given(damage=damages, which=st.integers(0, len(files) - 1), delete=st.booleans())
    def run(damage, which, delete):
        with tempfile.TemporaryDirectory() as folder:
            target = Path(folder) / store.name
            for relative, data in contents.items():
                (target / relative).parent.mkdir(parents=True, exist_ok=True)
                if relative == files[which]:
                    if delete:
                        continue
                    data = damage.apply(data)
                (target / relative).write_bytes(data)
            outcome(f"zarr-{compressor}", target)

    run()


@pytest.mark.parametrize("compressor", ["blosc", "zlib"])
def test_zarr_missing_chunk_is_an_error_or_filled_on_request(tmp_path, compressor):
    """Zarr reads a missing chunk as the fill value (Zarr v2 storage specification,
    "chunks ... that have not been initialized"): cavitas refuses it unless asked to fill."""
    pytest.importorskip("zarr")
    store = malformed.zarr_seed(tmp_path, compressor)
    (store / "1.1.0").unlink()
    with pytest.raises(InputFileError,
                       match=r"has no chunk 1\.1\.0, one of the 8 chunks to read") as caught:
        read(store)
    check_sentence(caught.value, store)
    filled = read(store, missing_chunks="fill")
    assert np.asarray(filled.data)[2, 3:, :4].max() == 0  # the fill value, as Zarr reads it
    assert any("1 of 8 chunks are missing" in w for w in filled.meta["warnings"])



def test_zarr_missing_chunk_on_the_command_line(tmp_path, capsys):
    pytest.importorskip("zarr")
    store = malformed.zarr_seed(tmp_path, "zlib")
    (store / "0.1.1").unlink()
    assert main(["info", str(store)]) == 3
    assert "give --missing-chunks fill if the writer" in capsys.readouterr().err
    assert main(["info", str(store), "--missing-chunks", "fill"]) == 0
    assert "1 of 8 chunks are missing" in capsys.readouterr().out


def test_cut_blosc_chunk_is_detected_by_its_sizes(tmp_path):
    """A Blosc chunk cut short decodes without error into varying values; its header states
    the compressed size (c-blosc README_HEADER.rst), which the read checks."""
    pytest.importorskip("zarr")
    store = malformed.zarr_seed(tmp_path, "blosc")
    chunk = store / "0.0.0"
    chunk.write_bytes(chunk.read_bytes()[:-5])
    with pytest.raises(InputFileError, match=r"chunk 0\.0\.0 holds \d+ bytes but its Blosc "
                                             r"header states \d+"):
        read(store)


@pytest.mark.parametrize("multiscales", [5, "x", [5], [{"datasets": 3}], [{"datasets": [7]}],
                                         [{"datasets": [{"path": "nope"}]}]])
def test_ome_zarr_multiscales_of_the_wrong_type(tmp_path, multiscales):
    pytest.importorskip("zarr")
    store = malformed.zarr_seed(tmp_path, "zlib")
    group = tmp_path / "image.zarr"
    group.mkdir()
    (group / ".zgroup").write_text('{"zarr_format": 2}')
    (group / ".zattrs").write_bytes(malformed.ome_zarr_attrs(multiscales))
    store.rename(group / "0")
    assert outcome("ome-zarr", group) in ("clean error", "success")


@pytest.mark.parametrize("member", [b"", b"not an array", b"\x93NUMPY\x01\x00\xff\xff{",
                                    b"\x93NUMPY\x01\x00\x10\x00{'descr': '<i2', 'fortran_ord"])
def test_npz_member_that_is_not_an_array(tmp_path, member):
    target = malformed.npz_with_member(tmp_path, member)
    with pytest.raises(InputFileError) as caught:
        read(target)
    check_sentence(caught.value, target)


def test_npy_declaring_more_than_it_holds_is_refused_before_allocating(tmp_path):
    """A 128-byte .npy header declaring 1024^3 int16 (the case of issue 14) fails on its
    size, whatever the memory: the header layout is NumPy's (numpy.lib.format)."""
    target = tmp_path / "huge.npy"
    header = {"descr": "<i2", "fortran_order": False, "shape": (1024, 1024, 1024)}
    with open(target, "wb") as stream:
        np.lib.format.write_array_header_1_0(stream, header)
        stream.write(b"\0" * 64)
    for mmap in (True, False):
        with pytest.raises(InputFileError, match=r"declares 1024 x 1024 x 1024 int16 voxels "
                                                 r"\(2147483648 bytes\) but holds only 64"):
            read(target, mmap=mmap)


def test_nifti_declaring_more_than_it_holds_is_refused_before_allocating(tmp_path):
    """A NIfTI-1 header (nibabel writes it) declaring 1024^3 int16 over 64 bytes of data."""
    nib = pytest.importorskip("nibabel")
    header = nib.Nifti1Header()
    header.set_data_shape((1024, 1024, 1024))
    header.set_data_dtype(np.int16)
    header["vox_offset"] = 352  # the voxels follow the 348-byte header and 4 flag bytes
    target = tmp_path / "huge.nii"
    target.write_bytes(header.binaryblock + b"\0" * 4 + b"\0" * 64)  # 348 + extension flag
    with pytest.raises(InputFileError, match=r"huge\.nii' declares 1024 x 1024 x 1024 int16 "
                                             r"voxels \(2147483648 bytes\) but holds only 64"):
        read(target, mmap=False)


@pytest.mark.parametrize("shape", [(2**40, 2**40, 2**40), (2**62, 4)])
def test_raw_shape_that_overflows_64_bits(tmp_path, shape):
    target = tmp_path / "block.raw"
    target.write_bytes(b"\0" * 64)
    with pytest.raises(InputFileError, match=r"has 64 bytes, but shape") as caught:
        read(target, shape=shape, dtype="uint16")
    check_sentence(caught.value, target)


def test_boolean_npy_is_described(tmp_path):
    """A mask saved as bool .npy (one of the issue-14 findings): described as 0 and 1."""
    np.save(tmp_path / "mask.npy", np.eye(6, dtype=bool))
    facts = describe(read(tmp_path / "mask.npy"))
    assert (facts["min"], facts["max"], facts["dtype"]) == (0, 1, "bool")


def test_npz_spacing_of_text_is_a_clean_error(tmp_path):
    np.savez(tmp_path / "a.npz", image=np.eye(6), spacing=np.array(["a", "b"]))
    with pytest.raises(InputFileError, match=r"holds a spacing of <U1 values; expected numbers"):
        read(tmp_path / "a.npz")


@pytest.mark.parametrize("side", [20_000, 10**6])
def test_png_declaring_a_huge_image_is_refused_before_decoding(tmp_path, side):
    """A 1 kB PNG whose IHDR chunk (PNG specification 11.2.2) declares side x side grey
    pixels: refused by Pillow's decompression-bomb limit or by the memory check."""
    import struct
    import zlib

    def chunk(kind, data):
        return (struct.pack(">I", len(data)) + kind + data
                + struct.pack(">I", zlib.crc32(kind + data)))

    header = struct.pack(">IIBBBBB", side, side, 8, 0, 0, 0, 0)
    target = tmp_path / "bomb.png"
    target.write_bytes(b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", header)
                       + chunk(b"IDAT", zlib.compress(b"\0" * 1000)) + chunk(b"IEND", b""))
    with pytest.raises(InputFileError) as caught:
        read(target)
    check_sentence(caught.value, target)


def test_ome_zarr_only_the_chunks_read_must_be_there(tmp_path):
    """A time series (OME-NGFF 0.4 axes t, y, x) whose second time point lost its chunk:
    the first reads, the second is refused."""
    zarr = pytest.importorskip("zarr")
    group = zarr.open_group(str(tmp_path / "series.zarr"), mode="w", zarr_format=2)
    array = group.create_array("0", shape=(2, 6, 7), chunks=(1, 6, 7), dtype="uint8")
    array[:] = 5
    group.attrs["multiscales"] = [{"version": "0.4", "datasets": [{"path": "0"}],
                                   "axes": [{"name": "t", "type": "time"},
                                            {"name": "y", "type": "space"},
                                            {"name": "x", "type": "space"}]}]
    (tmp_path / "series.zarr" / "0" / "1.0.0").unlink()
    assert np.asarray(read(tmp_path / "series.zarr", time=0).data).min() == 5
    with pytest.raises(InputFileError, match=r"has no chunk 1\.0\.0, one of the 1 chunks"):
        read(tmp_path / "series.zarr", time=1)
