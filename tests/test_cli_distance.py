"""``cavitas distance`` through ``cavitas.cli.main``: values, files, notes and exit codes.

The scans are tiny hand-made rings whose diagrams follow from the definition of the
superlevel filtration: a ring of level 9 around an inside of level c is one wall
component born at 9 that never dies (H0: (9, -inf)) and one cavity born when the ring
closes at 9 and filled at c (H1: (9, c)). The distances then follow by hand from the
definition (L∞ between points, half the persistence to the diagonal; Cohen-Steiner,
Edelsbrunner & Harer 2007).
"""

import json

import numpy as np
import pytest
import tifffile

from cavitas import RESEARCH_ONLY
from cavitas._table import Table
from cavitas.cli import main
from cavitas.cubical import PAIR_DTYPE, Diagram, persistence


def ring(inside, shape=(9, 9)):
    image = np.zeros(shape, np.float32)
    image[2:7, 2:7] = 9.0
    image[3:6, 3:6] = inside
    return image


@pytest.fixture
def scans(tmp_path):
    paths = []
    for k, inside in enumerate((2.0, 5.0, 8.0)):
        paths.append(tmp_path / f"ring{k}.tif")
        tifffile.imwrite(paths[-1], ring(inside))
    return [str(p) for p in paths]


def test_ring_distances_by_hand(tmp_path, scans, capsys):
    # hand-worked: H1 points (9, 2), (9, 5), (9, 8). (9,2)-(9,5): matched 3, to the
    # diagonal max(3.5, 2) -> 3. (9,2)-(9,8): matched 6, diagonal max(3.5, 0.5) -> 3.5.
    # (9,5)-(9,8): matched 3, diagonal max(2, 0.5) = 2 -> 2. H0: (9, -inf) each -> 0.
    out = tmp_path / "out"
    assert main(["distance", *scans, "-o", str(out)]) == 0
    table = Table.from_csv(out / "distances.csv")
    assert table["dimension"].tolist() == [0, 0, 0, 1, 1, 1]
    h1 = np.array([[table[f"ring{j}.tif"][3 + i] for j in range(3)] for i in range(3)])
    np.testing.assert_array_equal(h1, [[0, 3, 3.5], [3, 0, 2], [3.5, 2, 0]])
    assert np.all(np.array([table[f"ring{j}.tif"][:3] for j in range(3)]) == 0)
    record = json.loads((out / "distances.json").read_text(encoding="utf-8"))
    assert record["metric"] == "bottleneck" and record["distances"]["H1"][0][2] == 3.5
    assert [i["from"] for i in record["inputs"]] == ["image"] * 3
    for name in ("matching-1-2.png", "matching-1-3.png"):
        assert (out / name).read_bytes()[:4] == b"\x89PNG"
    printed = capsys.readouterr().out
    assert "ring0.tif–ring2.tif 3.5" in printed and RESEARCH_ONLY in printed


def test_tunnels_of_volumes_on_request(tmp_path):
    # hand-worked: the same rings lying in one slice of a volume are loops of wall, H1
    # points (9, 2) and (9, 5) (the loop closes at 9 and is filled through its inside at
    # c); as in 2D their bottleneck distance is 3. Without --dimensions a volume's H1 is
    # not computed (H0 and cavities only).
    paths = []
    for inside in (2.0, 5.0):
        volume = np.zeros((5, 9, 9), np.float32)
        volume[2] = ring(inside)
        paths.append(tmp_path / f"loop{inside:g}.npy")
        np.save(paths[-1], volume)
    out = tmp_path / "out"
    assert main(["distance", *map(str, paths), "-o", str(out), "--dimensions", "0,1,2"]) == 0
    table = Table.from_csv(out / "distances.csv")
    assert table["dimension"].tolist() == [0, 0, 1, 1, 2, 2]
    assert table["loop5.npy"][2] == 3.0 and table["loop2.npy"][2] == 0.0
    assert main(["distance", *map(str, paths), "-o", str(tmp_path / "plain")]) == 0
    assert Table.from_csv(tmp_path / "plain" / "distances.csv")["dimension"].tolist() == [
        0, 0, 2, 2]


def test_wasserstein_by_hand_and_saved_diagrams(tmp_path, scans):
    # hand-worked, order 2: (9,2)-(9,8): matched 6, diagonal sqrt(3.5² + 0.5²) = 3.5355
    saved = tmp_path / "saved"
    assert main(["diagram", scans[2], "-o", str(saved), "-q"]) == 0
    out = tmp_path / "w"
    assert main(["distance", scans[0], str(saved / "diagram.npz"), str(saved / "diagram.csv"),
                 "-o", str(out), "--metric", "wasserstein", "--order", "2",
                 "--dimensions", "1", "-q"]) == 0
    record = json.loads((out / "distances.json").read_text(encoding="utf-8"))
    assert record["dimensions"] == [1] and record["order"] == 2.0
    assert [i["from"] for i in record["inputs"]] == ["image", "diagram", "diagram"]
    h1 = np.array(record["distances"]["H1"])
    assert h1[0, 1] == pytest.approx(np.hypot(3.5, 0.5), rel=1e-12)
    assert h1[1, 2] == 0.0  # the .npz and the .csv hold the same diagram


def test_different_numbers_of_essential_classes_are_said_plainly(tmp_path, capsys):
    # definition: classes that never die are matched only with each other
    def saved(rows, name):
        pairs = np.array(rows, dtype=PAIR_DTYPE)
        Diagram({0: pairs, 1: pairs[:0]}, shape=(5, 5), walls="bright",
                connectivity=1).save(tmp_path / name)
        return str(tmp_path / name)

    one = saved([(9.0, -np.inf, 0, -1)], "one.npz")
    two = saved([(9.0, -np.inf, 0, -1), (7.0, -np.inf, 3, -1)], "two.npz")
    out = tmp_path / "out"
    assert main(["distance", one, two, "-o", str(out)]) == 0
    assert "inf" in (out / "distances.csv").read_text(encoding="utf-8-sig")
    record = json.loads((out / "distances.json").read_text(encoding="utf-8"))
    assert record["distances"]["H0"][0][1] is None  # strict JSON: null
    assert "one.npz 1, two.npz 2" in record["notes"][0]
    assert "infinitely far apart" in capsys.readouterr().out


@pytest.mark.parametrize("extra, code, words", [
    (["--order", "2"], 2, "--order"),                       # bottleneck takes no order
    (["--dimensions", "2"], 2, "--dimensions asks for H2"),  # a 2D scan has no H2
    (["--metric", "wasserstein", "--order", "0.5"], 2, "--order must be"),
    (["--connectivity", "5"], 2, "onnectivity"),
])
def test_bad_options_exit_2(tmp_path, scans, capsys, extra, code, words):
    assert main(["distance", *scans[:2], "-o", str(tmp_path / "o"), *extra]) == code
    assert words in capsys.readouterr().err
    assert not (tmp_path / "o" / "distances.csv").exists()


def test_input_and_output_problems(tmp_path, scans, capsys):
    out = str(tmp_path / "out")
    assert main(["distance", scans[0], "-o", out]) == 2  # one input: nothing to compare
    assert main(["distance", scans[0], str(tmp_path / "missing.tif"), "-o", out]) == 3
    cube = tmp_path / "cube.tif"
    tifffile.imwrite(cube, np.zeros((6, 9, 9), np.float32))
    assert main(["distance", scans[0], str(cube), "-o", out]) == 3  # 2D against 3D
    assert "not compared" in capsys.readouterr().err
    dark = tmp_path / "dark.npz"
    persistence(ring(2.0), walls="dark").save(dark)
    assert main(["distance", scans[0], str(dark), "-o", out, "--walls", "bright"]) == 3
    err = capsys.readouterr().err
    assert "dark.npz" in err and "--walls" in err
    assert main(["distance", scans[0], str(dark), "-o", out, "--smooth", "1"]) == 2
    table = tmp_path / "regions.csv"
    table.write_text("label,volume\n1,3.0\n", encoding="utf-8")
    assert main(["distance", scans[0], str(table), "-o", out]) == 3
    assert "not a diagram file" in capsys.readouterr().err
    assert main(["distance", *scans[:2], "-o", out, "-q"]) == 0
    assert main(["distance", *scans[:2], "-o", out]) == 4  # exists without --force
    assert main(["distance", *scans[:2], "-o", out, "--force", "-q"]) == 0


def test_too_many_points_for_wasserstein_names_the_remedy(tmp_path, capsys):
    # white noise: about a fifth of the pixels are local maxima (H0 births), so two
    # 200 x 200 diagrams together hold well over 8000 points (counted in the record below)
    rng = np.random.default_rng(1)
    paths = [tmp_path / "a.tif", tmp_path / "b.tif"]
    for path in paths:
        tifffile.imwrite(path, rng.random((200, 200)).astype(np.float32))
    args = ["distance", *map(str, paths), "-o", str(tmp_path / "o"), "--metric",
            "wasserstein", "--dimensions", "0"]
    assert main(args) == 2
    assert "--min-persistence" in capsys.readouterr().err
    assert main([*args, "--min-persistence", "0.9", "-q"]) == 0


def test_help_teaches(capsys):
    assert main(["distance", "--help"]) == 0
    text = capsys.readouterr().out
    assert "examples:" in text and "--metric" in text and "never die" in text
