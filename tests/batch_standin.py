"""A stand-in for ``cavitas.workflow.segment_file`` used by the batch tests (test helper).

It reads ``.npy`` files, keeps voxels below the mean as "regions" (scipy.ndimage.label),
and writes the same kind of outputs a real run writes. Its results are invented and serve
only to test scheduling, resume and fault isolation, never as check values.

Environment switches (so a test can steer workers it does not call directly):
``CAVITAS_STANDIN_LOG``    append "start|finish <file name> <pid>" lines to this file;
``CAVITAS_STANDIN_SLEEP``  seconds to sleep before writing (to be interrupted mid-run).
A file whose name starts with ``die`` kills its own worker process with SIGKILL.
"""

from __future__ import annotations

import json
import os
import signal
import time
from pathlib import Path

import numpy as np
from scipy import ndimage

from cavitas._errors import InputFileError
from cavitas._shared.atomic import atomic_path
from cavitas._table import Table


def _log(event: str, path: Path) -> None:
    log = os.environ.get("CAVITAS_STANDIN_LOG")
    if log:
        with open(log, "a", encoding="utf-8") as fh:
            fh.write(f"{event} {path.name} {os.getpid()}\n")


def segment(path, outdir, params, *, force=False, progress=True, read_options=None):
    """Stand-in worker with the ``segment_file`` signature (test helper, invented output)."""
    path, outdir = Path(path), Path(outdir)
    _log("start", path)
    if path.name.startswith("die"):
        os.kill(os.getpid(), signal.SIGKILL)
    try:
        data = np.load(path, allow_pickle=False)
    except (OSError, ValueError, EOFError) as exc:
        raise InputFileError(f"Cannot read '{path}': not a valid .npy file.") from exc
    if data.ndim not in (2, 3):
        raise InputFileError(f"'{path}' holds a {data.ndim}D array; expected 2D or 3D.")
    time.sleep(float(os.environ.get("CAVITAS_STANDIN_SLEEP", "0")))
    level = float(dict(params or {}).get("level", data.mean()))
    labels, n = ndimage.label(data < level)
    sizes = np.bincount(labels.ravel())[1:]
    with atomic_path(outdir / "labels.npy", force=force) as tmp:
        np.save(tmp, labels.astype(np.int32), allow_pickle=False)
    Table({"label": np.arange(1, n + 1), "volume": sizes.astype(float)},
          units={"volume": "voxel"}).to_csv(outdir / "regions.csv", force=force)
    with atomic_path(outdir / "run.json", force=force) as tmp:
        tmp.write_text(json.dumps({"params": dict(params or {})}), encoding="utf-8")
    _log("finish", path)
    return {"regions": int(n), "porosity": float(sizes.sum() / data.size), "noise": 0.0,
            "threshold": level, "extra": [1, 2]}
