"""Diagram and barcode figures: what is drawn, and that saved files are PNGs.

Diagrams are hand-built (invented data, for drawing only); the checks count the plotted
points and bars against the number of pairs (common practice: inspect the Artists).
"""

import numpy as np
import pytest
from matplotlib.figure import Figure

from cavitas import RESEARCH_ONLY, OutputError, ParameterError
from cavitas.cubical import PAIR_DTYPE, Diagram
from cavitas.report.diagram_plots import DIM_STYLE, plot_barcode, plot_diagram, save_figure


def make_diagram(walls="bright", ndim=3):
    sign = 1.0 if walls == "bright" else -1.0
    rng = np.random.default_rng(7)

    def rows(n, n_essential):
        out = np.zeros(n, dtype=PAIR_DTYPE)
        out["birth"] = rng.uniform(10, 100, n)
        out["death"] = out["birth"] - sign * rng.uniform(0.5, 30, n)
        out["death"][:n_essential] = -sign * np.inf
        out["death_voxel"][:n_essential] = -1
        return out

    pairs = {0: rows(12, 1), ndim - 1: rows(7, 0)}
    return Diagram(pairs, shape=(8,) * ndim, walls=walls, connectivity=1)


def points(ax, prefix):
    """Number of scatter points in collections whose label starts with ``prefix``."""
    return sum(len(c.get_offsets()) for c in ax.collections
               if c.get_label().startswith(prefix))


@pytest.mark.parametrize("walls", ["bright", "dark"])
@pytest.mark.parametrize("ndim", [2, 3])
def test_diagram_draws_every_pair_once(walls, ndim):
    dgm = make_diagram(walls, ndim)
    ax = plot_diagram(dgm).axes[0]
    cav = dgm.cavity_dim
    assert points(ax, "H0") == 12 and points(ax, "H0 essential") == 1
    assert points(ax, f"H{cav}") == 7 and points(ax, f"H{cav} essential") == 0
    # readable without colour: each dimension has its own marker
    assert DIM_STYLE[0]["marker"] != DIM_STYLE[cav]["marker"]
    assert walls in ax.get_xlabel() and ("superlevel" if walls == "bright" else "sublevel") \
        in ax.get_ylabel()
    # the essential class lies on the edge line: below every death (bright) or above (dark)
    (ess,) = [c for c in ax.collections if c.get_label() == "H0 essential"]
    edge = ess.get_offsets()[0, 1]
    finite = dgm.pairs(0)["death"][1:]
    assert (edge < finite.min()) if walls == "bright" else (edge > finite.max())


def test_highlight_and_threshold():
    dgm = make_diagram()
    kept_idx = np.array([0, 3])
    fig = plot_diagram(dgm, dims=2, highlight={2: kept_idx}, threshold=5.0)
    ax = fig.axes[0]
    assert points(ax, "H0") == 0
    assert points(ax, "H2 kept") == 2 and points(ax, "H2 not kept") == 5
    hollow = [c for c in ax.collections if c.get_label() == "H2 not kept"][0]
    assert np.all(hollow.get_facecolors()[:, 3] == 0)  # not kept = hollow markers
    assert any("persistence below 5" in c.get_label() for c in ax.collections)
    mask = np.zeros(7, bool)
    mask[kept_idx] = True
    again = plot_diagram(dgm, dims=[2], highlight={2: mask}).axes[0]
    assert points(again, "H2 kept") == 2


def test_barcode_counts_and_threshold():
    dgm = make_diagram()
    pers = dgm.persistence(0)
    ax = plot_barcode(dgm, dim=0, top=5, threshold=float(np.sort(pers)[-3])).axes[0]
    (bars,) = ax.collections
    assert len(bars.get_segments()) == 5
    # the threshold line sits below the two bars strictly longer than it (ranks 0 and 1)
    (line,) = [ln for ln in ax.lines if ln.get_label().startswith("persistence threshold")]
    assert line.get_ydata()[0] == 1.5
    assert ax.xaxis_inverted()  # bright walls: levels run high to low
    kept = pers > 20
    ax = plot_barcode(dgm, dim=0, highlight=kept).axes[0]
    sizes = {c.get_label(): len(c.get_segments()) for c in ax.collections}
    assert sizes == {"bars kept": int(kept.sum()), "bars not kept": int((~kept).sum())}
    (arrow,) = [ln for ln in ax.lines if ln.get_label().startswith("essential")]
    assert len(arrow.get_xdata()) == 1


def test_draws_into_given_axes_and_empty_dimension():
    fig = Figure()
    ax = fig.add_subplot()
    dgm = Diagram({0: np.zeros(0, PAIR_DTYPE)}, shape=(4, 4), walls="dark", connectivity=1)
    assert plot_diagram(dgm, ax=ax) is fig
    assert points(ax, "H") == 0
    assert len(plot_barcode(dgm, dim=0).axes[0].collections) == 0


def test_axes_in_a_subfigure_give_the_whole_figure():
    # matplotlib: a SubFigure cannot be saved; the documented return is the Figure
    fig = Figure()
    left, right = fig.subfigures(1, 2)
    dgm = Diagram({0: np.zeros(0, PAIR_DTYPE)}, shape=(4, 4), walls="dark", connectivity=1)
    assert plot_diagram(dgm, ax=left.add_subplot()) is fig
    assert plot_barcode(dgm, dim=0, ax=right.add_subplot()) is fig


def test_bad_arguments():
    dgm = make_diagram()
    with pytest.raises(ParameterError, match="highlight for H2"):
        plot_diagram(dgm, highlight={2: np.ones(3, bool)})
    with pytest.raises(ParameterError, match="highlight for H0"):
        plot_barcode(dgm, dim=0, highlight=[99])
    with pytest.raises(ParameterError, match="top"):
        plot_barcode(dgm, dim=0, top=0)
    with pytest.raises(ParameterError, match="H1"):
        plot_barcode(dgm, dim=1)


def test_save_figure_writes_png_with_caution(tmp_path):
    fig = plot_diagram(make_diagram())
    path = tmp_path / "out" / "diagram.png"
    save_figure(fig, path)
    assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG spec, RFC 2083)
    footer = [t.get_text() for t in fig.texts]
    assert len(footer) == 1 and footer[0].replace("\n", " ") == RESEARCH_ONLY
    with pytest.raises(OutputError, match="already exists"):
        save_figure(fig, path)
    save_figure(fig, path, force=True)
    assert len(fig.texts) == 1  # the footer is not added twice
    with pytest.raises(ParameterError, match=r"\.png"):
        save_figure(fig, tmp_path / "diagram.xyz")
    assert sorted(p.name for p in tmp_path.rglob("*")) == ["diagram.png", "out"]
