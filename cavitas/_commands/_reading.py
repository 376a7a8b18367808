"""Reading options shared by every subcommand that reads an image (one set, one meaning).

``info``, ``diagram``, ``segment`` and ``batch`` all take the same options for choosing
inside a file, for the geometry of uncalibrated files and for the layout of raw files;
their values are checked by :class:`cavitas.workflow.ReadOptions`, as the same names in a
parameter file are.
"""

from __future__ import annotations

import argparse
from collections.abc import Callable
from typing import Any

__all__ = ["READING", "add_reading_options", "reading_from_args"]

#: The reading options' names (``dest``), as :class:`~cavitas.workflow.ReadOptions` has them.
READING = ("channel", "time", "key", "dataset", "missing_chunks", "spacing", "unit", "shape",
           "dtype", "byte_order", "offset")


def _per_axis(kind: type, count: str) -> Callable[[str], tuple[Any, ...]]:
    """An argparse type: 2 or 3 comma-separated numbers (``2,0.5,0.5`` or ``64x256x256``)."""
    def parse(text: str) -> tuple[Any, ...]:
        try:
            values = tuple(kind(part) for part in text.replace("x", ",").split(",") if part)
        except ValueError as exc:
            raise argparse.ArgumentTypeError(
                f"expected {count} comma-separated numbers, got {text!r}"
            ) from exc
        if len(values) not in (2, 3):
            raise argparse.ArgumentTypeError(f"expected {count} numbers, got {text!r}")
        return values

    return parse


def add_reading_options(parser: argparse.ArgumentParser) -> None:
    """Add the options that choose what is read, its geometry and a raw file's layout.

    Examples
    --------
    >>> p = argparse.ArgumentParser()
    >>> add_reading_options(p)
    >>> reading_from_args(p.parse_args(["--spacing", "2,0.5,0.5", "--unit", "nm"])).kwargs()
    {'spacing': (2.0, 0.5, 0.5), 'unit': 'nm'}
    """
    choice = parser.add_argument_group("choosing in multichannel, time-lapse or multi-array "
                                       "files")
    choice.add_argument("--channel", type=int, metavar="C",
                        help="channel to read, counted from 0")
    choice.add_argument("--time", type=int, metavar="T",
                        help="time point to read, counted from 0")
    choice.add_argument("--key", metavar="NAME", help="array to read from a .npz file holding "
                                                      "several")
    choice.add_argument("--dataset", metavar="NAME",
                        help="dataset to read from an HDF5 file (.h5, .hdf5) holding several "
                             "image datasets, e.g. /volumes/raw (default: its only one)")
    choice.add_argument("--missing-chunks", choices=("error", "fill"),
                        help="a chunk missing from a Zarr store is an error (default: Zarr "
                             "would read it as zeros), or 'fill': read it as the array's fill "
                             "value and say how many were missing (for writers that leave "
                             "out empty chunks)")
    geometry = parser.add_argument_group("geometry (replaces what the file states)")
    geometry.add_argument("--spacing", type=_per_axis(float, "2 or 3"), metavar="Z,Y,X",
                          help="voxel size in (z, y, x) order, e.g. 2,0.5,0.5 (Y,X in 2D); "
                               "what physical sizes need in files without calibration: PNG, "
                               ".npy, raw files, slice folders, uncalibrated TIFFs")
    geometry.add_argument("--unit", help="unit of the spacing, e.g. um, nm, mm (default: µm "
                                         "when --spacing is given)")
    raw = parser.add_argument_group("raw binary files (.raw, .bin, .img without .hdr)")
    raw.add_argument("--shape", type=_per_axis(int, "2 or 3 whole"), metavar="Z,Y,X",
                     help="array shape in (z, y, x) order, e.g. 64,256,256")
    raw.add_argument("--dtype", help="voxel type as a NumPy name, e.g. uint8, uint16, float32")
    raw.add_argument("--byte-order", choices=["little", "big", "native"],
                     help="byte order of multi-byte voxels (default: native)")
    raw.add_argument("--offset", type=int, metavar="BYTES",
                     help="header bytes to skip before the voxels (default: 0)")


def reading_from_args(args: argparse.Namespace) -> Any:
    """The :class:`~cavitas.workflow.ReadOptions` given on the command line."""
    from .._run_options import ReadOptions

    return ReadOptions(**{name: getattr(args, name) for name in READING
                          if getattr(args, name, None) is not None})
