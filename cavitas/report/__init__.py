"""Plots and the self-contained HTML report of a segmentation.

Every figure is a Matplotlib :class:`~matplotlib.figure.Figure` made without pyplot (Agg,
no global state), readable without colour (markers, line styles, hatching and two-tone
outlines carry the meaning). :func:`write_report` puts them, a slice browser and a sortable
region table into one HTML file that needs no network and no other file.
"""

from ._histograms import plot_histograms
from ._html import write_report
from ._slices import plot_region_slices, plot_slices
from .diagram_plots import plot_barcode, plot_diagram, save_figure

__all__ = [
    "plot_barcode",
    "plot_diagram",
    "plot_histograms",
    "plot_region_slices",
    "plot_slices",
    "save_figure",
    "write_report",
]
