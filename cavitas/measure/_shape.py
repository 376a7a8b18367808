"""Shape figures derived from volume, surface and second moments."""

from __future__ import annotations

import numpy as np

from ._surface import ball_boundary

__all__ = ["axis_lengths", "equivalent_diameter", "sphericity"]


def equivalent_diameter(volume: np.ndarray, ndim: int) -> np.ndarray:
    """Diameter of the ball (disc) with the same volume (area).

    Examples
    --------
    >>> equivalent_diameter(np.array([4 / 3 * np.pi]), 3).round(6).tolist()
    [2.0]
    """
    volume = np.asarray(volume, dtype=np.float64)
    if ndim == 3:
        return np.cbrt(6.0 * volume / np.pi)
    return 2.0 * np.sqrt(volume / np.pi)


def sphericity(volume: np.ndarray, boundary: np.ndarray, ndim: int) -> np.ndarray:
    """Wadell's sphericity: boundary of the equal-volume ball over the measured boundary.

    In 3D this is π^(1/3)(6V)^(2/3)/A (Wadell 1935); in 2D the same ratio of perimeters,
    2√(πA)/P (1 for a disc, √π/2 ≈ 0.886 for a square). NaN where the boundary is 0.

    Examples
    --------
    >>> sphericity(np.array([1.0]), np.array([6.0]), 3).round(3).tolist()  # unit cube
    [0.806]
    """
    boundary = np.asarray(boundary, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(boundary > 0, ball_boundary(volume, ndim) / boundary, np.nan)


def axis_lengths(cov: np.ndarray, spacing: tuple[float, ...]) -> np.ndarray:
    """Full axis lengths of the solid ellipsoid with the same second moments, largest first.

    ``cov`` holds voxel-index covariances (n, ndim, ndim); lengths are
    ``2·sqrt((ndim + 2)·λ)`` for each eigenvalue λ of the physical covariance, because a
    solid ellipsoid (ellipse) with semi-axis a has variance a²/(ndim + 2) along it. This is
    scikit-image's ``axis_major_length`` / ``axis_minor_length`` convention (4·sqrt(λ) in
    2D, sqrt(10·(sum of two inertia eigenvalues minus the third)) in 3D).

    Examples
    --------
    >>> cov = np.diag([4.0, 1.0])[None] / 4  # ellipse with semi-axes 2 and 1
    >>> axis_lengths(cov, (1.0, 1.0)).tolist()
    [[4.0, 2.0]]
    """
    ndim = len(spacing)
    s = np.asarray(spacing)
    phys = cov * s[:, None] * s[None, :]
    eig = np.linalg.eigvalsh(phys)[:, ::-1] if len(phys) else np.zeros((0, ndim))
    return 2.0 * np.sqrt((ndim + 2) * np.clip(eig, 0.0, None))
