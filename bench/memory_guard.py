"""The memory guard's estimate against the measured peak of whole runs.

Each input runs through ``segment_file`` (report on, automatic mode) in a fresh
interpreter, as ``cavitas segment`` does; the peak RSS of that process (``ru_maxrss``,
interpreter and libraries included) is compared with
:func:`cavitas.io.estimate_memory_bytes`, which is what the guard and ``cavitas info``
use. Inputs: the three bundled samples and, with ``--large``, the 512^3 uint16 foam of
``bench/segment_scale.py`` (invented data, for this measurement only).

Target: the estimate is at least the peak (the guard must not let through what cannot fit)
and at most 1.5 times it (it must not refuse what fits).
"""

from __future__ import annotations

import json
import subprocess
import sys
import tempfile
import textwrap
from pathlib import Path

NAME = "memory_guard"
SAMPLES = Path(__file__).resolve().parent.parent / "sample_volumes"

_ONE_RUN = textwrap.dedent("""
    import json, resource, sys
    from cavitas.io import estimate_memory_bytes, read
    from cavitas.workflow import segment_file

    src, out = sys.argv[1], sys.argv[2]
    volume = read(src)
    segment_file(src, out, None, progress=False, report=True, force=True)
    print(json.dumps({"shape": list(volume.shape), "dtype": str(volume.dtype),
                      "peak": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024,
                      "estimate": estimate_memory_bytes(volume.shape, volume.dtype)}))
""")


def _measure(src: Path, out: Path) -> dict:
    done = subprocess.run([sys.executable, "-c", _ONE_RUN, str(src), str(out)],
                          capture_output=True, text=True, check=True)
    return json.loads(done.stdout.strip().splitlines()[-1])


def _write_foam(target: Path) -> None:
    """The 512^3 foam, made in its own process: a child's peak RSS (``ru_maxrss``) starts
    from the memory of the process that started it, which must stay small."""
    code = ("import sys, tifffile; from bench.segment_scale import foam_volume; "
            "tifffile.imwrite(sys.argv[1], foam_volume(512))")
    subprocess.run([sys.executable, "-c", code, str(target)], check=True,
                   cwd=Path(__file__).resolve().parent.parent)


def run(args) -> list[dict]:
    """One row per input: estimate / peak."""
    inputs = [SAMPLES / name for name in ("cell_sheet.tif", "capsules.tif", "foam.nii.gz")]
    rows = []
    with tempfile.TemporaryDirectory(prefix="cavitas-bench-guard-") as name:
        tmp = Path(name)
        if getattr(args, "large", False):
            inputs.append(tmp / "foam512.tif")
        for index, src in enumerate(inputs):
            if not src.exists():
                _write_foam(src)
            figures = _measure(src, tmp / f"out{index}")
            shape = " x ".join(map(str, figures["shape"]))
            rows.append({"metric": f"{src.name} ({shape} {figures['dtype']}): estimate / peak",
                         "value": f"{figures['estimate'] / figures['peak']:.2f}",
                         "target": ">= 1, <= 1.5",
                         "note": f"estimate {figures['estimate'] / 2**20:.0f} MiB, peak "
                                 f"{figures['peak'] / 2**20:.0f} MiB"})
    return rows
