"""Segmentation checked against outside references (phantoms, scipy, geometry).

Invented data (cavitas.scenes, random noise) appears only as labelled regression checks.
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import ndimage as ndi

from cavitas import InputFileError, ParameterError
from cavitas.segment import SegmentParams, segment
from cavitas.workflow import Settings


def test_shepp_logan_2d_regions_contrasts_and_areas():
    # Source: Shepp & Logan 1974, modified contrasts by Toft (skimage.data.shepp_logan_phantom,
    # 400 x 400 over [-1, 1]^2, so a pixel is 0.005 wide). Skull 1.0 encloses the brain 0.2,
    # which encloses the two ventricles 0.0: ellipses c (semi-axes 0.11, 0.31) and
    # d (0.16, 0.41); brain ellipse b (0.6624, 0.874).
    from skimage.data import shepp_logan_phantom

    seg = segment(shepp_logan_phantom(), min_persistence=0.1, region="breach")
    rows = seg.regions
    chambers = rows.select(rows["kind"] == "chamber")
    enclosures = rows.select(rows["kind"] == "enclosure")
    px = 0.005**2
    areas = sorted(chambers["own_voxels"] * px)
    assert areas == pytest.approx([np.pi * 0.11 * 0.31, np.pi * 0.16 * 0.41], rel=0.02)
    assert sorted(chambers["persistence"]) == pytest.approx([0.2, 1.0])  # 0.2-0, 1.0-0
    # Both ventricles are chambers (not only the younger one of the elder-rule pair).
    assert len(chambers) == 2 and set(chambers["parent"]) == {enclosures["label"][0]}
    assert enclosures["persistence"][0] == pytest.approx(0.8)  # skull 1.0 over brain 0.2
    assert enclosures["enclosed_voxels"][0] * px == pytest.approx(np.pi * 0.6624 * 0.874,
                                                                   rel=0.02)


def _ellipsoid(shape, centre, axes, angle_deg):
    z, y, x = np.meshgrid(*[np.linspace(-1, 1, n) for n in shape], indexing="ij")
    t = np.deg2rad(angle_deg)
    xr = (x - centre[0]) * np.cos(t) + (y - centre[1]) * np.sin(t)
    yr = -(x - centre[0]) * np.sin(t) + (y - centre[1]) * np.cos(t)
    zr = z - centre[2]
    return (xr / axes[0]) ** 2 + (yr / axes[1]) ** 2 + (zr / axes[2]) ** 2 <= 1


def test_shepp_logan_3d_ventricle_volumes():
    # Source: 3D Shepp-Logan ellipsoids (Kak & Slaney 1988, Table 3.2; parameters quoted
    # from memory): skull a (0.69, 0.92, 0.9) value 2, brain b (0.6624, 0.874, 0.88) -0.98,
    # ventricles c at (-0.22, 0, -0.25) axes (0.41, 0.16, 0.21) rotated 108 degrees and
    # d at (0.22, 0, -0.25) axes (0.31, 0.11, 0.22) rotated 72 degrees, both -0.02.
    # Check: region volume within 5 % of 4/3 pi abc (sphere-volume formula, handbook).
    n = 64
    shape = (n, n, n)
    img = 2.0 * _ellipsoid(shape, (0, 0, 0), (0.69, 0.92, 0.9), 0)
    img -= 0.98 * _ellipsoid(shape, (0, 0, 0), (0.6624, 0.874, 0.88), 0)
    c = _ellipsoid(shape, (-0.22, 0, -0.25), (0.41, 0.16, 0.21), 108)
    d = _ellipsoid(shape, (0.22, 0, -0.25), (0.31, 0.11, 0.22), 72)
    img -= 0.02 * (c | d)
    seg = segment(img, min_persistence=0.01, region="breach")
    chambers = seg.regions.select(seg.regions["kind"] == "chamber")
    voxel = (2.0 / (n - 1)) ** 3
    want = sorted([4 / 3 * np.pi * 0.41 * 0.16 * 0.21, 4 / 3 * np.pi * 0.31 * 0.11 * 0.22])
    assert sorted(chambers["own_voxels"] * voxel) == pytest.approx(want, rel=0.05)


@pytest.mark.parametrize("ndim", [2, 3])
@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_breach_region_is_the_component_below_its_level(ndim, dtype, rng):
    # Reference: scipy.ndimage.label of {f < level} (complement connectivity: full, since
    # the wall connectivity is 1), the component holding the core; holes it encloses are
    # filled (the "filled region" rule), so the region lies between the two.
    shape = (40, 40) if ndim == 2 else (16, 16, 16)
    img = ndi.gaussian_filter(rng.random(shape), 1.0).astype(dtype)
    seg = segment(img, min_persistence=0.002, region="breach")
    chambers = seg.regions.select(seg.regions["kind"] == "chamber")
    assert len(chambers) >= 2
    full = ndi.generate_binary_structure(ndim, ndim)
    for row in list(chambers)[:6]:
        comp, _ = ndi.label(img < row["level"], full)
        core = np.unravel_index(row["core_voxel"], shape)
        expected = comp == comp[core]
        region = seg.labels == row["label"]
        nested = np.isin(seg.labels, chambers["label"][chambers["parent"] == row["label"]])
        assert np.all(region[expected] | nested[expected])
        assert np.all(ndi.binary_fill_holes(expected)[region])


@pytest.mark.parametrize("ndim", [2, 3])
def test_no_spurious_regions_on_noise_only_images(ndim):
    # Regression on invented data (white noise): automatic significance keeps nothing.
    shape = (48, 48) if ndim == 2 else (20, 20, 20)
    found = 0
    for seed in range(30 if ndim == 2 else 6):
        noise = np.random.default_rng(100 + seed).normal(10.0, 2.0, shape)
        found += int(segment(noise).labels.max())
    assert found == 0


@pytest.mark.parametrize("walls", ["bright", "dark"])
def test_cell_sheet_dice_regression(walls):
    # Regression on invented data (cavitas.scenes, noise 0.2 of the contrast, ramp 3x):
    # at least 90 % of the interior cells found with Dice >= 0.7.
    from cavitas.scenes import cell_sheet

    scene = cell_sheet((160, 160), cells=25, noise=0.2, ramp=3.0, walls=walls, seed=3)
    labels = segment(scene.volume, walls=walls).labels
    interior = [t for t in range(1, scene.n_labels + 1) if t not in scene.border_labels]
    found = 0
    for t in interior:
        cell = scene.truth == t
        best = np.bincount(labels[cell]).argmax()  # the region covering most of the cell
        if best:
            mine = labels == best
            found += 2 * (cell & mine).sum() / (cell.sum() + mine.sum()) >= 0.7
    assert found >= 0.9 * len(interior)


def _nested_rings():
    img = np.zeros((30, 30))
    img[3:27, 3:27] = 1
    img[5:25, 5:25] = 0
    img[10:20, 10:20] = 1
    img[12:18, 12:18] = 0
    return img


def test_capsule_in_capsule_keeps_its_label_and_parent():
    # Hand-made rings (geometry checked by hand): the outer chamber holds the inner wall.
    seg = segment(_nested_rings(), min_persistence=0.5)
    rows = seg.regions.select(seg.regions["kind"] == "chamber")
    inner = seg.labels[15, 15]
    outer = seg.labels[7, 7]
    assert inner != outer and inner > 0 and outer > 0
    assert seg.labels[11, 11] == outer  # the inner ring's wall belongs to the outer chamber
    assert rows["parent"][rows["label"] == inner][0] == outer
    assert rows["enclosed_voxels"][rows["label"] == outer][0] == 20 * 20 - 0


def test_dark_walls_equal_negated_bright():
    # Polarity symmetry (definition of walls="dark": the sublevel filtration).
    img = _nested_rings()
    a = segment(img, min_persistence=0.5).labels
    b = segment(5.0 - 3 * img, min_persistence=1.5, walls="dark").labels
    assert np.array_equal(a, b)


def test_nothing_selected_is_not_an_error():
    seg = segment(np.zeros((12, 12)))
    assert seg.labels.max() == 0 and seg.labels.dtype == np.int32


@pytest.mark.parametrize("options", [
    {"level_fraction": 1.5, "region": "breach"},
    {"level_fraction": 0.5},                         # basin regions have no level fraction
    {"min_volume": 5.0, "max_volume": 1.0},
    {"top": 0},
    {"relative_persistence": 2.0},
    {"walls": "grey"},
])
def test_contradictory_options_raise(options):
    with pytest.raises(ParameterError):
        SegmentParams(**options)


def test_volume_bounds_need_spacing():
    with pytest.raises(ParameterError, match="spacing"):
        segment(np.zeros((8, 8)), min_volume=3.0)
    seg = segment(_nested_rings(), spacing=(0.5, 0.5), min_persistence=0.5, min_volume=50.0)
    assert seg.labels.max() == 1  # the inner chamber (36 px = 9 µm²) is dropped


def test_top_keeps_the_most_persistent():
    img = _nested_rings()
    img[12:18, 12:18] = 0.6  # the inner chamber is now less persistent (0.4 vs 1.0)
    seg = segment(img, min_persistence=0.1, top=1)
    assert seg.regions.select(seg.regions["kind"] == "chamber")["persistence"].tolist() == [1.0]


def test_params_toml_round_trip(tmp_path):
    p = SegmentParams(walls="dark", region="breach", level_fraction=0.5, top=4)
    f = tmp_path / "p.toml"
    f.write_text("[segment]\n" + "\n".join(
        f"{k} = {v!r}".replace("'", '"') for k, v in p.to_dict().items()
        if v is not None and not isinstance(v, bool)) + "\n")
    assert Settings.from_toml(f).params == p
    f.write_text("colour = 3\n")
    with pytest.raises(ParameterError, match="colour"):
        Settings.from_toml(f)


def test_shell_and_three_class():
    seg = segment(_nested_rings(), min_persistence=0.5)
    inner = int(seg.labels[15, 15])
    shell = seg.shell(inner)
    assert shell[11, 15] and not shell[15, 15] and not shell[7, 7]
    three = seg.three_class(inner)
    assert three[15, 15] == 1 and three[11, 15] == 2 and three[10, 15] == 0
    thick = seg.three_class(inner, thickness=1.0)  # one more voxel of the 2-voxel wall
    assert thick[10, 15] == 2 and thick[9, 15] == 0 and thick[7, 7] == 0


def test_mesh_volume_of_a_ball(tmp_path):
    # Geometry: volume of a ball 4/3 pi r^3 (handbook); the marching-cubes surface of a
    # voxelised ball of radius 8 encloses it within 5 %.
    from cavitas.segment._mesh import region_mesh, write_mesh

    z, y, x = np.mgrid[:21, :21, :21] - 10
    lab = ((z**2 + y**2 + x**2) <= 64).astype(np.int32)
    verts, faces = region_mesh(lab, 1, (1.0, 1.0, 1.0))
    tri = verts[faces]
    vol = abs(np.einsum("ij,ij->i", tri[:, 0], np.cross(tri[:, 1], tri[:, 2])).sum()) / 6
    assert vol == pytest.approx(4 / 3 * np.pi * 8**3, rel=0.05)
    write_mesh(tmp_path / "b.stl", verts, faces)
    assert (tmp_path / "b.stl").stat().st_size == 84 + 50 * len(faces)  # binary STL layout


@settings(max_examples=25)
@given(data=st.data())
def test_breach_regions_match_scipy_with_ties_masks_and_connectivity(data):
    # Reference: scipy.ndimage.label of {f < level} with the complement's connectivity
    # (walls by faces <-> cavities fully connected, and vice versa), on small uint8 arrays
    # full of ties, with and without an ROI mask (outside the ROI counts as outside).
    ndim = data.draw(st.sampled_from([2, 3]))
    shape = (9, 10) if ndim == 2 else (5, 6, 7)
    seed = data.draw(st.integers(0, 2**31 - 1))
    rng = np.random.default_rng(seed)
    img = rng.integers(0, 6, shape).astype(np.uint8)
    connectivity = data.draw(st.sampled_from([1, ndim]))
    mask = None
    if data.draw(st.booleans()):
        mask = np.ones(shape, bool)
        mask[(slice(None),) * (ndim - 1) + (slice(0, 2),)] = False
    seg = segment(img, min_persistence=1, region="breach", connectivity=connectivity,
                  mask=mask)
    dual = ndim if connectivity == 1 else 1
    structure = ndi.generate_binary_structure(ndim, dual)
    for row in seg.regions.select(seg.regions["kind"] == "chamber"):
        below = img < row["level"]
        if mask is not None:
            below &= mask
        comp, _ = ndi.label(below, structure)
        core = np.unravel_index(row["core_voxel"], shape)
        expected = comp == comp[core]
        region = seg.labels == row["label"]
        inner = np.isin(seg.labels, seg.regions["label"][seg.regions["parent"] == row["label"]])
        assert np.all(region[expected] | inner[expected])
        assert np.all(ndi.binary_fill_holes(expected)[region])


def test_label_dtype_widens_only_when_needed():
    # scipy.ndimage's policy (style guide): int32 labels until the count needs int64.
    from cavitas.segment._result import label_dtype

    assert label_dtype(10) == np.int32
    assert label_dtype(2**31) == np.int64


def test_border_cut_regions_are_listed_and_kept_on_request():
    # Hand-made geometry: a ring, and a U open to the top border (cut by it).
    img = np.zeros((20, 30))
    img[4:14, 2:12] = 1
    img[6:12, 4:10] = 0
    img[0:14, 16:26] = 1
    img[0:12, 18:24] = 0
    seg = segment(img, min_persistence=0.5)
    rows = seg.regions
    assert (rows["kind"] == "chamber").sum() == 1
    cut = rows.select(rows["kind"] == "cut")
    assert cut["touches_border"].all() and len(cut) >= 2  # the U's inside, the medium
    assert seg.labels[5, 20] == 0
    # keep_border: the U's inside is a chamber flagged touches_border, delineated like the
    # ring's inside: it equals the scipy.ndimage.label component of the noise-free inside
    # (the faces are given back to it); the medium around both is not a region.
    kept = segment(img, min_persistence=0.5, keep_border=True)
    inside, _ = ndi.label(img == 0)
    u_label = kept.labels[5, 20]
    rows = kept.regions
    assert u_label > 0 and rows["touches_border"][rows["label"] == u_label].all()
    assert np.array_equal(kept.labels == u_label, inside == inside[5, 20])
    ring = kept.labels[8, 6]
    assert ring > 0 and not rows["touches_border"][rows["label"] == ring].any()
    assert kept.labels[18, 28] == 0 and int(kept.labels.max()) == 2


def test_keep_border_labels_cells_cut_one_voxel_short_of_the_face():
    # Hand-made geometry: a 4 x 4 grid of square cells (walls 2 voxels, bright) cropped
    # through the outer cells, so 12 of them are cut by the faces (they would stop one
    # voxel short of the face if the face were taken as a wall). Reference:
    # scipy.ndimage.label of the noise-free cell interiors. Default: the cut cells are not
    # in the label map; keep_border: every cell is, the cut ones flagged, each equal to its
    # scipy component (the face voxels included).
    img = np.zeros((50, 50))
    for w in (8, 24, 40):
        img[:, w:w + 2] = 1.0
        img[w:w + 2, :] = 1.0
    cells, n = ndi.label(img == 0)
    assert n == 16
    default = segment(img, min_persistence=0.5)
    whole = [c for c in range(1, n + 1)
             if not np.isin(c, np.concatenate([cells[0], cells[-1], cells[:, 0], cells[:, -1]]))]
    assert int(default.labels.max()) == len(whole)
    kept = segment(img, min_persistence=0.5, keep_border=True)
    assert int(kept.labels.max()) == n
    for c in range(1, n + 1):
        labels_here = np.unique(kept.labels[cells == c])
        assert labels_here.size == 1 and labels_here[0] > 0
        assert np.array_equal(kept.labels == labels_here[0], cells == c)
    touching = kept.regions["touches_border"][kept.regions["kind"] == "chamber"]
    assert int(touching.sum()) == n - len(whole)


def test_a_dim_cell_cut_by_the_border_is_not_a_chamber():
    # Regression on invented data (cavitas.scenes.cell_sheet: a 160² crop of cells about
    # 60 pixels across, dark walls, noise 0.1 of the contrast under a 1 -> 0.35 gain). The
    # cell cut by the border in the dim corner stopped one pixel short of the faces: its
    # face pixels lay above the outside basin's one wall level, set by the bright corner,
    # but below the cell's own. No region of the default label map may have its majority
    # in a cell that meets the border over more than 2 pixels (a cell cut by a hair is
    # closed in the image).
    from cavitas.scenes import cell_sheet

    scene = cell_sheet((160, 160), cells=11, noise=0.1, ramp=0.35, walls="dark", seed=0,
                       wall_thickness=2)
    labels = segment(scene.volume, walls="dark").labels
    face = np.ones(labels.shape, bool)
    face[1:-1, 1:-1] = False
    contact = np.bincount(scene.truth[face], minlength=scene.n_labels + 1)
    for region in range(1, int(labels.max()) + 1):
        cell = np.bincount(scene.truth[labels == region]).argmax()
        assert cell == 0 or contact[cell] <= 2


def test_enclosure_holds_its_chambers_and_inner_walls():
    # Two chambers behind a weak inner wall (0.4) inside a strong outer wall (1.0):
    # one enclosure of level 1.0 holding both (hand-made geometry).
    img = np.zeros((20, 30))
    img[2:18, 2:28] = 1.0
    img[4:16, 4:26] = 0.0
    img[4:16, 14:16] = 0.4
    seg = segment(img, min_persistence=0.2, region="breach")
    rows = seg.regions
    enc = rows.select(rows["kind"] == "enclosure")
    assert len(enc) == 1 and enc["level"][0] == pytest.approx(1.0)
    chambers = rows.select(rows["kind"] == "chamber")
    assert set(chambers["parent"]) == {enc["label"][0]} and set(chambers["depth"]) == {1}
    emap = seg.enclosure_labels()
    assert np.all(emap[4:16, 4:26] == enc["label"][0])  # chambers and the inner wall
    assert enc["own_voxels"][0] == 12 * 22


def test_level_fraction_shrinks_breach_regions(rng):
    img = ndi.gaussian_filter(rng.random((40, 40)), 1.5)
    img = np.pad(img, 2, constant_values=1.0)  # a bright frame: no chamber is cut
    full = segment(img, min_persistence=0.005, region="breach").labels
    half = segment(img, min_persistence=0.005, region="breach", level_fraction=0.5).labels
    assert half.max() == full.max() > 0
    assert np.all(full[half > 0] == half[half > 0]) and (half > 0).sum() < (full > 0).sum()


def test_detection_in_two_threads_equals_one_after_the_other(monkeypatch):
    # Common practice: a parallel path gives exactly what the serial one gives. On one
    # core the detection scales are tried one at a time; on more, two at a time, all
    # queued at once (a small image) or each once the one before it is taken.
    import cavitas.segment._detect as segment_module
    from cavitas.scenes import foam

    scene = foam((64, 64, 64), cells=120, noise=0.2, ramp=2.0, walls="bright", seed=5)
    monkeypatch.setattr(segment_module, "usable_cores", lambda: 2)
    queued = segment(scene.volume)
    monkeypatch.setattr(segment_module, "QUEUED_VOXELS", 0)
    threaded = segment(scene.volume)
    monkeypatch.setattr(segment_module, "usable_cores", lambda: 1)
    serial = segment(scene.volume)
    for run in (queued, threaded):
        np.testing.assert_array_equal(run.labels, serial.labels)
        assert run.params["scales_tried"] == serial.params["scales_tried"]
    assert threaded.labels.max() > 5


def test_kept_detection_of_a_finer_scale_equals_detecting_it_again(monkeypatch):
    # Common practice: a shortcut gives exactly what the long way gives. Where the noise is
    # not white, the texture rule can pick a finer scale than the one with most cavities; a
    # small image keeps every scale's detection and takes that one, a large one detects it
    # again. Input (invented): a cell sheet with noise blurred by σ = 1 pixel.
    from scipy import ndimage as ndi

    import cavitas.segment._detect as segment_module
    from cavitas.scenes import cell_sheet

    sheet = cell_sheet((128, 128), cells=30, noise=0.0, seed=2).image
    grain = ndi.gaussian_filter(np.random.default_rng(2).normal(0, 1, sheet.shape), 1.0)
    image = sheet + 0.08 * grain / grain.std()
    kept = segment(image)
    monkeypatch.setattr(segment_module, "QUEUED_VOXELS", 0)
    again = segment(image)
    counts = [t["count"] for t in kept.params["scales_tried"]]
    sigmas = [t["sigma"] for t in kept.params["scales_tried"]]
    assert sigmas.index(kept.params["smooth_sigma"]) < int(np.argmax(counts))  # the rule
    np.testing.assert_array_equal(kept.labels, again.labels)
    for name in kept.regions.names:
        np.testing.assert_array_equal(kept.regions[name], again.regions[name])
    assert kept.params["scales_tried"] == again.params["scales_tried"]
    assert kept.labels.max() > 5


def test_stages_are_reported_in_order():
    # Common practice for progress displays: every stage is announced once, in order.
    img = _nested_rings()
    stages = []
    segment(img, stage=stages.append)
    n = len(stages) - 3
    assert stages == ["noise level", *[f"smoothing scale {i} of {n}" for i in range(1, n + 1)],
                      "polarity check", "regions"]
    assert n >= 2  # automatic mode tries several scales


def _voronoi_scene(n=256, cells=60, half_wall=1.5, noise=0.15, seed=7):
    """A Voronoi tessellation drawn with bright walls, and its cells (scipy's k-d tree)."""
    from scipy.spatial import cKDTree

    rng = np.random.default_rng(seed)
    seeds = rng.uniform(0, n, (cells, 2))
    grid = np.indices((n, n)).reshape(2, -1).T.astype(float)
    dist, nearest = cKDTree(seeds).query(grid, k=2)
    gap = np.linalg.norm(seeds[nearest[:, 0]] - seeds[nearest[:, 1]], axis=1)
    # distance to the bisector of the two nearest seeds: (d2² - d1²) / (2 |s1 - s2|)
    wall = ((dist[:, 1] ** 2 - dist[:, 0] ** 2) / (2 * gap) < half_wall).reshape(n, n)
    image = wall + rng.normal(0, noise, (n, n))
    return image, (nearest[:, 0] + 1).reshape(n, n)


def test_partition_of_a_voronoi_foam_is_its_tessellation():
    # Reference: the Voronoi tessellation of the seeds (nearest seed, scipy.spatial.cKDTree),
    # drawn with walls 3 pixels wide centred on the cell edges (their ridge line is the
    # edge) and noise 0.15 of the contrast. The partition gives each cell its half of every
    # wall, so it should reproduce the tessellation; the label map (walls 0) cannot.
    image, truth = _voronoi_scene()
    seg = segment(image)
    part = seg.partition
    assert np.array_equal(part[seg.labels > 0], seg.labels[seg.labels > 0])
    border = np.unique(np.concatenate([truth[0], truth[-1], truth[:, 0], truth[:, -1]]))
    inner = np.setdiff1d(np.unique(truth), border)

    def dice_of_best_match(labels, cell):
        inside = truth == cell
        found, count = np.unique(labels[inside], return_counts=True)
        best = found[np.argmax(count)]
        match = labels == best
        return 0.0 if best == 0 else 2 * (inside & match).sum() / (inside.sum() + match.sum())

    partition_dice = np.array([dice_of_best_match(part, c) for c in inner])
    label_dice = np.array([dice_of_best_match(seg.labels, c) for c in inner])
    assert len(inner) >= 30 and partition_dice.min() >= 0.93
    assert np.median(partition_dice) >= 0.96 > np.median(label_dice)


def test_partition_volume_with_wall_is_the_cell_area(tmp_path):
    # Reference: the Voronoi cell areas (pixel counts of the nearest-seed map) of the
    # scene above; the label map's volume leaves the walls out, the partition's includes
    # each cell's half of them.
    import tifffile

    from cavitas.cli import main

    image, truth = _voronoi_scene()
    tifffile.imwrite(tmp_path / "foam.tif", (1000 + 500 * image).astype(np.uint16))
    assert main(["segment", str(tmp_path / "foam.tif"), "-o", str(tmp_path / "out"),
                 "--partition", "--no-report", "-q"]) == 0
    part = tifffile.imread(tmp_path / "out" / "partition.tif")
    labels = tifffile.imread(tmp_path / "out" / "labels.tif")
    assert np.array_equal(part[labels > 0], labels[labels > 0])
    from cavitas._table import Table

    rows = Table.from_csv(tmp_path / "out" / "regions.csv")
    chambers = rows.select(rows["kind"] == "chamber")
    for label, area, with_wall in zip(chambers["label"], chambers["volume"],
                                      chambers["volume_with_wall"], strict=True):
        cells, count = np.unique(truth[part == label], return_counts=True)
        cell = cells[np.argmax(count)]
        if cell in np.concatenate([truth[0], truth[-1], truth[:, 0], truth[:, -1]]):
            continue
        assert with_wall == pytest.approx(np.count_nonzero(truth == cell), rel=0.08)
        assert with_wall > area


def test_one_shell_for_the_mask_the_map_and_the_table():
    # Geometry: the wall voxels sharing a face with an 8 x 8 square are 4 · 8 = 32 (the
    # corners' diagonal neighbours share no face). Thickened by one voxel: the 4 corners of
    # that layer and the 4 · 8 voxels of the next layer facing it (the next layer's
    # corners are √2 and more away): 32 + 4 + 32 = 68.
    from cavitas.segment._shells import shell_labels
    from cavitas.workflow import measured_regions

    img = np.zeros((16, 16))
    img[2:14, 2:14] = 1
    img[4:12, 4:12] = 0
    seg = segment(img, min_persistence=0.5, region="breach")
    table, _ = measured_regions(seg, thickness=False)
    row = table.select(table["label"] == 1)
    walls = seg.all_labels == 0
    assert int(seg.shell(1).sum()) == 32 == int(row["shell_voxel_count"][0])
    assert int((shell_labels(seg.labels, (1.0, 1.0), 0.0, walls=walls) == 1).sum()) == 32
    assert int(seg.shell(1, thickness=1.0).sum()) == 68
    assert int((shell_labels(seg.labels, (1.0, 1.0), 1.0, walls=walls) == 1).sum()) == 68


def test_nan_outside_the_mask_is_accepted_as_persistence_does():
    # Reference: scipy.ndimage.label of the noise-free insides. A ring image whose right
    # half is NaN (no data), masked out: the ring in the left half is found as on the
    # clean image; NaN inside the mask is still an error naming the mask.
    img = np.zeros((20, 40))
    img[4:16, 2:14] = 1
    img[6:14, 4:12] = 0
    roi = np.ones(img.shape, bool)
    roi[:, 20:] = False
    holed = img.copy()
    holed[:, 20:] = np.nan
    seg = segment(holed, mask=roi, min_persistence=0.5)
    inside, _ = ndi.label(img == 0)
    assert np.array_equal(seg.labels > 0, inside == inside[10, 8])
    # the partition (smoothed again from the NaN image) grows the ring's inside over part of
    # its wall and no further than the ring's outer edge
    grown = seg.partition > 0
    assert grown[seg.labels > 0].all() and grown.sum() > (seg.labels > 0).sum()
    assert not grown[:4].any() and not grown[16:].any() and not grown[:, 14:].any()
    holed[10, 8] = np.nan
    with pytest.raises(InputFileError, match="inside the mask"):
        segment(holed, mask=roi, min_persistence=0.5)
