"""The slice browser: the scan and its label map embedded once, every slice drawn in the page.

Instead of one picture per slice, the page carries the grey image (64 levels) and the label
map as two deflate-compressed arrays; its script unpacks them once and draws any slice
along any axis on a canvas: the grey image, a dark and a light line around every region
(visible on any background), dashes for regions cut by the scan border, the picked region
filled. Pointing at a region names it, clicking it picks its table row. Large scans are
block-averaged by a whole factor until the arrays fit a byte budget (a 512³ scan is shown
on a 171³ grid, every slider position still names its own slice).
"""

from __future__ import annotations

import base64
import html
import zlib
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from .._json import dumps
from ._render import block_reduce, intensity_window

__all__ = ["BROWSER_SCRIPT", "EmbeddedScan", "browser_html", "embed_scan"]

_AXES = ("z", "y", "x")
_LEVELS = 64


@dataclass(frozen=True)
class EmbeddedScan:
    """The compressed grey image and label map the browser draws from.

    ``factor`` is the block size of the reduction (1 = every voxel); ``shape`` the reduced
    grid; ``border`` the labels drawn as cut by the scan border.
    """

    shape: tuple[int, ...]
    factor: int
    grey: bytes
    labels: bytes
    label_bytes: int
    border: tuple[int, ...]

    @property
    def nbytes(self) -> int:
        """Compressed size of both arrays (before base64)."""
        return len(self.grey) + len(self.labels)


def _reduce(image: np.ndarray, labels: np.ndarray | None, factor: int,
            window: tuple[float, float]) -> tuple[np.ndarray, np.ndarray]:
    """Grey levels (block means) and labels (block centres) on the reduced grid.

    A 3D scan is reduced a slab of ``factor`` planes at a time. A chunked scan (a Dask
    array, as the chunk-by-chunk route gives) is reduced slab by slab on the Dask workers
    in one pass, so each chunk is read once and only the reduced slabs reach this
    process."""
    if image.ndim == 2:
        slabs = [(image[None], None if labels is None else labels[None])]
    else:
        slabs = [(image[start:start + factor],
                  None if labels is None else labels[min(start + factor // 2,
                                                         image.shape[0] - 1)][None])
                 for start in range(0, image.shape[0], factor)]
    if hasattr(image, "to_delayed"):  # a Dask array: the slabs on the workers, together
        import dask

        reduced = dask.compute(*[dask.delayed(_reduce_slab)(block, labs, factor, window)
                                 for block, labs in slabs])
    else:
        reduced = tuple(_reduce_slab(block, labs, factor, window) for block, labs in slabs)
    return np.stack([grey for grey, _ in reduced]), np.stack([lab for _, lab in reduced])


def _reduce_slab(block: np.ndarray, labs: np.ndarray | None, factor: int,
                 window: tuple[float, float]) -> tuple[np.ndarray, np.ndarray]:
    """One reduced plane: the grey levels of the block means of a slab of planes and the
    labels at the block centres of its middle plane (``labs``, one plane, or None)."""
    lo, hi = window
    block = np.asarray(block, dtype=np.float32)
    mean = block_reduce(block.mean(axis=0), factor)
    scaled = np.nan_to_num((mean - lo) / (hi - lo), nan=0.0)
    grey = np.clip(np.floor(scaled * _LEVELS), 0, _LEVELS - 1).astype(np.uint8)
    if labs is None:
        return grey, np.zeros(grey.shape, np.uint32)
    half = factor // 2
    plane = np.asarray(labs)[0]
    return grey, np.ascontiguousarray(plane[half::factor, half::factor]
                                      [:grey.shape[0], :grey.shape[1]])


def embed_scan(image: np.ndarray, labels: np.ndarray | None, *,
               border: Sequence[int] = (), budget: int = 9_000_000,
               window: tuple[float, float] | None = None) -> EmbeddedScan:
    """Reduce and compress the scan and its labels for the browser.

    Parameters
    ----------
    image, labels : array
        The scan and its label map (or ``None``), same 2D or 3D shape.
    border : sequence of int
        Labels of regions cut by the scan border (drawn dashed).
    budget : int
        Most bytes of both compressed arrays; past it, the scan is reduced by a larger
        whole factor per axis.
    window : (float, float), optional
        Display range of the intensities (default: :func:`intensity_window` of
        ``image``; a caller drawing several pictures of one scan computes it once).

    Examples
    --------
    >>> import numpy as np
    >>> scan = embed_scan(np.zeros((10, 8, 6)), np.ones((10, 8, 6), int))
    >>> scan.shape, scan.factor, scan.label_bytes
    ((10, 8, 6), 1, 1)
    """
    window = window or intensity_window(image)
    top = 0 if labels is None or not labels.size else int(labels.max())  # Dask: by chunks
    label_bytes = 1 if top < 2**8 else 2 if top < 2**16 else 4
    kind = {1: np.uint8, 2: np.uint16, 4: np.uint32}[label_bytes]
    # start at a grid of about 1.25 voxels per byte of budget (a noisy scan's 64 grey
    # levels compress to about 0.8 byte per voxel), then grow the factor until it fits
    factor = max(1, int(np.ceil((image.size / budget * 0.8) ** (1 / image.ndim))))
    while True:
        grey, lab = _reduce(image, labels, factor, window)
        scan = EmbeddedScan(
            shape=tuple(grey.shape[1:]) if image.ndim == 2 else tuple(grey.shape),
            factor=factor, grey=zlib.compress(grey.tobytes(), 6),
            labels=zlib.compress(lab.astype(np.dtype(kind).newbyteorder("<")).tobytes(), 6),
            label_bytes=label_bytes, border=tuple(int(b) for b in border))
        if scan.nbytes <= budget or max(scan.shape) <= 16:
            return scan
        factor += 1


def _json_for_script(value: object) -> str:
    """JSON that cannot end the ``<script>`` element it sits in."""
    text = dumps(value, ensure_ascii=True, separators=(",", ":"))
    return text.replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")


def browser_html(scan: EmbeddedScan, *, image_shape: Sequence[int],
                 spacing: Sequence[float], unit: str) -> str:
    """The browser's HTML: a canvas per view (one in 2D, three in 3D), a slider per axis
    over every slice of the input, and the embedded arrays as JSON."""
    ndim = len(image_shape)
    names = list(_AXES[3 - ndim:])
    specs = [(None, 0, 1)] if ndim == 2 else [(0, 1, 2), (1, 0, 2), (2, 0, 1)]
    target = 800 if ndim == 2 else 380
    extents = [(image_shape[r] * spacing[r], image_shape[c] * spacing[c]) for _, r, c in specs]
    scale = target / max(max(e) for e in extents)
    panels = []
    for k, ((axis, _, _), (height, width)) in enumerate(zip(specs, extents, strict=True)):
        name = "the image" if axis is None else f"slices across {names[axis]}"
        slider = ""
        if axis is not None:
            count = image_shape[axis]
            slider = (f'<input type="range" class="slider" min="0" max="{count - 1}" '
                      f'value="{count // 2}" aria-label="{html.escape(name)}: slice number">')
        panels.append(
            f'<figure class="view" data-view="{k}" style="width:{max(width * scale, 240):.0f}px">'
            f'<div class="stage" style="width:{width * scale:.0f}px;'
            f'aspect-ratio:{width:.6g}/{height:.6g}"><canvas role="img" '
            f'aria-label="{html.escape(name)} with region outlines; point at a region to '
            f'read its number, click it to pick its table row"></canvas>'
            f'<div class="scalebar"><span class="bar"></span><span class="text"></span>'
            f'</div></div>{slider}<figcaption class="where"></figcaption>'
            f'<p class="hover" aria-live="polite">&nbsp;</p></figure>'
        )
    payload = {
        "ndim": ndim, "shape": list(scan.shape), "full": list(image_shape),
        "factor": scan.factor, "spacing": list(spacing), "unit": unit, "names": names,
        "views": [{"axis": a, "rows": r, "cols": c} for a, r, c in specs],
        "labelBytes": scan.label_bytes, "border": list(scan.border), "levels": _LEVELS,
        "grey": base64.b64encode(scan.grey).decode("ascii"),
        "labels": base64.b64encode(scan.labels).decode("ascii"),
    }
    return (
        '<div class="views">' + "".join(panels) + "</div>"
        f'<script type="application/json" id="scan">{_json_for_script(payload)}</script>'
    )


#: Inline script. Unpacks the arrays (DecompressionStream, no network), draws each view,
#: names the region under the pointer, and picks a region on click: it fires
#: ``cavitas:picked`` (detail = label) for the table, and listens to ``cavitas:goto``
#: (detail = {c: voxel centroid, label}) from the table. ``document.body.dataset.browser``
#: becomes "ready" once drawn.
BROWSER_SCRIPT = """
(function () {
  var D = JSON.parse(document.getElementById('scan').textContent);
  var panels = Array.prototype.slice.call(document.querySelectorAll('#browser .view'));
  var G = null, L = null, picked = 0, border = {};
  D.border.forEach(function (b) { border[b] = true; });
  var outlines = true;
  var near = [[0, 1], [0, -1], [1, 0], [-1, 0]];
  var far = [[0, 2], [0, -2], [2, 0], [-2, 0], [1, 1], [1, -1], [-1, 1], [-1, -1]];
  function fmt(x) { return Number(x.toPrecision(4)).toString(); }
  function unpack(text) {
    var raw = atob(text), bytes = new Uint8Array(raw.length);
    for (var i = 0; i < raw.length; i++) { bytes[i] = raw.charCodeAt(i); }
    var stream = new Blob([bytes]).stream().pipeThrough(new DecompressionStream('deflate'));
    return new Response(stream).arrayBuffer();
  }
  var S = D.shape.length === 2 ? [1, D.shape[0], D.shape[1]] : D.shape;
  function at(z, y, x) { return (z * S[1] + y) * S[2] + x; }
  // view k, slice i (input index) -> function (row, col) giving the flat index on the grid
  function plane(v, i) {
    var s = Math.min(Math.floor(i / D.factor), (v.axis === null ? 0 : D.shape[v.axis] - 1));
    if (D.ndim === 2) { return function (r, c) { return at(0, r, c); }; }
    if (v.axis === 0) { return function (r, c) { return at(s, r, c); }; }
    if (v.axis === 1) { return function (r, c) { return at(r, s, c); }; }
    return function (r, c) { return at(r, c, s); };
  }
  function dims(v) { return D.ndim === 2 ? [S[1], S[2]] : [D.shape[v.rows], D.shape[v.cols]]; }
  function draw(k) {
    var v = D.views[k], p = panels[k], s = p.querySelector('input.slider');
    var i = s ? +s.value : 0, idx = plane(v, i), d = dims(v), rows = d[0], cols = d[1];
    var shown = p.querySelector('.stage').clientWidth * (window.devicePixelRatio || 1);
    // canvas pixels per grid pixel: at most the displayed size (only ever enlarged, so
    // no line is lost), and a line is about a screen pixel
    var up = Math.max(1, Math.min(8, Math.floor(shown / cols)));
    var cv = p.querySelector('canvas'), W = cols * up, H = rows * up;
    if (cv.width !== W || cv.height !== H) { cv.width = W; cv.height = H; }
    var ctx = cv.getContext('2d'), img = ctx.createImageData(W, H), px = img.data;
    var g = 255 / (D.levels - 1);
    function lab(r, c) { return r < 0 || c < 0 || r >= rows || c >= cols ? -1 : L[idx(r, c)]; }
    function ring(r, c, m) {  // 0: on the region's edge, 1: next to it, 2: inside
      for (var a = 0; a < 4; a++) {
        var o = lab(r + near[a][0], c + near[a][1]);
        if (o !== m && o !== -1) { return 0; }
      }
      for (var b = 0; b < 8; b++) {
        var q = lab(r + far[b][0], c + far[b][1]);
        if (q !== m && q !== -1) { return 1; }
      }
      return 2;
    }
    for (var r = 0; r < rows; r++) {
      for (var c = 0; c < cols; c++) {
        var m = L[idx(r, c)], grey = G[idx(r, c)] * g, coarse = 2;
        var nb = [lab(r, c - 1), lab(r, c + 1), lab(r - 1, c), lab(r + 1, c)];
        if (m !== 0 && outlines && up < 4) { coarse = ring(r, c, m); }
        for (var v2 = 0; v2 < up; v2++) {
          for (var u = 0; u < up; u++) {
            var R = grey, Gc = grey, B = grey, e = 2;
            if (m !== 0 && m === picked) {  // picked: a warm tint
              R = 0.55 * grey + 115; Gc = 0.55 * grey + 79; B = 0.55 * grey + 18;
            }
            if (outlines && m !== 0) {
              if (up < 4) { e = coarse; }
              else {  // rings of a quarter grid pixel inside the shared edge
                var t = up, w = Math.floor(up / 4);
                if (nb[0] !== m && nb[0] !== -1) { t = Math.min(t, u); }
                if (nb[1] !== m && nb[1] !== -1) { t = Math.min(t, up - 1 - u); }
                if (nb[2] !== m && nb[2] !== -1) { t = Math.min(t, v2); }
                if (nb[3] !== m && nb[3] !== -1) { t = Math.min(t, up - 1 - v2); }
                e = t < w ? 0 : t < 2 * w ? 1 : 2;
              }
              var X = c * up + u, Y = r * up + v2;
              if (border[m] && ((Math.floor((X + Y) / Math.max(4, 2 * up)) & 1) === 1)) { e = 2; }
              if (e === 0) { R = 15; Gc = 18; B = 22; }
              else if (e === 1) { R = 255; Gc = 255; B = 255; }
            }
            var o = 4 * ((r * up + v2) * W + c * up + u);
            px[o] = R; px[o + 1] = Gc; px[o + 2] = B; px[o + 3] = 255;
          }
        }
      }
    }
    ctx.putImageData(img, 0, 0);
    var cap = p.querySelector('.where');
    if (v.axis !== null) {
      var n = D.full[v.axis];
      cap.textContent = D.names[v.axis] + ' = ' + fmt(i * D.spacing[v.axis]) + ' ' + D.unit +
        ' (slice ' + (i + 1) + ' of ' + n + (D.factor > 1 ? '; shown as the average of ' +
        D.factor + ' slices' : '') + ')';
    }
    scalebar(k);
  }
  function scalebar(k) {
    var v = D.views[k], p = panels[k], stage = p.querySelector('.stage');
    var width = D.full[v.cols] * D.spacing[v.cols], px = stage.clientWidth || 1;
    var want = width / 4, step = Math.pow(10, Math.floor(Math.log10(want)));
    var nice = [1, 2, 5, 10].map(function (m) { return m * step; })
      .filter(function (m) { return m <= want; }).pop() || step;
    p.querySelector('.scalebar .bar').style.width = (px * nice / width) + 'px';
    p.querySelector('.scalebar .text').textContent = fmt(nice) + ' ' + D.unit;
  }
  function labelAt(k, ev) {
    var v = D.views[k], p = panels[k], s = p.querySelector('input.slider');
    var box = p.querySelector('canvas').getBoundingClientRect(), d = dims(v);
    var r = Math.floor((ev.clientY - box.top) / box.height * d[0]);
    var c = Math.floor((ev.clientX - box.left) / box.width * d[1]);
    if (r < 0 || c < 0 || r >= d[0] || c >= d[1]) { return 0; }
    return L[plane(v, s ? +s.value : 0)(r, c)];
  }
  function describe(lab) {
    if (!lab) { return 'no region here'; }
    return 'region ' + lab + (border[lab] ? ' (cut by the scan border)' : '');
  }
  function pick(lab) { picked = lab; panels.forEach(function (p, k) { draw(k); }); }
  function ready() {
    panels.forEach(function (p, k) {
      var s = p.querySelector('input.slider'), cv = p.querySelector('canvas');
      if (s) { s.addEventListener('input', function () { draw(k); }); }
      cv.addEventListener('mousemove', function (ev) {
        var lab = labelAt(k, ev);
        p.querySelector('.hover').textContent = describe(lab);
        cv.title = describe(lab);
      });
      cv.addEventListener('click', function (ev) {
        var lab = labelAt(k, ev);
        pick(lab);
        document.dispatchEvent(new CustomEvent('cavitas:picked', { detail: lab }));
      });
      draw(k);
    });
    var box = document.getElementById('outlines');
    if (box) {
      box.addEventListener('change', function () { outlines = box.checked; pick(picked); });
    }
    document.addEventListener('cavitas:goto', function (e) {
      var c = e.detail.c;
      panels.forEach(function (p, k) {
        var v = D.views[k], s = p.querySelector('input.slider');
        if (s && isFinite(c[v.axis])) {
          s.value = Math.max(0, Math.min(D.full[v.axis] - 1, Math.round(c[v.axis])));
        }
      });
      pick(e.detail.label);
    });
    window.addEventListener('resize', function () {
      panels.forEach(function (p, k) { scalebar(k); });
    });
    document.body.dataset.browser = 'ready';
  }
  Promise.all([unpack(D.grey), unpack(D.labels)]).then(function (parts) {
    G = new Uint8Array(parts[0]);
    L = D.labelBytes === 1 ? new Uint8Array(parts[1]) :
      D.labelBytes === 2 ? new Uint16Array(parts[1]) : new Uint32Array(parts[1]);
    ready();
  }).catch(function (err) {
    document.body.dataset.browser = 'failed';
    panels.forEach(function (p) {
      p.querySelector('.where').textContent =
        'This browser cannot unpack the slices (' + err + ').';
    });
  });
})();
"""

