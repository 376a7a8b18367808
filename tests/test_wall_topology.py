"""The Euler characteristic curve and the segmented walls' topology in a segmentation run.

Reference: ``skimage.measure.euler_number`` (Ohser, Nagel & Schladitz 2002), with the
walls' connectivity (1: faces), on the thresholded image at the levels of euler.csv and on
the segmented walls; the connectivity density is β1 over the image area (Odgaard &
Gundersen 1993: loops per unit volume, here per unit area in 2D).
"""

import numpy as np
import tifffile
from skimage.measure import euler_number

from cavitas._table import Table
from cavitas.workflow import segment_file


def test_segment_file_writes_the_curve_and_the_walls_topology(tmp_path):
    # three dark disks in a bright plate (invented scene: no region is cut by the border)
    yy, xx = np.indices((40, 48))
    image = np.full((40, 48), 200.0)
    for cy, cx in ((12, 12), (26, 26), (12, 36)):
        image[np.hypot(yy - cy, xx - cx) < 5] = 20.0
    image[2:-2, 2:-2] += np.random.default_rng(3).uniform(-4, 4, (36, 44))  # a calm rim
    tifffile.imwrite(tmp_path / "plate.tif", image.astype(np.float32))
    summary = segment_file(tmp_path / "plate.tif", tmp_path / "out", progress=False)
    labels = tifffile.imread(tmp_path / "out" / "labels.tif")
    walls = labels == 0
    assert summary["regions"] == 3 and summary["border_cut"] == 0
    assert summary["walls_euler"] == euler_number(walls, connectivity=1) == 1 - 3
    assert summary["walls_loops"] == 3
    assert summary["connectivity_density"] == 3 / image.size  # no spacing: per pixel
    curve = Table.from_csv(tmp_path / "out" / "euler.csv")
    levels, chi = curve["level"], curve["euler_characteristic"]
    assert np.all(np.diff(levels) < 0)  # bright walls: the level falls as walls grow
    stored = tifffile.imread(tmp_path / "plate.tif")
    for k in np.linspace(0, len(levels) - 1, 12).astype(int):
        assert chi[k] == euler_number(stored >= np.float32(levels[k]), connectivity=1)
    page = (tmp_path / "out" / "report.html").read_text(encoding="utf-8")
    assert 'id="connectivity"' in page and "Holes β1</th><td>3" in page
