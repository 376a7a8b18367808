"""``cavitas diagram`` through ``cavitas.cli.main``: exit codes, files written, summary.

The input is a scene of our own (invented data, for this test only): dark disks inside
bright rings on a dark background. The reference for the number of cavities is
``scipy.ndimage.label`` on the dark set (components that do not touch the border).
"""

import numpy as np
import pytest
import tifffile
from scipy import ndimage

from cavitas import RESEARCH_ONLY
from cavitas.cli import main
from cavitas.cubical import load_diagram, persistence


def rings(shape=(40, 60), centres=((12, 14), (28, 30), (14, 46)), seed=0):
    """Bright rings (value ~200) around dark disks (~20) on a dark background, with noise."""
    yy, xx = np.indices(shape)
    image = np.full(shape, 30.0)
    for cy, cx in centres:
        r = np.hypot(yy - cy, xx - cx)
        image[(r >= 5) & (r < 8)] = 200.0
        image[r < 5] = 20.0
    image += np.random.default_rng(seed).uniform(-5, 5, shape)
    return image.astype(np.float32)


@pytest.fixture
def scan(tmp_path):
    path = tmp_path / "rings.tif"
    tifffile.imwrite(path, rings())
    return path


def test_writes_the_four_outputs_and_the_summary(tmp_path, scan, capsys):
    out = tmp_path / "out"
    assert main(["diagram", str(scan), "-o", str(out)]) == 0
    assert sorted(p.name for p in out.iterdir()) == \
        ["barcode.png", "diagram.csv", "diagram.npz", "diagram.png"]
    dgm = load_diagram(out / "diagram.npz")
    direct = persistence(tifffile.imread(scan))
    for dim in (0, 1):  # consistency: the file holds what the library computes
        np.testing.assert_array_equal(dgm.pairs(dim), direct.pairs(dim))
    # reference: scipy.ndimage.label, enclosed components of the dark set below 100
    dark, n = ndimage.label(tifffile.imread(scan) < 100)
    border = np.unique(np.concatenate([dark[0], dark[-1], dark[:, 0], dark[:, -1]]))
    enclosed = n - len(set(border.tolist()) - {0})
    assert enclosed == 3
    assert int(np.sum(dgm.persistence(1) > 100)) == enclosed
    csv_dgm = load_diagram(out / "diagram.csv")
    assert csv_dgm.pairs(1).tobytes() == dgm.pairs(1).tobytes()
    for name in ("diagram.png", "barcode.png"):
        assert (out / name).read_bytes()[:4] == b"\x89PNG"
    printed = capsys.readouterr().out
    assert "H1 (cavities)" in printed and RESEARCH_ONLY in printed


def test_existing_output_needs_force(tmp_path, scan, capsys):
    out = tmp_path / "out"
    assert main(["diagram", str(scan), "-o", str(out), "-q"]) == 0
    assert capsys.readouterr().out == ""  # -q prints nothing but errors
    before = (out / "diagram.npz").read_bytes()
    assert main(["diagram", str(scan), "-o", str(out), "--walls", "dark"]) == 4
    assert "--force" in capsys.readouterr().err
    assert (out / "diagram.npz").read_bytes() == before  # nothing replaced
    assert main(["diagram", str(scan), "-o", str(out), "--walls", "dark", "--force", "-q"]) == 0
    assert load_diagram(out / "diagram.npz").walls == "dark"


def test_mask_and_options(tmp_path, scan):
    mask = np.zeros((40, 60), np.uint8)
    mask[:, :38] = 1  # keeps the two left rings
    tifffile.imwrite(tmp_path / "roi.tif", mask)
    out = tmp_path / "out"
    code = main(["diagram", str(scan), "-o", str(out), "--mask", str(tmp_path / "roi.tif"),
                 "--connectivity", "2", "--bars", "5", "-q"])
    assert code == 0
    dgm = load_diagram(out / "diagram.npz")
    assert dgm.masked and dgm.connectivity == 2
    assert int(np.sum(dgm.persistence(1) > 100)) == 2


def test_errors_have_exit_codes(tmp_path, scan, capsys):
    out = str(tmp_path / "out")
    assert main(["diagram", str(tmp_path / "missing.tif"), "-o", out]) == 3
    assert "missing.tif" in capsys.readouterr().err
    tifffile.imwrite(tmp_path / "small.tif", np.ones((5, 5), np.uint8))
    assert main(["diagram", str(scan), "-o", out, "--mask", str(tmp_path / "small.tif")]) == 3
    assert "small.tif" in capsys.readouterr().err
    assert main(["diagram", str(scan), "-o", out, "--connectivity", "7"]) == 2
    assert main(["diagram", str(scan), "-o", out, "--bars", "0"]) == 2
    assert main(["diagram", str(scan)]) == 2  # -o is required
    assert not (tmp_path / "out").exists() or not any((tmp_path / "out").iterdir())


def test_help_teaches(capsys):
    assert main(["diagram", "--help"]) == 0
    text = capsys.readouterr().out
    assert "examples:" in text and "--walls dark" in text and "research" in text.lower()
    for option in ("--out", "--walls", "--connectivity", "--mask", "--channel", "--time",
                   "--bars", "--force", "--one-thread"):
        assert option in text


def test_volume_cavity_dimension_is_h2(tmp_path):
    # scene of our own: a bright spherical shell around a dark core, in a 3D stack;
    # reference: one enclosed dark component (scipy.ndimage.label), i.e. one H2 class, and
    # no loop (a spherical shell has Betti numbers 1, 0, 1: textbook topology)
    zz, yy, xx = np.indices((14, 16, 16))
    r = np.hypot(np.hypot(zz - 7, yy - 8), xx - 8)
    volume = np.where((r >= 3.5) & (r < 5.5), 180, 10).astype(np.uint8)
    labels, n = ndimage.label(volume < 100)
    assert n == 2 and labels[7, 8, 8] != labels[0, 0, 0]
    tifffile.imwrite(tmp_path / "shell.tif", volume)
    out = tmp_path / "out"
    assert main(["diagram", str(tmp_path / "shell.tif"), "-o", str(out), "-q"]) == 0
    dgm = load_diagram(out / "diagram.csv")
    assert dgm.dims == (0, 1, 2)  # a volume's diagram has every dimension
    assert dgm.pairs(2)[["birth", "death"]].tolist() == [(180.0, 10.0)]
    assert len(dgm.pairs(1)) == 0
    # the low-memory run (sweeps one after the other) writes the same diagram
    assert main(["diagram", str(tmp_path / "shell.tif"), "-o", str(tmp_path / "serial"),
                 "--one-thread", "-q"]) == 0
    serial = load_diagram(tmp_path / "serial" / "diagram.csv")
    for dim in (0, 1, 2):
        np.testing.assert_array_equal(serial.pairs(dim), dgm.pairs(dim))


def test_euler_option_writes_the_curve(tmp_path, scan):
    # reference: skimage.measure.euler_number of the walls at each written level (Ohser,
    # Nagel & Schladitz 2002); walls bright, connectivity 2 in cavitas and in skimage
    from skimage.measure import euler_number

    from cavitas._table import Table

    out = tmp_path / "out"
    assert main(["diagram", str(scan), "-o", str(out), "--euler", "--connectivity", "2",
                 "-q"]) == 0
    table = Table.from_csv(out / "euler.csv")
    image = tifffile.imread(scan)
    levels = table["level"].astype(image.dtype)  # the shortest decimal of each float32
    assert np.all(np.diff(levels) < 0)  # bright walls: levels fall
    for level, chi in zip(levels[::7], table["euler_characteristic"][::7], strict=True):
        assert chi == euler_number(image >= level, connectivity=2)
    # the rings at a level between background and walls: three rings, each with one hole
    below_walls = levels[levels > 100][-1]
    assert table["euler_characteristic"][levels == below_walls][0] == 0
    assert (out / "euler.png").read_bytes()[:4] == b"\x89PNG"
