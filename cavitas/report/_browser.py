"""The slice browser: downsampled frames along each axis, embedded in the page, and its script.

Each frame is two PNGs stacked: the grey image, and a transparent layer with the region
outlines (tiny, since it is almost all transparent), so outlines can be switched off without
storing every frame twice. Frame count and size are capped, and frames are thinned further
until they fit a byte budget, so a 512³ scan gives a page of about 12 MB.
"""

from __future__ import annotations

import html
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from .._json import dumps
from ._encode import data_uri, grey_png, outline_png
from ._render import intensity_window, render_slice, take_slice

__all__ = ["BROWSER_SCRIPT", "Frames", "browser_html", "build_frames"]

_AXES = ("z", "y", "x")


@dataclass
class Frames:
    """Encoded frames of one view (one sliced axis; ``axis`` is ``None`` for a 2D image)."""

    axis: int | None
    rows: int
    cols: int
    indices: list[int]
    base: list[bytes] = field(default_factory=list)
    overlay: list[bytes] = field(default_factory=list)
    cover: tuple[int, int] = (0, 0)

    @property
    def nbytes(self) -> int:
        """Encoded size of all frames of this view (before base64)."""
        return sum(map(len, self.base)) + sum(map(len, self.overlay))

    def keep(self, count: int) -> None:
        """Keep ``count`` evenly spaced frames (at least one)."""
        count = max(1, min(count, len(self.indices)))
        picks = np.unique(np.linspace(0, len(self.indices) - 1, count).round().astype(int))
        self.indices = [self.indices[k] for k in picks]
        self.base = [self.base[k] for k in picks]
        self.overlay = [self.overlay[k] for k in picks]


def build_frames(image: np.ndarray, labels: np.ndarray | None, *, max_frames: int = 64,
                 max_side: int | None = None, levels: int = 64,
                 budget: int = 7_000_000) -> list[Frames]:
    """Render and encode the browser frames of every view.

    Parameters
    ----------
    image, labels : array
        The scan and its region labels (or ``None``), same shape, 2D or 3D.
    max_frames : int
        Most frames per axis (evenly spaced slices; all slices when fewer).
    max_side : int, optional
        Frames are block-averaged until no side exceeds this (default 256 in 3D,
        1024 in 2D).
    levels : int
        Grey levels kept in the frames (fewer compress better; 64 looks smooth).
    budget : int
        Most bytes of encoded frames in all; past it, each axis keeps fewer, evenly
        spaced frames.

    Examples
    --------
    >>> import numpy as np
    >>> views = build_frames(np.zeros((10, 8, 6)), None, max_frames=4)
    >>> [(v.axis, v.indices) for v in views]
    [(0, [0, 3, 6, 9]), (1, [0, 2, 5, 7]), (2, [0, 2, 3, 5])]
    """
    ndim = image.ndim
    max_side = max_side or (256 if ndim == 3 else 1024)
    window = intensity_window(image)
    views = []
    specs = [(None, 0, 1)] if ndim == 2 else [(0, 1, 2), (1, 0, 2), (2, 0, 1)]
    for axis, r, c in specs:
        count = 1 if axis is None else image.shape[axis]
        picks = np.unique(np.linspace(0, count - 1, min(count, max_frames)).round().astype(int))
        factor = max(1, int(np.ceil(max(image.shape[r], image.shape[c]) / max_side)))
        view = Frames(axis, r, c, [int(i) for i in picks])
        for i in view.indices:
            plane = take_slice(image, axis or 0, i)
            lab = None if labels is None else take_slice(labels, axis or 0, i)
            grey, code = render_slice(plane, lab, window, factor=factor, levels=levels)
            view.base.append(grey_png(grey, levels=levels))
            view.overlay.append(outline_png(code))
        view.cover = (grey.shape[0] * factor, grey.shape[1] * factor)
        views.append(view)
    total = sum(v.nbytes for v in views)
    while total > budget and any(len(v.indices) > 1 for v in views):
        share = min(budget / total, 0.95)  # frames are alike in size: drop the excess share
        for view in views:
            view.keep(int(len(view.indices) * share))
        total = sum(v.nbytes for v in views)
    return views


def _json_for_script(value: object) -> str:
    """JSON that cannot end the ``<script>`` element it sits in."""
    text = dumps(value, ensure_ascii=True, separators=(",", ":"))
    return text.replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")


def browser_html(views: list[Frames], *, spacing: Sequence[float], unit: str,
                 target_px: int | None = None) -> str:
    """The browser's HTML: one panel per view with a slider, and the frames as JSON."""
    ndim = len(spacing)
    names = _AXES[3 - ndim:]
    target_px = target_px or (360 if ndim == 3 else 640)
    extents = [(v.cover[0] * spacing[v.rows], v.cover[1] * spacing[v.cols]) for v in views]
    scale = target_px / max(max(e) for e in extents)
    data, panels = [], []
    for k, (view, (height, width)) in enumerate(zip(views, extents, strict=True)):
        middle = len(view.indices) // 2
        name = "plane" if view.axis is None else f"{names[view.axis]} slice"
        positions = [i * spacing[view.axis] for i in view.indices] if view.axis is not None else []
        data.append({
            "axis": view.axis, "rows": view.rows, "cols": view.cols, "cover": view.cover,
            "idx": view.indices, "pos": positions,
            "base": [data_uri(b) for b in view.base],
            "over": [data_uri(b) for b in view.overlay],
        })
        slider = ""
        if view.axis is not None:
            slider = (f'<input type="range" class="slider" min="0" max="{len(view.indices) - 1}"'
                      f' value="{middle}" aria-label="{html.escape(name)}">')
        style = f"width:{width * scale:.0f}px;height:{height * scale:.0f}px"
        panels.append(
            f'<figure class="view" data-view="{k}" style="width:{max(width * scale, 220):.0f}px">'
            f'<div class="stage" style="{style}">'
            f'<img class="base" alt="{html.escape(name)} of the image" '
            f'src="{data[-1]["base"][middle]}">'
            f'<img class="overlay" alt="region outlines" src="{data[-1]["over"][middle]}">'
            f'<span class="marker" hidden></span></div>{slider}'
            f'<figcaption class="where"></figcaption></figure>'
        )
    payload = {"views": data, "unit": unit, "names": list(names)}
    return (
        '<div class="views">' + "".join(panels) + "</div>"
        f'<script type="application/json" id="frames">{_json_for_script(payload)}</script>'
    )


#: Inline script: sliders swap frames, the checkbox hides outlines, and a
#: ``cavitas:goto`` event (detail = voxel centroid) moves every slider and the markers.
BROWSER_SCRIPT = """
(function () {
  var D = JSON.parse(document.getElementById('frames').textContent);
  var panels = document.querySelectorAll('#browser .view');
  function fmt(x) { return Number(x.toPrecision(4)).toString(); }
  function show(k, i) {
    var v = D.views[k], p = panels[k];
    p.querySelector('img.base').src = v.base[i];
    p.querySelector('img.overlay').src = v.over[i];
    var cap = p.querySelector('.where');
    if (v.axis === null) { cap.textContent = ''; return; }
    cap.textContent = D.names[v.axis] + ' = ' + fmt(v.pos[i]) + ' ' + D.unit +
      ' (slice ' + v.idx[i] + ', frame ' + (i + 1) + ' of ' + v.idx.length + ')';
  }
  panels.forEach(function (p, k) {
    var s = p.querySelector('input.slider');
    if (s) {
      s.addEventListener('input', function () {  // the ring marks the region's own slice only
        show(k, +s.value); p.querySelector('.marker').hidden = true;
      });
      show(k, +s.value);
    }
    else { show(k, 0); }
  });
  var box = document.getElementById('outlines');
  if (box) {
    box.addEventListener('change', function () {
      document.getElementById('browser').classList.toggle('no-outlines', !box.checked);
    });
  }
  document.addEventListener('cavitas:goto', function (e) {
    var c = e.detail;
    panels.forEach(function (p, k) {
      var v = D.views[k], s = p.querySelector('input.slider');
      if (s) {
        var best = 0;
        for (var i = 1; i < v.idx.length; i++) {
          if (Math.abs(v.idx[i] - c[v.axis]) < Math.abs(v.idx[best] - c[v.axis])) { best = i; }
        }
        s.value = best; show(k, best);
      }
      var m = p.querySelector('.marker');
      m.style.top = (100 * (c[v.rows] + 0.5) / v.cover[0]) + '%';
      m.style.left = (100 * (c[v.cols] + 0.5) / v.cover[1]) + '%';
      m.hidden = false;
    });
  });
})();
"""
