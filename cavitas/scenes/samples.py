"""The recipes of the bundled sample volumes (invented data, for the demo only).

Three scenarios of our own, made with :mod:`cavitas.scenes` at fixed seeds and written with
``cavitas.write`` (NIfTI gzip streams carry no time stamp; the TIFF files carry no date
tag and are not compressed), so the files regenerate bit for bit:

- ``foam.nii.gz``: micro-CT-like closed-cell polymer foam, uint16, with Poisson-like noise;
- ``capsules.tif``: confocal-like stack of hollow fluorescent microcapsules, uint8, ImageJ;
- ``cell_sheet.tif``: 2D membrane-stained cell sheet, uint8, ImageJ;

each with its ground-truth chamber labels (``*_truth.*``, uint16, 0 = walls and medium).
``sample_volumes/README.md`` in the source tree lists the facts of each one;
``sample_volumes/generate.py`` is the command line around :func:`write_samples`, and
``cavitas demo`` calls it when the source tree's copies are not at hand.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from ._common import Scene
from .capsules import capsules
from .cell_sheet import cell_sheet
from .foam import foam

__all__ = ["SAMPLES", "Sample", "write_samples", "CAPSULES", "FOAM", "SHEET"]


@dataclass(frozen=True)
class Sample:
    """One bundled sample: how to make its scene and how to turn it into stored values."""

    name: str
    suffix: str
    make: Callable[[], Scene]
    encode: Callable[[Scene], np.ndarray]

    @property
    def files(self) -> tuple[str, str]:
        """Image and truth file names."""
        return f"{self.name}{self.suffix}", f"{self.name}_truth{self.suffix}"


# -- the foam: micro-CT-like counts ----------------------------------------------------

FOAM: dict[str, Any] = dict(
    shape=(96, 128, 128), cells=200, wall_thickness=2.5, thickness_spread=0.2, noise=0.04,
    ramp=1.25, broken_walls=4, blur=1.0, spacing=(4.0, 2.5, 2.5), seed=7)
#: Expected counts are PHOTONS * (OFFSET + image): 30 in a pore, 180 in a wall.
FOAM_PHOTONS, FOAM_OFFSET, FOAM_COUNT_SEED = 150.0, 0.2, 1007


def _foam_counts(scene: Scene) -> np.ndarray:
    """Poisson counts around the scene's (blurred, lit, Gaussian-noisy) image, uint16."""
    rng = np.random.default_rng(FOAM_COUNT_SEED)
    mean = np.clip(FOAM_PHOTONS * (FOAM_OFFSET + scene.image.astype(np.float64)), 0, None)
    return rng.poisson(mean).astype(np.uint16)


# -- capsules and the cell sheet: 8-bit fluorescence -----------------------------------

CAPSULES: dict[str, Any] = dict(
    shape=(48, 128, 128), count=10, nested=3, touching=2, shell_thickness=2.0, noise=0.12,
    ramp=1.5, blur=1.0, spacing=(0.4, 0.25, 0.25), seed=11)
SHEET: dict[str, Any] = dict(
    shape=(512, 512), cells=150, wall_thickness=2.5, noise=0.1, ramp=2.0, blur=1.2,
    spacing=(0.2, 0.2), seed=5)
#: 8-bit grey values are DARK + GAIN * image, rounded and clipped to 0..255 (DARK is
#: about 3 noise σ above 0, so fewer than 0.1 % of the voxels clip).
DARK, GAIN = 40.0, 100.0


def _eight_bit(scene: Scene) -> np.ndarray:
    return np.clip(np.rint(DARK + GAIN * scene.image.astype(np.float64)), 0, 255).astype(np.uint8)


SAMPLES = (
    Sample("foam", ".nii.gz", lambda: foam(**FOAM), _foam_counts),
    Sample("capsules", ".tif", lambda: capsules(**CAPSULES), _eight_bit),
    Sample("cell_sheet", ".tif", lambda: cell_sheet(**SHEET), _eight_bit),
)


def write_samples(out: str | Path, *, force: bool = False,
                  names: tuple[str, ...] | None = None) -> dict[str, Scene]:
    """Write the samples (all, or those in ``names``) with their truth into ``out``.

    Returns the scenes by name, for the facts in the README.
    """
    import cavitas

    out = Path(out)
    scenes = {}
    for sample in SAMPLES:
        if names is not None and sample.name not in names:
            continue
        scene = sample.make()
        image_file, truth_file = sample.files
        if scene.n_labels > np.iinfo(np.uint16).max:
            raise ValueError(f"{sample.name}: too many labels for uint16 truth.")
        # TIFF samples are stored uncompressed: tifffile deflates with imagecodecs when it
        # is installed and with Python's zlib otherwise, and the two give other bytes.
        # The NIfTI samples use Python's gzip, the same everywhere.
        geometry = dict(spacing=scene.spacing, unit=scene.unit, force=force,
                        compress=sample.suffix != ".tif")
        cavitas.write(out / image_file, sample.encode(scene), **geometry)
        cavitas.write(out / truth_file, scene.truth.astype(np.uint16), **geometry)
        scenes[sample.name] = scene
    return scenes
