"""The placement search: pins, holes, inferred grids, the crossover's invariants."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from conftest import skimage_image, write_raster
from stitch.layout import Placement, allowed_orientations
from stitch.pipeline import SolveOptions, solve
from stitch.puzzles import cut_raster, score_placement
from stitch.search import Grid, Pins
from stitch.search import _lookup, _polish
from stitch.search.problem import PERMS6, Problem
from stitch.seams import score_seams
from stitch.tiles import EdgeStrips


def _table(side=6, orients=(0,)):
    img = skimage_image("coffee")[:, 60:60 + 28 * side, 150:150 + 28 * side].astype(np.float32)
    tiles = [img[:, 28 * r:28 * (r + 1), 28 * c:28 * (c + 1)] for r in range(side) for c in range(side)]
    edges = EdgeStrips.from_pixels(tiles)
    return score_seams(edges, orientations=orients)


TABLE = _table(6, allowed_orientations(90, True))


@settings(max_examples=60, deadline=None)
@given(seed=st.integers(0, 2**31 - 1), mutation=st.sampled_from([0.0, 0.05, 1.0]),
       shape=st.sampled_from([(6, 6), (4, 9), (9, 4), (7, 6)]), n_pins=st.integers(0, 3))
def test_crossover_never_duplicates_or_drops_a_tile(seed, mutation, shape, n_pins):
    rng = np.random.default_rng(seed)
    pin_tiles = tuple(int(t) for t in rng.choice(36, n_pins, replace=False))
    cells = rng.choice(shape[0] * shape[1], n_pins, replace=False)
    pins = Pins(pin_tiles, tuple(int(c // shape[1]) for c in cells), tuple(int(c % shape[1]) for c in cells),
                absolute=True)
    p = Problem(TABLE, TABLE.orientations, pins)
    a, b = p.random(shape, rng), p.random(shape, rng)
    pa, pb = _lookup.partners(a[0], a[1], 36), _lookup.partners(b[0], b[1], 36)
    child = p.crossover(pa, pb, int(rng.integers(36)), 0, shape, mutation, int(rng.integers(2**31 - 1)))
    placed = child[0][child[0] >= 0]
    assert sorted(placed.tolist()) == list(range(36))
    assert child[0].shape == shape
    assert set(np.unique(child[1][child[0] >= 0])) <= set(TABLE.orientations)
    for t, r, c in zip(pins.tiles, pins.rows, pins.cols):
        assert child[0][r, c] == t and child[1][r, c] == 0


@pytest.mark.filterwarnings("ignore::stitch.errors.NotGeoreferencedWarning")
def test_pinned_tiles_stay_and_the_rest_fits_around(tmp_path):
    src = write_raster(tmp_path / "src.tif", skimage_image("astronaut")[:, :168, :196])
    cut = cut_raster(src, tmp_path / "t", 28, shuffle=True, seed=8, key_path=tmp_path / "k.csv")
    key = cut.key
    # Pin three tiles at their true cells, shifted by one row into a larger grid.
    chosen = [0, 17, 40]
    pins = tuple((key.names[i], int(key.rows[i]) + 1, int(key.cols[i])) for i in chosen)
    opts = SolveOptions(grid=(7, 7), pins=pins, seed=8)
    result = solve(tmp_path / "t", tmp_path / "m.tif", options=opts)
    p = result.placement
    assert p.shape == (7, 7)
    for name, row, col in pins:
        i = p.names.index(name)
        assert (p.rows[i], p.cols[i], p.rotations[i]) == (row, col, 0)
    scores = score_placement(p, key, frame="fixed")
    assert scores.perfect, scores


@pytest.mark.filterwarnings("ignore::stitch.errors.NotGeoreferencedWarning")
def test_missing_tiles_leave_holes_and_neighbours_stay_right(tmp_path):
    """5 % of a 10 x 10 set removed: the grid is still inferred, every present tile well placed."""
    src = write_raster(tmp_path / "src.tif", skimage_image("coffee")[:, 60:340, 150:430])
    cut = cut_raster(src, tmp_path / "t", 28, shuffle=True, seed=9, key_path=tmp_path / "k.csv")
    rng = np.random.default_rng(9)
    gone = rng.choice(100, 5, replace=False)
    for i in gone:
        (tmp_path / "t" / cut.key.names[i]).unlink()
    result = solve(tmp_path / "t", tmp_path / "m.tif", options=SolveOptions(seed=9))
    p = result.placement
    assert p.shape == (10, 10) and int(p.placed.sum()) == 95
    scores = score_placement(p, cut.key)
    assert scores.direct == pytest.approx(95 / 100)  # every present tile in its cell
    assert scores.missing == 5
    import rasterio

    with rasterio.open(result.outputs["mosaic"]) as out:
        # Holes are masked (GDAL's per-dataset mask), not given a nodata
        # value that valid 8-bit pixels could hold.
        holes = np.argwhere(p.grid()[0] < 0)
        mask = out.dataset_mask()
        assert out.nodata is None and len(holes) == 5
        assert out.mask_flag_enums[0] == [rasterio.enums.MaskFlags.per_dataset]
        hole = np.zeros(mask.shape, bool)
        for r, c in holes:
            hole[r * 28:(r + 1) * 28, c * 28:(c + 1) * 28] = True
        assert (mask[hole] == 0).all() and (mask[~hole] == 255).all()
    assert result_summary(result)["holes"] == {"cells": 5, "marked_by": "internal mask band"}


@pytest.mark.parametrize("image, seed, missing", [
    # scikit-image's rocket (a SpaceX launch photo, public domain; from
    # memory): 79 tiles left, a prime count that only strips hold exactly,
    # came out as a 1 x 79 strip.
    ("rocket", 2, 1),
    ("coffee", 2, 3),  # scikit-image's coffee (CC0)
])
@pytest.mark.filterwarnings("ignore::stitch.errors.NotGeoreferencedWarning")
def test_a_few_missing_tiles_leave_the_grid_as_it_was(tmp_path, image, seed, missing):
    """An 8 x 10 set of 40 px tiles with a few tiles gone and no nodata to
    explain the holes: the grid is still 8 x 10, every present tile in its
    cell, not a strip or a frame a column wider in which a tile dodges."""
    src = write_raster(tmp_path / "src.tif", skimage_image(image)[:, :320, :400])
    cut = cut_raster(src, tmp_path / "t", 40, shuffle=True, seed=seed, key_path=tmp_path / "k.csv")
    assert cut.key.shape == (8, 10)
    for i in np.random.default_rng(seed).choice(80, missing, replace=False):
        (tmp_path / "t" / cut.key.names[i]).unlink()
    result = solve(tmp_path / "t", tmp_path / "m.tif", options=SolveOptions(seed=seed))
    assert result.placement.shape == (8, 10)
    assert score_placement(result.placement, cut.key).direct == pytest.approx((80 - missing) / 80)


def result_summary(result):
    import json

    return json.loads((result.outputs["report_summary"]).read_text())


@pytest.mark.filterwarnings("ignore::stitch.errors.NotGeoreferencedWarning")
def test_valid_zero_pixels_stay_valid_beside_holes(tmp_path):
    """An 8-bit tile set with black (0) pixels and a missing tile: the black
    pixels stay valid in the mosaic; only the hole is masked. Pixels from
    scikit-image's ``coffee`` (CC0) with a black stripe painted in."""
    import rasterio

    img = skimage_image("coffee")[:, 60:172, 150:262].copy()
    img[:, 50:60, :] = 0
    src = write_raster(tmp_path / "src.tif", img)
    cut = cut_raster(src, tmp_path / "t", 28, shuffle=True, seed=2, key_path=tmp_path / "k.csv")
    (tmp_path / "t" / cut.key.names[15]).unlink()  # the bottom-right tile
    result = solve(tmp_path / "t", tmp_path / "m.tif", options=SolveOptions(seed=2, grid=(4, 4)))
    assert score_placement(result.placement, cut.key, frame="fixed").direct == pytest.approx(15 / 16)
    with rasterio.open(result.outputs["mosaic"]) as out:
        data, mask = out.read(), out.dataset_mask()
    assert (data[:, 50:60, :] == 0).all()  # the black stripe is in the mosaic...
    assert (mask[50:60, :] == 255).all()   # ...and valid
    assert (mask[84:, 84:] == 0).all() and int((mask == 0).sum()) == 28 * 28  # only the hole is masked


def test_search_plugin_through_entry_points(tmp_path, monkeypatch, tiles_dir):
    site = tmp_path / "site"
    dist = site / "rowwise_search-1.0.dist-info"
    dist.mkdir(parents=True)
    (dist / "METADATA").write_text("Metadata-Version: 2.1\nName: rowwise-search\nVersion: 1.0\n")
    (dist / "entry_points.txt").write_text("[stitch.searches]\nrowwise = rowwise_mod:search\n")
    (site / "rowwise_mod.py").write_text(
        "import numpy as np\n"
        "from stitch.search import search_placement, SearchSettings\n"
        "def search(table, *, shape, orientations, settings, rng, progress, pins, holes):\n"
        "    return search_placement(table, shape=shape, orientations=orientations, rng=rng, pins=pins,\n"
        "                            settings=SearchSettings(strategy='greedy'))\n")
    monkeypatch.syspath_prepend(str(site))
    from stitch.search import available_searches

    assert "rowwise" in available_searches()
    opts = SolveOptions(search=__import__("stitch").SearchSettings(strategy="rowwise"))
    result = solve(tiles_dir, tmp_path / "m.tif", options=opts)
    assert result.search.strategy == "greedy"


def test_segment_regrowth_mends_a_shifted_block():
    """Halves of a correct placement swapped: every seam but the fault is right.

    Swapping single tiles cannot mend this (each swap breaks good seams);
    keeping one segment and placing the rest around it again does. Tiles from
    scikit-image's bundled ``coffee`` (CC0).
    """
    from stitch.search import SearchSettings
    from stitch.search.regrowth import regrow, segments

    table = _table(6, (0,))
    p = Problem(table, (0,))
    truth = (np.arange(36).reshape(6, 6), np.zeros((6, 6), np.int64))
    shifted = (np.roll(truth[0], 3, axis=1), truth[1].copy())
    largest = segments(p, shifted)[0] % 6
    assert (largest < 3).all() or (largest >= 3).all()  # no trusted seam across the fault
    polished = (shifted[0].copy(), shifted[1].copy())
    p.polish(polished, 3)
    assert p.fitness(polished) > p.fitness(truth)  # local search stays stuck
    mended, cost = regrow(p, shifted, SearchSettings(), deadline=None)
    assert np.array_equal(mended[0], truth[0])
    assert cost == pytest.approx(p.fitness(truth))


def test_a_tiny_time_limit_still_places_every_tile_once():
    from stitch.search import SearchSettings, search_placement

    res = search_placement(TABLE, shape=(6, 6), orientations=TABLE.orientations, rng=3,
                           settings=SearchSettings(time_limit=1e-3))
    assert sorted(res.tiles.ravel().tolist()) == list(range(36))


def _turned_astronaut(px, shuffle=False):
    """Seam table of the top-left 448 x 448 px of scikit-image's ``astronaut``
    (public domain, NASA) cut into ``px`` tiles, each given a random quarter turn."""
    img = skimage_image("astronaut")[:, :448, :448].astype(np.float32)
    rng = np.random.default_rng(1)
    side = 448 // px
    tiles = [np.rot90(img[:, px * r:px * (r + 1), px * c:px * (c + 1)], int(rng.integers(4)), axes=(1, 2))
             for r in range(side) for c in range(side)]
    if shuffle:
        tiles = [tiles[i] for i in rng.permutation(len(tiles))]
    orients = allowed_orientations(90, False)
    table = score_seams(EdgeStrips.from_pixels(tiles), orientations=orients)
    return table, orients


def test_a_complete_set_gets_a_full_grid_not_one_with_holes():
    """256 tiles with quarter turns: a free greedy run with empty cells keeps a
    few more best-buddy seams than a 16 x 16 frame, yet the full grid is right.
    Tiles from scikit-image's bundled ``astronaut`` (public domain, NASA)."""
    from stitch.search import SearchSettings, search_placement

    table, orients = _turned_astronaut(28)
    res = search_placement(table, orientations=orients, rng=0, holes=True,
                           settings=SearchSettings(generations=1, population=8))
    assert res.shape == (16, 16)
    assert (res.tiles >= 0).all()


def test_a_free_run_that_wanders_off_does_not_set_the_grid():
    """784 small tiles (16 px) with quarter turns: a free greedy run sprawls
    over a 35 x 37 box (40 % empty) and keeps more best-buddy seams than the
    28 x 28 frame, but a grid that sparse is no candidate. Tiles from
    scikit-image's bundled ``astronaut`` (public domain, NASA)."""
    from stitch.search import SearchSettings, search_placement

    table, orients = _turned_astronaut(16, shuffle=True)
    res = search_placement(table, orientations=orients, rng=0, holes=True,
                           settings=SearchSettings(strategy="greedy"))
    assert res.shape == (28, 28)
    assert (res.tiles >= 0).all()


def test_a_converged_search_with_time_left_refreshes_and_goes_on():
    """Patience 1 under a time limit: the population is refreshed with greedy
    placements (a crossover seed array once shadowed their list and crashed this)."""
    from stitch.search import SearchSettings, search_placement

    res = search_placement(TABLE, shape=(6, 6), orientations=TABLE.orientations, rng=3,
                           settings=SearchSettings(time_limit=3, patience=1, population=12))
    assert res.generations >= 2
    assert sorted(res.tiles.ravel().tolist()) == list(range(36))


def _window_cost(gt, go, r0, c0, h, w, lookup):
    """Every seam touching a window, each counted once, read one by one from the grid."""
    rows, cols = gt.shape
    total = 0.0
    for i in range(r0, r0 + h):
        for j in range(c0, c0 + w):
            for d in range(4):
                ni, nj = i + _lookup.DROW[d], j + _lookup.DCOL[d]
                if gt[i, j] < 0 or not (0 <= ni < rows and 0 <= nj < cols) or gt[ni, nj] < 0:
                    continue
                if r0 <= ni < r0 + h and c0 <= nj < c0 + w and d in (0, 3):
                    continue  # counted from the other cell
                total += _lookup.seam_cost(lookup, gt[i, j], go[i, j], d, gt[ni, nj], go[ni, nj])
    return total


@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 2**31 - 1), shape=st.sampled_from([(2, 3), (3, 2)]), holes=st.integers(0, 4))
def test_window_arrangements_cost_what_the_grid_costs(seed, shape, holes):
    """The per-window seam tables price every arrangement exactly as the
    grid's own seams do (turned and mirrored tiles, holes, grid borders)."""
    rng = np.random.default_rng(seed)
    p = Problem(TABLE, TABLE.orientations)
    gt, go = p.random((6, 6), rng)
    gt.flat[rng.choice(36, holes, replace=False)] = -1
    h, w = shape
    r0, c0 = int(rng.integers(0, 7 - h)), int(rng.integers(0, 7 - w))
    k = h * w
    cells_t = gt[r0:r0 + h, c0:c0 + w].ravel().copy()
    cells_o = go[r0:r0 + h, c0:c0 + w].ravel().copy()
    edge, right, below = np.empty((k, k)), np.empty((k, k)), np.empty((k, k))
    _polish._window_tables(gt, go, r0, c0, h, w, cells_t, cells_o, p.lookup, edge, right, below)
    for q in rng.choice(len(PERMS6), 20, replace=False):
        gt[r0:r0 + h, c0:c0 + w] = cells_t[PERMS6[q]].reshape(h, w)
        go[r0:r0 + h, c0:c0 + w] = cells_o[PERMS6[q]].reshape(h, w)
        want = _window_cost(gt, go, r0, c0, h, w, p.lookup)
        got = _polish._arrangement_cost(q, PERMS6, h, w, edge, right, below)
        assert got == pytest.approx(want, rel=1e-9, abs=1e-9)


@settings(max_examples=60, deadline=None)
@given(seed=st.integers(0, 2**31 - 1), start=st.sampled_from(["random", "near the answer"]),
       shape=st.sampled_from([(6, 6), (7, 6), (5, 8)]), n_pins=st.integers(0, 4), passes=st.integers(1, 3),
       mirrors=st.booleans())
def test_swap_pass_keeps_every_tile_once_pins_in_place_and_never_raises_the_cost(seed, start, shape, n_pins, passes,
                                                                                  mirrors):
    """The swap-and-turn pass: the same tiles once each, holes and pinned
    tiles untouched, allowed orientations only, total seam cost never higher.

    Starts from a random placement (holes where the grid has more cells than
    tiles), or from the true placement of TABLE's tiles (scikit-image's
    ``coffee``, CC0) with a few tiles swapped and turned: there a pass that
    took a swap which raises the cost would show it.
    """
    rng = np.random.default_rng(seed)
    orients = TABLE.orientations if mirrors else (0, 1, 2, 3)
    if start == "random":
        cells = rng.choice(shape[0] * shape[1], n_pins, replace=False)
        pin_tiles = rng.choice(36, n_pins, replace=False)
    else:
        shape = (6, 6)
        cells = pin_tiles = rng.choice(36, n_pins, replace=False)  # pinned at their true cells
    pins = Pins(tuple(int(t) for t in pin_tiles), tuple(int(c // shape[1]) for c in cells),
                tuple(int(c % shape[1]) for c in cells), absolute=True)
    p = Problem(TABLE, orients, pins)
    if start == "random":
        grid = p.random(shape, rng)
    else:
        tiles, turns = np.arange(36), np.zeros(36, np.int64)
        free = np.setdiff1d(np.arange(36), pin_tiles)
        for _ in range(int(rng.integers(1, 5))):
            a, b = rng.choice(free, 2, replace=False)
            tiles[[a, b]] = tiles[[b, a]]
        turned = rng.choice(free, int(rng.integers(0, 3)), replace=False)
        turns[turned] = rng.choice(orients, len(turned))
        grid = Grid(tiles.reshape(6, 6), turns.reshape(6, 6))
    before = grid.copy()
    cost = p.total_cost(grid)
    moves = p.swap_pass(grid, passes)
    assert sorted(grid.tiles[grid.tiles >= 0].tolist()) == list(range(36))
    assert np.array_equal(grid.tiles < 0, before.tiles < 0)  # holes stay where they were
    assert set(np.unique(grid.orientations[grid.tiles >= 0])) <= set(orients)
    for t, r, c in zip(pins.tiles, pins.rows, pins.cols):
        assert grid.tiles[r, c] == t and grid.orientations[r, c] == 0
    assert p.total_cost(grid) <= cost * (1 + 1e-9) + 1e-9
    if moves == 0:
        assert np.array_equal(grid.tiles, before.tiles) and np.array_equal(grid.orientations, before.orientations)


def test_trusted_segments_agree_with_the_true_placement():
    """Every trusted segment (closed loops of best buddies) of turned and
    mirrored tiles is a piece of the true placement, moved as a whole. Tiles
    from scikit-image's bundled ``coffee`` (CC0), cut in reading order, so
    tile t's true cell is (t // 6, t % 6), upright."""
    from stitch.orientation import turned_orientations
    from stitch.search.assembly import trusted_segments

    segments = trusted_segments(TABLE.best_buddies, TABLE.orientations)
    assert segments and len(segments[0]) >= 12
    for seg in segments:
        true_r, true_c = seg.tiles // 6, seg.tiles % 6
        matches = 0
        for k in range(4):
            for mirror in (False, True):
                r, c = seg.rows.copy(), seg.cols.copy()
                if mirror:
                    c = -c
                for _ in range(k):
                    r, c = c, -r
                rot, mir = turned_orientations(seg.orientations % 4, seg.orientations >= 4, k, mirror)
                if len(set(zip(true_r - r, true_c - c))) == 1 and not rot.any() and not mir.any():
                    matches += 1
        assert matches == 1, seg


@pytest.mark.filterwarnings("ignore::stitch.errors.NotGeoreferencedWarning")
@pytest.mark.parametrize("image, missing", [
    pytest.param("coffee", 3, id="coffee (CC0), 97 tiles left: a prime"),
    pytest.param("coffee", 10, id="coffee (CC0), 90 left: was a 10x9 grid"),
    pytest.param("astronaut", 5, id="astronaut (public domain, NASA), 95 left: was a 5x19 grid"),
])
def test_a_set_with_missing_tiles_keeps_its_true_grid(tmp_path, image, missing):
    """10 x 10 tiles of 28 px from a scikit-image bundled image with some
    removed: the grid is still 10 x 10 with holes, not another factorisation
    of the count (the largest trusted segment rules those out)."""
    crop = {"coffee": np.s_[:, 60:340, 150:430], "astronaut": np.s_[:, 100:380, 100:380]}[image]
    src = write_raster(tmp_path / "src.tif", skimage_image(image)[crop])
    cut = cut_raster(src, tmp_path / "t", 28, shuffle=True, seed=9, key_path=tmp_path / "k.csv")
    gone = np.random.default_rng(missing).choice(100, missing, replace=False)
    for i in gone:
        (tmp_path / "t" / cut.key.names[i]).unlink()
    result = solve(tmp_path / "t", tmp_path / "m.tif", options=SolveOptions(seed=9))
    p = result.placement
    assert p.shape == (10, 10) and int(p.placed.sum()) == 100 - missing
    scores = score_placement(p, cut.key)
    assert scores.direct == pytest.approx((100 - missing) / 100)
    evidence = result.search.shape_evidence
    assert evidence["trusted_segment"]["tiles"] >= 25
    assert evidence["margin_of"] == "best-buddy seams"  # no nodata: holes are discounted evidence


def _collar_folder(tmp_path, tile, angle, cover, rotate=0, keep=1):
    """scikit-image's ``retina`` (CC0, 1411 x 1411 RGB) as a drone-style
    flight block: nodata 0 outside a turned rectangle, cut with the tiles
    that hold only nodata skipped, as tilers do."""
    from rasterio.transform import from_origin

    from stitch.puzzles import flight_block_mask

    img = np.maximum(skimage_image("retina"), 1)
    img[:, ~flight_block_mask(img.shape[1:], angle=angle, cover=cover)] = 0
    src = write_raster(tmp_path / "block.tif", img, transform=from_origin(500000.0, 4100000.0, 1.0, 1.0),
                       crs="EPSG:32633", nodata=0)
    cut = cut_raster(src, tmp_path / "t", tile, shuffle=True, strip_georef=True, keep_georef=keep, rotations=rotate,
                     skip_empty=True, seed=1, key_path=tmp_path / "k.csv")
    return src, cut


def test_cut_skip_empty_writes_no_tile_of_nodata_only(tmp_path):
    src, cut = _collar_folder(tmp_path, 128, 25, 0.5)
    key = cut.key
    assert key.shape == (11, 11) and len(key.names) == 81  # 40 cells hold only nodata
    files = sorted(p.name for p in (tmp_path / "t").glob("tile_*.tif"))
    assert files == sorted(key.names)
    import rasterio

    for name in key.names[:10]:
        with rasterio.open(tmp_path / "t" / name) as t:
            assert t.dataset_mask().any()


@pytest.mark.filterwarnings("ignore::stitch.errors.NotGeoreferencedWarning")
def test_a_tilted_flight_block_comes_back_pixel_for_pixel(tmp_path):
    """A collar leaving 36 % of the grid's cells empty (all-nodata tiles
    skipped, every edge tile part nodata), no tile georeferenced: the grid is
    the block's box, every tile is in its cell, and the mosaic is the source
    window pixel for pixel. The nodata edge is evidence: it continues across
    every true seam."""
    import rasterio
    from rasterio.windows import Window

    src, cut = _collar_folder(tmp_path, 64, 25, 0.5, keep=0)
    key = cut.key
    r0, c0 = int(key.rows.min()), int(key.cols.min())
    box = (int(key.rows.max()) - r0 + 1, int(key.cols.max()) - c0 + 1)
    result = solve(tmp_path / "t", tmp_path / "m.tif", options=SolveOptions(seed=1))
    assert result.placement.shape == box
    assert score_placement(result.placement, key).perfect
    window = Window(c0 * 64, r0 * 64, box[1] * 64, box[0] * 64)
    with rasterio.open(src) as s, rasterio.open(result.outputs["mosaic"]) as out:
        np.testing.assert_array_equal(out.read(), s.read(window=window))


def test_grid_inference_on_a_collar_with_half_its_cells_empty(tmp_path):
    """A block turned by 40 degrees leaving 47 % of the grid's cells empty:
    the grid is still the block's box, by a clear margin (the empty cells
    are priced: valid data may not face one), and every tile that holds at
    least a quarter valid pixels is in its cell (the few corner tips with
    less are left to the review)."""
    import rasterio

    src, cut = _collar_folder(tmp_path, 64, 40, 0.4)
    key = cut.key
    box = (int(key.rows.max() - key.rows.min()) + 1, int(key.cols.max() - key.cols.min()) + 1)
    assert len(key.names) < 0.55 * box[0] * box[1]
    result = solve(tmp_path / "t", tmp_path / "m.tif", options=SolveOptions(seed=1))
    assert result.placement.shape == box
    assert not result.search.shape_evidence["thin"]
    assert result.search.shape_evidence["margin_of"] == "search objective"  # the collar's holes are priced
    solid = []
    for i, name in enumerate(key.names):
        with rasterio.open(tmp_path / "t" / name) as t:
            if t.dataset_mask().mean() >= 0.25 * 255:
                solid.append(i)
    assert len(solid) >= 0.85 * len(key.names)
    sub = Placement(tuple(key.names[i] for i in solid), key.shape, key.rows[solid], key.cols[solid],
                    key.rotations[solid], key.mirrored[solid])
    # The key sits on the raster's full grid, the solution on the box its tiles fill.
    assert score_placement(result.placement, sub).shifted_direct == 1.0


def test_a_side_of_valid_pixels_never_pairs_with_a_side_of_nodata():
    """Footprints: against a side that is all valid, an all-nodata side costs
    far more than a matching one (it may only face empty cells, the border or
    other nodata). Tiles from scikit-image's ``coffee`` (CC0), the right half
    of one tile set to nodata."""
    img = skimage_image("coffee")[:, 60:60 + 28 * 3, 150:150 + 28 * 3].astype(np.float32)
    tiles = [img[:, 28 * r:28 * (r + 1), 28 * c:28 * (c + 1)].copy() for r in range(3) for c in range(3)]
    valid = [np.ones(t.shape[1:], bool) for t in tiles]
    valid[4][:, 14:] = False  # the centre tile's right half (and so its right side) is nodata
    edges = EdgeStrips.from_pixels(tiles, valid=valid)
    table = score_seams(edges, orientations=(0,), measure="mgc")
    # centre tile's right side (slot 4*4+1) against the left sides of tile 5 (its true neighbour) and 3
    void_vs_valid = table.cost(4 * 4 + 1, 4 * 5 + 3)
    valid_vs_valid = table.cost(4 * 3 + 1, 4 * 4 + 3)
    assert table.coverage[4 * 4 + 1] == 0 and table.coverage[4 * 5 + 3] == 1
    assert void_vs_valid > 10 * valid_vs_valid


def _coffee_with_nodata():
    """Nine 28 px tiles of scikit-image's ``coffee`` (CC0), 3 x 3; the centre
    tile's right half and the whole of the top-right tile are nodata (as
    water marked as nodata would be)."""
    img = skimage_image("coffee")[:, 60:60 + 28 * 3, 150:150 + 28 * 3].astype(np.float32)
    tiles = [img[:, 28 * r:28 * (r + 1), 28 * c:28 * (c + 1)].copy() for r in range(3) for c in range(3)]
    valid = [np.ones(t.shape[1:], bool) for t in tiles]
    valid[4][:, 14:] = False
    valid[2][:, :] = False
    valid[2][20:, 22:] = True  # a corner of land away from its left side, so the tile is not blank
    return EdgeStrips.from_pixels(tiles, valid=valid)


def test_two_sides_without_a_shared_valid_row_cost_what_a_seam_earns():
    """No shared valid row is no evidence either way: such a pair costs the
    search's reward for a seam, so two nodata sides (water marked as nodata
    on both) neither attract nor repel against an empty cell. The centre
    tile's nodata right side against the top-right tile's nodata left side."""
    table = score_seams(_coffee_with_nodata(), orientations=(0,), measure="mgc")
    problem = Problem(table, (0,))
    cost = table.cost(4 * 4 + 1, 4 * 2 + 3)
    assert table.coverage[4 * 4 + 1] == 0 and table.coverage[4 * 2 + 3] == 0
    assert float(cost) == pytest.approx(problem.bonus, rel=1e-6)
    # A seam of shared valid rows keeps its measured cost: the true
    # neighbours 3 | 4 cost far less than what a seam earns.
    assert table.cost(4 * 3 + 1, 4 * 4 + 3) < 0.5 * problem.bonus


def test_valid_data_facing_an_empty_cell_costs_its_footprint_term():
    """With nodata, an empty cell is a skipped all-nodata tile: a side of
    valid data facing one costs what it would against an all-nodata side; a
    nodata side faces it for free, and so does any side at the grid's
    border. Without nodata an empty cell is a missing tile and costs nothing."""
    from stitch.seams import FOOTPRINT_SLACK

    table = score_seams(_coffee_with_nodata(), orientations=(0,), measure="mgc")
    problem = Problem(table, (0,))
    holes = table.hole_costs
    assert holes[4 * 4 + 1] == 0.0  # the centre tile's right side is nodata
    assert holes[4 * 4 + 3] > 0.0
    # Against an all-nodata side the left side's footprint term covers 26 of
    # its 28 rows (two rows of slack), the top side's 12 (14 valid pixels):
    assert FOOTPRINT_SLACK == 2
    assert holes[4 * 4 + 0] / holes[4 * 4 + 3] == pytest.approx(12 / 26)
    valid_left = Grid(np.array([[-1, 4]]), np.zeros((1, 2), np.int64))
    nodata_right = Grid(np.array([[4, -1]]), np.zeros((1, 2), np.int64))
    alone = Grid(np.array([[4]]), np.zeros((1, 1), np.int64))
    assert problem.fitness(valid_left) == pytest.approx(float(holes[4 * 4 + 3]))
    assert problem.fitness(nodata_right) == 0.0 and problem.fitness(alone) == 0.0
    # The swap pass prices it too: tile 4 beside the hole is cheaper with
    # its nodata side to the hole than with its valid side.
    assert _polish._cell_cost(nodata_right.tiles, nodata_right.orientations, 0, 0, problem.lookup) == 0.0
    assert _polish._cell_cost(valid_left.tiles, valid_left.orientations, 0, 1, problem.lookup) > 0.0
    full = score_seams(EdgeStrips.from_pixels([np.ones((1, 28, 28), np.float32) * i for i in range(4)]),
                       orientations=(0,), measure="mgc")
    assert full.hole_costs is None
