"""
Compare the structure of two scans
==================================

How far apart are two scans of the same kind of specimen? This example takes the bundled
2D cell sheet (an invented scene of our own) and a copy of it with more noise and a few
cells closed up, computes both persistence diagrams, and compares them with the
bottleneck and the Wasserstein distance, each with the matching that attains it. It then
draws the two diagrams over each other with the matching, as ``cavitas distance`` does.

Run it from the repository root::

    .venv/bin/python examples/compare_two_scans.py [OUTPUT_FOLDER]

For research use only; not for diagnosis.
"""

import sys
from pathlib import Path

import numpy as np

import cavitas
from cavitas.cubical import drop_shallow
from cavitas.report import save_figure
from cavitas.report.matching_plot import plot_matching

samples = Path(__file__).resolve().parents[1] / "sample_volumes"
out = Path(sys.argv[1] if len(sys.argv) > 1 else "compare-two-scans")

# %%
# The first scan as shipped; the second with extra noise and three cells filled with
# membrane brightness (their cavities are gone).
first = cavitas.read(samples / "cell_sheet.tif")
image = first.data.astype(np.float64)
truth = cavitas.read(samples / "cell_sheet_truth.tif").data
second = image + np.random.default_rng(0).normal(0, 0.02 * np.ptp(image), image.shape)
for label in (5, 12, 20):
    second[truth == label] = np.percentile(image, 99)

# %%
# The diagrams, without the shallow pairs noise makes near the diagonal (each pair left
# out moves the bottleneck distance by at most half the floor).
floor = 0.25 * float(np.ptp(image))  # cells stand about half the range above noise
dgm_a = drop_shallow(cavitas.persistence(image), floor)
dgm_b = drop_shallow(cavitas.persistence(second), floor)

# %%
# The distances of the cavities (H1 in 2D), and which cavities were matched to nothing.
dim = dgm_a.cavity_dim
bottleneck = cavitas.bottleneck_matching(dgm_a, dgm_b, dim)
wasserstein = cavitas.wasserstein_matching(dgm_a, dgm_b, dim, order=2)
print(f"bottleneck distance {bottleneck.distance:.4g}, "
      f"2-Wasserstein distance {wasserstein.distance:.4g} (intensity units)")
print(f"cavities of the first scan with no partner: {len(bottleneck.diagonal_a)}; "
      f"of the second: {len(bottleneck.diagonal_b)}")

# %%
# Both diagrams with the bottleneck matching; the thick segment is the distance.
fig = plot_matching(dgm_a, dgm_b, {dim: bottleneck}, names=("as shipped", "altered"))
save_figure(fig, out / "matching.png", force=True)
print(f"wrote {out / 'matching.png'}")
