"""The run's parameters as a reader wants them: what was set for the run, what was chosen
from the data, and the full record behind a fold."""

from __future__ import annotations

import dataclasses
import html
from collections.abc import Mapping
from typing import Any

import numpy as np

from ._words import MISSING, round_number

__all__ = ["parameter_lists", "parameters_html", "plain_value"]

#: Reader's names of the settings (the Python API names stay in the full record).
_SETTINGS = {
    "walls": "walls are", "connectivity": "wall connectivity", "auto": "automatic threshold",
    "min_persistence": "minimum persistence", "relative_persistence": "relative persistence",
    "top": "keep only the most persistent", "min_volume": "smallest region kept",
    "max_volume": "largest region kept", "smooth": "smoothing", "safety": "safety factor",
    "split_fraction": "split fraction", "region": "region extent",
    "level_fraction": "level fraction", "keep_border": "keep regions on the border",
    "shells": "shells", "enclosures": "list enclosures", "partition": "partition",
    "mesh": "surface meshes", "label_format": "label map format", "mask": "mask file",
}
#: Values the run chose from the data, in the reader's words.
_CHOSEN = {
    "smooth_sigma": "smoothing σ", "noise_sigma": "noise σ the threshold is scaled by",
    "noise_pixel_sigma": "noise σ of single {element}s", "threshold": "persistence threshold",
    "noise_correlation": "noise correlation (blur of white noise, {element}s)",
    "gap": "gap in the diagram", "delineation_sigma": "smoothing of the region borders",
    "connectivity": "wall connectivity", "scales_tried": "smoothing scales tried",
}
_HIDDEN = ("timings_s", "caution", "unit")


def _defaults() -> dict[str, Any]:
    from ..segment import SegmentParams

    return {f.name: f.default for f in dataclasses.fields(SegmentParams)}


def plain_value(value: Any) -> str:
    """A value in plain words: numbers rounded, yes/no, "—" for unset, lists joined.

    Examples
    --------
    >>> plain_value(None), plain_value(0.123456), plain_value(True), plain_value([1, 2.5])
    ('—', '0.123', 'yes', '1; 2.5')
    """
    if isinstance(value, np.generic):
        value = value.item()
    if value is None:
        return MISSING
    if isinstance(value, (bool, int, float)):
        return round_number(value)
    if isinstance(value, Mapping):
        return ", ".join(f"{key.replace('_', ' ')} {plain_value(item)}"
                         for key, item in value.items())
    if isinstance(value, (list, tuple)):
        return "; ".join(plain_value(item) for item in value)
    return str(value)


def parameter_lists(params: Mapping[str, Any], unit: str, *,
                    element: str = "voxel") -> tuple[list[tuple[str, str]],
                                                     list[tuple[str, str]]]:
    """(set for this run, chosen from the data) as (name, text) pairs.

    A setting counts as set when it differs from its default; unset automatic ones are
    listed under what the run chose.

    Examples
    --------
    >>> mine, chosen = parameter_lists({"walls": "dark", "safety": 1.25,
    ...                                 "smooth_sigma": 2.0, "threshold": 8.5}, "µm")
    >>> mine, chosen
    ([('walls are', 'dark')], [('smoothing σ', '2 µm'), ('persistence threshold', '8.5')])
    """
    defaults = _defaults()
    mine = [(_SETTINGS[k], plain_value(v)) for k, v in params.items()
            if k in _SETTINGS and k in defaults and v != defaults[k]
            and not (k == "connectivity" and defaults[k] is None)]
    chosen = []
    for key, name in _CHOSEN.items():
        if key not in params:
            continue
        value = params[key]
        if key == "scales_tried" and isinstance(value, list):
            text = ", ".join(f"{plain_value(s.get('sigma'))}" for s in value) + f" {unit}"
        elif key == "gap":
            text = "none: threshold set from the noise" if value is None else plain_value(value)
        elif key in ("smooth_sigma", "delineation_sigma"):
            text = f"{plain_value(value)} {unit}"
        else:
            text = plain_value(value)
        chosen.append((name.format(element=element), text))
    return mine, chosen


def _rows(pairs: list[tuple[str, str]]) -> str:
    if not pairs:
        return "<p>None: every setting kept its default.</p>"
    body = "".join(f"<tr><th>{html.escape(k)}</th><td>{html.escape(v)}</td></tr>"
                   for k, v in pairs)
    return f'<table class="kv">{body}</table>'


def parameters_html(params: Mapping[str, Any], unit: str, *, element: str = "voxel",
                    batch: bool = False) -> str:
    """Two short lists and the full record (every key as in run.json) behind a fold.

    For a ``batch``, the values chosen from the data differ per input: the page says where
    to find them instead of listing them.
    """
    mine, chosen = parameter_lists(params, unit, element=element)
    full = [(k, plain_value(v)) for k, v in params.items() if k not in _HIDDEN]
    if batch:
        chosen_html = ("<p>Chosen for each input from its own data (smoothing, noise, "
                       "threshold): see its report.</p>")
    else:
        chosen_html = _rows(chosen) if chosen else "<p>Nothing: every value was given.</p>"
    return (f'<div class="facts"><div><h3>Set for this {"batch" if batch else "run"}</h3>'
            f'{_rows(mine)}</div><div><h3>Chosen from the data</h3>{chosen_html}</div>'
            f'</div><details class="record"><summary>Full parameter record (names as in '
            f'{"batch.json" if batch else "run.json"})</summary>{_rows(full)}</details>')
