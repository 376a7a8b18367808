"""Reading options shared by the subcommands that read an image."""

from __future__ import annotations

import argparse
from typing import Any

__all__ = ["add_dataset_option"]


def add_dataset_option(group: argparse.ArgumentParser | Any) -> None:
    """Add ``--dataset NAME`` (which dataset of an HDF5 file) to a parser or group."""
    group.add_argument("--dataset", metavar="NAME",
                       help="dataset to read from an HDF5 file (.h5, .hdf5) holding several "
                            "image datasets, e.g. /volumes/raw (default: its only one)")
