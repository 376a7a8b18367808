"""
Segment a membrane-stained cell sheet
=====================================

The bundled 2D sample is an invented scene of our own: a sheet of cells whose membranes
are bright, under noise and uneven illumination. This example segments it with the
automatic settings, compares the result with the shipped ground truth, and draws the two
pictures the README shows: the persistence diagram and the image with region outlines.

Run it from the repository root::

    .venv/bin/python examples/segment_a_cell_sheet.py [OUTPUT_FOLDER]

For research use only; not for diagnosis.
"""

import sys
from pathlib import Path

import cavitas
from cavitas.compare import border_labels, compare_labels
from cavitas.report import plot_diagram, plot_slices, save_figure

samples = Path(__file__).resolve().parents[1] / "sample_volumes"
out = Path(sys.argv[1] if len(sys.argv) > 1 else "docs/images")

# %%
# Read the image with its pixel size (µm) and segment it. Everything is automatic: the
# noise level, the smoothing used for detection, and the persistence threshold.
vol = cavitas.read(samples / "cell_sheet.tif")
seg = cavitas.segment(vol)
print(seg)

# %%
# Score against the ground truth; cells cut by the image border are not enclosed inside
# the image, so they are left out of the score.
truth = cavitas.read(samples / "cell_sheet_truth.tif").data.astype("int64")
_, score = compare_labels(seg.labels.astype("int64"), truth, ignore=border_labels(truth))
print(f"found {score['found']}/{score['reference_regions']} cells, "
      f"median Dice {score['median_dice']:.3f}, spurious {score['spurious']}")

# %%
# The persistence diagram: kept cavities filled, the noise band shaded.
dim = seg.diagram.cavity_dim
fig = plot_diagram(seg.diagram, dims=dim, highlight={dim: seg.kept}, threshold=seg.threshold)
save_figure(fig, out / "cell_sheet_diagram.png", force=True)

# %%
# The image with the outline of every region.
fig = plot_slices(vol.data, seg.labels, spacing=vol.spacing, unit=vol.unit,
                  title="cell sheet sample with region outlines")
save_figure(fig, out / "cell_sheet_slices.png", force=True)
