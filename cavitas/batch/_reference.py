"""Distance of every batch input to a reference scan, for the summary table.

The batch process itself does this after the inputs are segmented (so a changed reference
never makes a finished input run again): each input's persistence diagram is computed
from the unsmoothed image with the run's walls, connectivity, mask and reading options,
and compared with the reference's by the bottleneck distance, dimension by dimension.
The reference is an image or a diagram file that ``cavitas diagram`` wrote.
"""

from __future__ import annotations

import logging
from collections.abc import Mapping
from typing import Any

from .._diagram_sources import DiagramRecipe, DiagramSource, diagram_sources
from .._errors import CavitasError
from ..cubical import bottleneck
from ._summary import REFERENCE_PREFIX
from ._task import FAILED

__all__ = ["add_reference_distances", "reference_source"]

log = logging.getLogger(__name__)


def _recipe(params: Any, options: Any, read_options: Mapping[str, Any] | None) -> DiagramRecipe:
    def setting(source: Any, name: str) -> Any:
        if isinstance(source, Mapping):
            return source.get(name)
        return getattr(source, name, None)

    return DiagramRecipe(walls=setting(params, "walls") or "bright",
                         connectivity=setting(params, "connectivity") or 1,
                         mask=setting(options, "mask"),
                         read_options=dict(read_options or {}))


def reference_source(path: str, params: Any, options: Any,
                     read_options: Mapping[str, Any] | None) -> DiagramSource:
    """The reference's diagram, made as every input's will be (fails before the batch)."""
    return diagram_sources([path], _recipe(params, options, read_options))[0]


def add_reference_distances(results: list[dict[str, Any]], reference: DiagramSource,
                            params: Any, options: Any,
                            read_options: Mapping[str, Any] | None) -> None:
    """Put ``to_reference_H<d>`` into the summary of every input that did not fail.

    An input whose diagram cannot be compared (another dimension, unreadable now) gets no
    distance; the reason is logged.
    """
    recipe = _recipe(params, options, read_options)
    for result in results:
        if result["status"] == FAILED:
            continue
        try:
            dgm = diagram_sources([result["input"]], recipe)[0].diagram
        except CavitasError as exc:
            log.warning("%s: no distance to the reference: %s", result["input"], exc)
            continue
        if dgm.ndim != reference.diagram.ndim:
            log.warning("%s: no distance to the reference '%s': one is 2D, the other 3D",
                        result["input"], reference.path)
            continue
        summary = dict(result.get("summary") or {})
        for dim in reference.diagram.dims:
            if dim in dgm.dims:
                summary[f"{REFERENCE_PREFIX}{dim}"] = bottleneck(dgm, reference.diagram, dim)
        result["summary"] = summary
