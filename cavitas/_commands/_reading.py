"""Reading options shared by the subcommands that read an image."""

from __future__ import annotations

import argparse
from typing import Any

__all__ = ["add_dataset_option", "add_zarr_option"]


def add_dataset_option(group: argparse.ArgumentParser | Any) -> None:
    """Add ``--dataset NAME`` (which dataset of an HDF5 file) to a parser or group."""
    group.add_argument("--dataset", metavar="NAME",
                       help="dataset to read from an HDF5 file (.h5, .hdf5) holding several "
                            "image datasets, e.g. /volumes/raw (default: its only one)")


def add_zarr_option(group: argparse.ArgumentParser | Any) -> None:
    """Add ``--missing-chunks fill`` (accept Zarr stores with chunks left out)."""
    group.add_argument("--missing-chunks", choices=("error", "fill"),
                       help="a chunk missing from a Zarr store is an error (default: Zarr "
                            "would read it as zeros), or 'fill': read it as the array's fill "
                            "value and say how many were missing (for writers that leave "
                            "out empty chunks)")
