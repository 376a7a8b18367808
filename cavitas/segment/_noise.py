"""Noise level, the empirical null of cavity persistence, and Gaussian pre-smoothing.

The automatic significance rule
-------------------------------
1. **Noise level** ``s``: the wavelet median absolute deviation of the raw image
   (Donoho & Johnstone 1994): ``median(|d|) / 0.6745`` over the finest, all-high-pass Haar
   detail coefficients ``d`` (every 2x2 or 2x2x2 block, signs alternating, divided by
   ``2**(ndim/2)`` so that white noise keeps its variance). This is the estimate of
   :func:`skimage.restoration.estimate_sigma` with the Haar wavelet, without needing
   PyWavelets. It is robust to the sparse edges of walls, and the alternating sum cancels
   slow (linear) illumination changes. **Correlated noise** (EM, resampled or deconvolved
   data) has more power at coarser scales than this finest level shows, and the white-noise
   null then lies far below what the noise really makes. The same estimate one wavelet
   level up (on 2x2 block means, scaled back by ``2**(ndim/2)``) equals it for white noise;
   level-dependent estimates are those of Johnstone & Silverman (1997). Their ratio ``c``
   is read as white noise blurred by a Gaussian: the width ``w`` whose blur gives white
   noise that ratio (the variance of a linear filter of white noise is the sum of its
   squared weights, so both levels' gains are exact for the discrete kernel,
   :func:`haar_gains`), and the amplitude ``s`` of the white noise before the blur (the
   pixel level over the finest level's gain). The ratio also grows with fine structure
   (thin walls in the blocks): 1.44 for 2-pixel walls every 12 pixels at noise 0.1 of the
   contrast, 1.08 at noise 0.3 (invented sheets), against 2.9 on the public EM slices
   (textured cytoplasm, ``w`` = 0.72 pixel) and 1.8 on the confocal embryo. So up to
   ``c = 1.5`` the noise counts as white (``w = 0``), from ``c = 2`` all of the excess
   counts, with a linear share between (:class:`NoiseLevel`). The model holds across pixel
   sizes: the EM slices upsampled twice show ``w`` = 1.5 pixels, twice the original's.
   Measured (``python -m bench.real_scans``, ``em_variants``): F on the slices as they
   are, at half and double the pixel density, a 300² crop and with added noise went from
   0.858 / 0.800 / 0.748 / 0.709 / 0.785 with the earlier rule (the pixel level times
   ``c`` at every scale) to 0.853 / 0.802 / 0.816 / 0.715 / 0.778 (before the texture
   pockets and the textured scale choice); the other real scans are unchanged.
2. **Null**: persistence scales with the noise amplitude, so the largest cavity
   persistence that noise alone produces at smoothing ``σ`` is ``s · P(σ')``, with
   ``σ' = sqrt(σ² + w²)`` (Gaussian blurs compose by adding variances), where ``P``
   is measured on white noise of unit variance, smoothed the same way, over
   :data:`NULL_SEEDS` seeds: once, when the package is made, on a grid of smoothing
   scales, and interpolated at run time (:mod:`cavitas.segment._null_table`). For an
   image of ``N`` voxels, ``P`` is the largest persistence the seeds' images would show
   at that size: the pooled maximum scaled up by ``sqrt(log N / log N_ref)`` (the growth
   of the maximum of Gaussian-tailed variables) when the image is larger than one
   simulated image (``N_ref`` voxels), else the pooled value ranked ``N_ref / N`` from
   the top (the maximum of a pool that many times smaller).
3. **Threshold**: ``safety · s · P(σ')``, ``safety = 1.25`` by default, when nothing in the
   diagram says better (a gap or an empty stretch, :mod:`cavitas.segment._gap`; with white
   noise the false discovery rate over the null's whole distribution,
   :mod:`cavitas.segment._discovery`; and only cavities that straddle the image's two
   classes count, :mod:`cavitas.segment._evidence`). The
   stability theorem (Cohen-Steiner, Edelsbrunner & Harer 2007) gives the cruder bound ``2
   ε`` for noise bounded by ``ε`` in sup norm (unbounded for Gaussian noise); the empirical
   null is sharper because it uses the noise's actual law. The factor covers the maximum's
   spread between images and the choice among six smoothing scales (a multiple test): on 30
   white-noise images of 48 x 48 (invented data), factors 1.25 / 1.5 / 1.75 / 2 kept 12 / 3
   / 1 / 0 spurious regions in all with the null alone; with the class-separation test (a
   noise-only image has no two classes) 1.25 keeps 0, and small cells with 2-pixel walls at
   noise 0.18 are found at 91 % instead of 77 % with 1.5.
4. The null assumes Gaussian noise, white or blurred by a Gaussian; texture is not noise
   and passes it (the image's own evidence handles it: :mod:`cavitas.segment._evidence`,
   :mod:`cavitas.segment._texture`).

References
----------
Donoho, D. L., & Johnstone, I. M. (1994). Ideal spatial adaptation by wavelet shrinkage.
Biometrika 81(3), 425-455. doi:10.1093/biomet/81.3.425
Johnstone, I. M., & Silverman, B. W. (1997). Wavelet threshold estimators for data with
correlated noise. J. R. Statist. Soc. B 59(2), 319-351. doi:10.1111/1467-9868.00071
Cohen-Steiner, D., Edelsbrunner, H., & Harer, J. (2007). Stability of persistence diagrams.
Discrete Comput. Geom. 37, 103-120. doi:10.1007/s00454-006-1276-5
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import ndimage as ndi

from .._shared.memory import work_dtype  # the dtype policy lives beside the memory estimate
from ._null_table import NULL_SEEDS, REFERENCE_SHAPE, tabulated_null

__all__ = ["NEGLIGIBLE_CORRELATION", "NULL_SEEDS", "QUANTISATION_SIGMA", "NoiseLevel",
           "correlation_width", "estimate_noise", "haar_gains", "noise_level", "null_persistence",
           "smooth", "smoothed_noise_sigma", "work_dtype"]

#: Standard deviation of rounding to integers (uniform over one step: 1/sqrt(12)); the
#: noise floor of integer images, whose MAD can be 0 where the signal is flat.
QUANTISATION_SIGMA = 12 ** -0.5
#: Largest number of voxels used for the noise estimate (a central crop beyond).
_NOISE_VOXELS = 1 << 22


def estimate_noise(image: np.ndarray) -> float:
    """Standard deviation of the image noise by wavelet MAD (Donoho & Johnstone 1994).

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> round(estimate_noise(rng.normal(0, 2.0, (128, 128))), 1)
    2.0
    """
    return _haar_mad(_central_crop(np.asarray(image), _NOISE_VOXELS).astype(np.float64))


def _haar_mad(values: np.ndarray) -> float:
    """MAD / 0.6745 of the finest all-high-pass Haar details of ``values`` (float64).

    Axes of length 1 (the one slice of a one-slice volume) hold no detail and are left
    out; an image of one voxel has no detail at all, and no measurable noise (0).
    """
    detail = values.reshape([n for n in values.shape if n > 1])
    if detail.ndim == 0:
        return 0.0
    for axis in range(detail.ndim):
        detail = np.diff(detail, axis=axis)
    detail /= 2.0 ** (detail.ndim / 2.0)
    return float(np.median(np.abs(detail)) / 0.6745)


#: Ratio of the two wavelet levels' estimates up to which fine structure explains it: the
#: noise counts as white.
CORRELATION_START = 1.5
#: Ratio from which all of the excess counts as correlation (a linear share between).
CORRELATION_FULL = 2.0
#: Widest correlation the model is solved for, voxels (a Gaussian σ).
_WIDEST = 8.0
#: Correlations below this (voxels) are not worth a word in the summaries: such a blur
#: changes the null by under 1 %.
NEGLIGIBLE_CORRELATION = 0.05


@dataclass(frozen=True)
class NoiseLevel:
    """Noise standard deviation at the pixel scale and one wavelet level up, and the white
    noise that, blurred, would show both (see the module notes).

    Examples
    --------
    >>> level = NoiseLevel(pixel=1.0, two_pixel=1.0)
    >>> level.white, level.correlation, level.amplitude
    (True, 0.0, 1.0)
    """

    pixel: float      # finest-level wavelet MAD (white-noise equivalent at the pixel scale)
    two_pixel: float  # the same on 2x2(x2) block means, scaled back by 2**(ndim/2)
    ndim: int = 2     # axes the estimate was taken over

    @property
    def ratio(self) -> float:
        """``two_pixel / pixel``: 1 for white noise, more for correlated noise or texture."""
        return self.two_pixel / self.pixel if self.pixel > 0 else 1.0

    @property
    def white(self) -> bool:
        """Whether fine structure alone explains the ratio (at most :data:`CORRELATION_START`)."""
        return self.ratio <= CORRELATION_START

    @functools.cached_property
    def correlation(self) -> float:
        """σ (voxels) of the Gaussian blur of white noise that shows this ratio, times the
        share of the excess that counts as noise (0 at :data:`CORRELATION_START`, all from
        :data:`CORRELATION_FULL`)."""
        if self.white:
            return 0.0
        share = min(1.0, (self.ratio - CORRELATION_START) / (CORRELATION_FULL - CORRELATION_START))
        return share * correlation_width(self.ratio, self.ndim)

    @property
    def amplitude(self) -> float:
        """Standard deviation of the white noise that, blurred by :attr:`correlation`, has
        the measured pixel level: the unit the null is scaled by."""
        correlation = self.correlation
        return self.pixel / haar_gains(correlation)[0] ** self.ndim if correlation else self.pixel

    def null_sigma(self, sigma_voxels: tuple[float, ...]) -> tuple[float, ...]:
        """The smoothing the null is taken at: the detection's and the noise's own blur
        combined (Gaussians compose by adding variances)."""
        return tuple(float(math.hypot(s, self.correlation)) for s in sigma_voxels)


def _gaussian_kernel(sigma: float) -> np.ndarray:
    """The discrete 1D kernel of :func:`smooth` at ``sigma`` voxels (a delta at 0)."""
    delta = np.zeros(int(8 * sigma) * 2 + 1)
    delta[delta.size // 2] = 1.0
    return ndi.gaussian_filter1d(delta, sigma) if sigma > 0 else delta


@functools.lru_cache(maxsize=256)
def haar_gains(width: float) -> tuple[float, float]:
    """Per-axis standard deviations of the finest and the next Haar detail of unit white
    noise blurred by a Gaussian of σ ``width`` voxels.

    The variance of a linear filter of white noise is the sum of its squared weights; the
    details are ``[1, -1] / sqrt(2)`` and, on pair means scaled back, ``[1, 1, -1, -1] / 2``
    (both 1 for white noise). In ``d`` axes the gains multiply: ``gain ** d``.

    Examples
    --------
    >>> haar_gains(0.0)
    (1.0, 1.0)
    >>> fine, coarse = haar_gains(1.0)
    >>> bool(coarse > 2 * fine)
    True
    """
    if width <= 0:
        return 1.0, 1.0
    kernel = _gaussian_kernel(width)
    fine = np.convolve(kernel, [1.0, -1.0]) / math.sqrt(2.0)
    coarse = np.convolve(kernel, [1.0, 1.0, -1.0, -1.0]) / 2.0
    return float(np.sqrt(np.sum(fine ** 2))), float(np.sqrt(np.sum(coarse ** 2)))


def correlation_width(ratio: float, ndim: int) -> float:
    """σ (voxels) of the Gaussian blur that gives white noise this ratio of the two wavelet
    levels in ``ndim`` axes (0 up to 1; at most :data:`_WIDEST`).

    Examples
    --------
    >>> correlation_width(1.0, 2)
    0.0
    >>> fine, coarse = haar_gains(0.7)
    >>> round(correlation_width((coarse / fine) ** 2, 2), 3)
    0.7
    """
    per_axis = max(ratio, 1.0) ** (1.0 / max(ndim, 1))

    def axis_ratio(width: float) -> float:
        fine, coarse = haar_gains(round(width, 4))
        return coarse / fine

    if per_axis <= 1.0:
        return 0.0
    if per_axis >= axis_ratio(_WIDEST):
        return _WIDEST
    low, high = 0.0, _WIDEST
    for _ in range(40):  # bisection: the ratio grows with the width
        middle = 0.5 * (low + high)
        low, high = (middle, high) if axis_ratio(middle) < per_axis else (low, middle)
    return round(0.5 * (low + high), 4)


def noise_level(image: np.ndarray, floor: float = 0.0) -> NoiseLevel:
    """Noise at the pixel scale and one wavelet level up (:class:`NoiseLevel`).

    ``floor`` bounds the pixel level from below (:data:`QUANTISATION_SIGMA` for integer
    data, whose MAD can be 0 where the signal is flat).

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> white = noise_level(rng.normal(0, 2.0, (256, 256)))
    >>> round(white.pixel, 1), round(white.ratio, 1), round(white.amplitude, 1)
    (2.0, 1.0, 2.0)
    >>> from scipy import ndimage as ndi
    >>> correlated = noise_level(ndi.gaussian_filter(rng.normal(0, 1.0, (256, 256)), 1.0))
    >>> bool(correlated.ratio > 2)
    True
    """
    crop = _central_crop(np.asarray(image), _NOISE_VOXELS).astype(np.float64)
    crop = crop.reshape([n for n in crop.shape if n > 1])  # one-slice axes hold no detail
    pixel = max(_haar_mad(crop), floor)
    blocks = _block_means(crop, 2)
    two_pixel = (_haar_mad(blocks) * 2.0 ** (blocks.ndim / 2.0)
                 if min(blocks.shape, default=0) >= 2 else pixel)
    return NoiseLevel(pixel, two_pixel, max(crop.ndim, 1))


def _block_means(image: np.ndarray, factor: int) -> np.ndarray:
    """Means over non-overlapping ``factor``-wide blocks (a remainder at the end is dropped)."""
    trimmed = image[tuple(slice(0, (n // factor) * factor) for n in image.shape)]
    split: list[int] = []
    for n in trimmed.shape:
        split += [n // factor, factor]
    return trimmed.reshape(split).mean(axis=tuple(range(1, 2 * trimmed.ndim, 2)))


def smooth(image: np.ndarray, sigma_voxels: tuple[float, ...], *,
           dtype: np.dtype | type = np.float64, sign: float = 1.0) -> np.ndarray:
    """Gaussian smoothing with a per-axis σ in voxels, times ``sign``, in ``dtype``.

    Always a new array (a converted copy at σ = 0). The input is read in its own type (a
    memory map is not copied first); each axis pass computes in float64 and stores in
    ``dtype``, so float32 rounds once per axis (relative 6e-8): the result is the image
    that is filtered, and persistence computed on it is exact for it. ``sign = -1`` is
    exact (negation commutes with the filter in floating point).

    Examples
    --------
    >>> img = np.zeros((9, 9), np.uint16); img[4, 4] = 100
    >>> out = smooth(img, (1.0, 1.0), dtype=np.float32, sign=-1.0)
    >>> out.dtype, bool(out[4, 4] < 0), round(float(out.sum()), 1)
    (dtype('float32'), True, -100.0)
    """
    if not any(s > 0 for s in sigma_voxels):
        out = np.array(image, dtype=dtype)
    else:
        out = ndi.gaussian_filter(image, sigma=sigma_voxels, mode="nearest",
                                  output=np.dtype(dtype))
    if sign < 0:
        np.negative(out, out=out)
    return out


def smoothed_noise_sigma(noise: float, sigma_voxels: tuple[float, ...]) -> float:
    """Standard deviation of white noise of level ``noise`` after :func:`smooth`.

    The root sum of squares of the discrete Gaussian kernel, axis by axis.

    Examples
    --------
    >>> smoothed_noise_sigma(2.0, (0.0, 0.0))
    2.0
    >>> round(smoothed_noise_sigma(1.0, (2.0,)), 3)  # 1 / sqrt(2 sqrt(pi) 2), continuous
    0.376
    """
    factor = 1.0
    for s in sigma_voxels:
        if s > 0:
            factor *= float(np.sqrt(np.sum(_gaussian_kernel(s) ** 2)))
    return float(noise) * factor


def null_persistence(shape: tuple[int, ...], sigma_voxels: tuple[float, ...],
                     connectivity: int) -> float:
    """Largest cavity persistence of unit white noise of ``shape`` smoothed by ``sigma_voxels``.

    From the tabulated null (:mod:`cavitas.segment._null_table`; cached per arguments).

    Examples
    --------
    >>> p = null_persistence((48, 48), (1.0, 1.0), 1)
    >>> 0 < p < null_persistence((48, 48), (0.0, 0.0), 1)
    True
    """
    return null_distribution(shape, sigma_voxels, connectivity).largest


@dataclass(frozen=True)
class NullDistribution:
    """Cavity persistence of unit white noise, smoothed, at one image shape and scale.

    ``values`` (sorted) pool the :data:`NULL_SEEDS` simulations of ``voxels`` voxels in
    all (interpolated in the tabulated null); ``largest`` is the largest persistence
    expected in the image's size (see the module notes).
    """

    values: np.ndarray
    voxels: int
    largest: float

    def expected_above(self, level: Any, voxels: int) -> Any:
        """Expected number of noise cavities with persistence >= ``level`` (unit noise; a
        number or an array of them) in an image of ``voxels`` voxels.

        Examples
        --------
        >>> null = NullDistribution(np.array([0.1, 0.2, 0.3, 0.4]), 100, 0.4)
        >>> float(null.expected_above(0.25, 1000))
        20.0
        """
        above = self.values.size - np.searchsorted(self.values, level, side="left")
        return above * (voxels / self.voxels)


def null_distribution(shape: tuple[int, ...], sigma_voxels: tuple[float, ...],
                      connectivity: int) -> NullDistribution:
    """The :class:`NullDistribution` of ``shape`` and ``sigma_voxels`` (cached)."""
    key_sigma = tuple(round(float(s), 3) for s in sigma_voxels)
    return _null_cached(tuple(int(s) for s in shape), key_sigma, int(connectivity))


@functools.lru_cache(maxsize=64)
def _null_cached(shape: tuple[int, ...], sigma: tuple[float, ...],
                 connectivity: int) -> NullDistribution:
    # one-voxel axes hold no noise structure: a one-slice volume is a plane
    axes = [i for i, n in enumerate(shape) if n > 1]
    if len(axes) >= 2 and len(axes) < len(shape):
        shape = tuple(shape[i] for i in axes)
        sigma = tuple(sigma[i] for i in axes)
        connectivity = min(connectivity, len(axes))
    pooled = tabulated_null(sigma, connectivity)
    reference = math.prod(REFERENCE_SHAPE[len(shape)])  # voxels of one simulated image
    n_full = math.prod(shape)
    values = pooled.values
    if values.size == 0:
        best = 0.0
    elif n_full >= reference:  # the pooled maximum, grown to the image's size
        best = float(values[-1]) * math.sqrt(math.log(n_full) / math.log(reference))
    else:  # the maximum over as many voxels as the seeds' images of this size would hold
        rank = reference / n_full  # from the largest (1), fractional between
        best = float(np.interp(-rank, -np.arange(values.size, 0, -1.0), values))
    return NullDistribution(values, pooled.voxels, best)


def _crop_shape(shape: tuple[int, ...], limit: int) -> tuple[int, ...]:
    sizes = list(shape)
    while math.prod(sizes) > limit:
        i = int(np.argmax(sizes))
        sizes[i] = max(8, sizes[i] // 2)
    return tuple(sizes)


def _central_crop(image: np.ndarray, limit: int) -> np.ndarray:
    crop = _crop_shape(image.shape, limit)
    start = [(s - c) // 2 for s, c in zip(image.shape, crop, strict=True)]
    return image[tuple(slice(a, a + c) for a, c in zip(start, crop, strict=True))]
