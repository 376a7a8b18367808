"""What the top of the report says: counts, sizes, the filled fraction, noise and threshold
in plain words, and every warning of the run."""

from __future__ import annotations

import html
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._table import Table
from ._words import Words, round_number

__all__ = ["Findings", "findings_html", "gather_findings"]

#: Above this share of border-cut regions the page warns that counts and sizes are biased.
BORDER_SHARE_WARNING = 0.25


@dataclass(frozen=True)
class Findings:
    """The figures the top of the page shows (counts of each kind, sizes of whole regions)."""

    words: Words
    whole: int
    touching: int
    cut: int
    enclosures: int
    sizes: np.ndarray
    size_unit: str
    fraction: float | None
    noise: float | None
    noise_correlation: float | None
    threshold: float | None
    smoothing: float | None
    unit: str
    least_certain: tuple[int, float] | None
    warnings: tuple[str, ...]


def _count(regions: Table, kind: str) -> np.ndarray:
    if "kind" not in regions:
        return np.full(len(regions), kind == "chamber")
    return np.asarray(regions["kind"] == kind)


def _number(value: Any) -> float | None:
    if isinstance(value, tuple):
        value = value[0]
    try:
        value = float(value)
    except (TypeError, ValueError):
        return None
    return value if np.isfinite(value) else None


def gather_findings(regions: Table, *, ndim: int, unit: str, params: Mapping[str, Any],
                    figures: Mapping[str, Any], notes: Sequence[str] = ()) -> Findings:
    """Collect the page's key figures from the region table, parameters and global figures.

    Examples
    --------
    >>> t = Table({"label": [1, 2], "kind": np.array(["chamber", "cut"], object),
    ...            "touches_border": [False, True], "volume": [4.0, 9.0],
    ...            "margin": [0.5, 2.0]}, units={"volume": "µm²"})
    >>> f = gather_findings(t, ndim=2, unit="µm", params={}, figures={})
    >>> f.whole, f.cut, f.sizes.tolist(), f.least_certain
    (1, 1, [4.0], (1, 0.5))
    """
    words = Words(ndim)
    chamber = _count(regions, "chamber")
    touching = chamber & (np.asarray(regions["touches_border"], bool)
                          if "touches_border" in regions else False)
    whole = chamber & ~touching
    size_col = "volume" if "volume" in regions else "area" if "area" in regions else None
    sizes = np.empty(0)
    if size_col is not None:
        values = np.asarray(regions[size_col], dtype=np.float64)[whole]
        sizes = values[np.isfinite(values)]
    least = None
    if "margin" in regions and whole.any():
        margins = np.asarray(regions["margin"], dtype=np.float64)
        ok = np.flatnonzero(whole & np.isfinite(margins))
        if ok.size:
            k = ok[np.argmin(margins[ok])]
            least = (int(regions["label"][k]), float(margins[k]))
    cut = int(_count(regions, "cut").sum())
    warnings = [str(n) for n in notes if n]
    total = int(whole.sum()) + int(touching.sum()) + cut
    if total and cut / total > BORDER_SHARE_WARNING:
        warnings.append(
            f"{cut / total:.0%} of the regions found are cut by the scan border; they are "
            f"listed but not counted or measured as whole, so counts and the size "
            f"distribution describe the {int(whole.sum())} regions that lie wholly inside.")
    return Findings(
        words=words, whole=int(whole.sum()), touching=int(touching.sum()), cut=cut,
        enclosures=int(_count(regions, "enclosure").sum()), sizes=sizes,
        size_unit=regions.units.get(size_col, "") if size_col else "",
        fraction=_number(figures.get("volume_fraction")),
        noise=_number(params.get("noise_pixel_sigma", params.get(
            "noise_sigma", figures.get("noise_sigma")))),
        noise_correlation=_number(params.get("noise_correlation")),
        threshold=_number(params.get("threshold", figures.get("persistence_threshold"))),
        smoothing=_number(params.get("smooth_sigma")), unit=unit,
        least_certain=least, warnings=tuple(warnings))


def _plural(n: int, one: str, many: str) -> str:
    return f"{n:,} {one if n == 1 else many}"


def findings_html(f: Findings) -> str:
    """The key figures as a list of plain statements, then the warnings."""
    esc = html.escape
    rows = [("Enclosed regions", _plural(f.whole, "region lies", "regions lie")
             + " wholly inside the scan")]
    if f.touching:
        rows.append(("Touching the border", _plural(f.touching, "region", "regions")
                     + " kept although they touch the scan border (left out of the figures)"))
    if f.cut:
        rows.append(("Cut by the border", _plural(f.cut, "region", "regions")
                     + " cut open by the scan border (listed, striped or dashed in the "
                       "pictures, not measured as whole)"))
    if f.enclosures:
        rows.append(("Enclosures", _plural(f.enclosures, "group", "groups")
                     + " of regions inside a common wall"))
    size = f.words.size
    if f.sizes.size:
        lo, mid, hi = np.min(f.sizes), np.median(f.sizes), np.max(f.sizes)
        rows.append((f"Region {size}", f"median {round_number(mid)} {f.size_unit}, from "
                     f"{round_number(lo)} to {round_number(hi)} {f.size_unit}"))
    if f.fraction is not None:
        what = "of the image" if f.words.ndim == 2 else "of the volume (closed porosity)"
        rows.append((f.words.fraction.capitalize(),
                     f"{100 * f.fraction:.3g} % {what} lies inside the enclosed regions"))
    if f.threshold is not None:
        smooth = (f" after smoothing with σ = {round_number(f.smoothing)} {f.unit}"
                  if f.smoothing else "")
        from ..segment._noise import NEGLIGIBLE_CORRELATION

        correlated = (f", correlated over about {round_number(f.noise_correlation)} "
                      f"{f.words.element}s"
                      if (f.noise_correlation or 0.0) >= NEGLIGIBLE_CORRELATION else "")
        noise = (f"The noise in the image is about σ = {round_number(f.noise)} intensity "
                 f"units{correlated}. " if f.noise is not None else "")
        least = ""
        if f.least_certain is not None:
            label, margin = f.least_certain
            least = (f" The least certain region, number {label}, clears it by "
                     f"{round_number(margin)}.")
        rows.append(("Noise and threshold",
                     f"{noise}A region counts when its wall rises at least "
                     f"{round_number(f.threshold)} above its darkest inside point{smooth}."
                     f"{least}"))
    items = "".join(f"<div><dt>{esc(k)}</dt><dd>{esc(v)}</dd></div>" for k, v in rows)
    page = f'<dl class="findings">{items}</dl>'
    if f.warnings:
        page += ('<div class="warnings" role="note"><h3>Read this before using the '
                 'numbers</h3><ul>'
                 + "".join(f"<li>{esc(w)}</li>" for w in f.warnings) + "</ul></div>")
    return page
