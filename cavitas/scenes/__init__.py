"""Synthetic scenes with ground truth: foams, capsules and cell sheets.

Every scene here is **invented data**, made for the demo and for benchmarks only; none is
a check value for the segmentation. Each generator returns a :class:`Scene` holding the
image (float32; walls ≈ 1, interiors ≈ 0 before illumination), the ground-truth label map
of the chambers, the spacing and the labels cut by the scan border. The same seed gives
the same scene, bit for bit.

Examples
--------
>>> from cavitas.scenes import foam
>>> scene = foam((24, 24, 24), cells=6, noise=0.0, seed=3)
>>> bool(scene.truth[scene.image > 0.9].max() == 0)  # bright wall voxels are 0 in truth
True
"""

from ._common import Scene
from .capsules import capsules
from .cell_sheet import cell_sheet
from .foam import foam

__all__ = ["Scene", "capsules", "cell_sheet", "foam"]
