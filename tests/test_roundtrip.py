"""Cut -> shuffle, strip -> solve -> score on open data shipped with packages.

Sources: scikit-image's bundled CC0 images ``camera`` and ``coffee`` (see the
``skimage.data`` docstrings) and matplotlib's bundled DEM
``jacksboro_fault_dem.npz``. The metrics are those of Cho, Avidan & Freeman
(CVPR 2010), implemented in :mod:`stitch.puzzles`.
"""

import numpy as np
import pytest
import rasterio
from rasterio.transform import from_origin

from conftest import jacksboro_dem, skimage_image, write_raster
from stitch.layout import read_placement_csv
from stitch.pipeline import SolveOptions, solve
from stitch.puzzles import cut_raster, score_placement

TILE = 28


def _roundtrip(tmp_path, array, *, rotate=0, seed=1, nodata=None):
    src = write_raster(tmp_path / "src.tif", array, transform=from_origin(1000.0, 2000.0, 1.0, 1.0),
                       crs="EPSG:32615", nodata=nodata)
    cut = cut_raster(src, tmp_path / "tiles", TILE, shuffle=True, strip_georef=True, rotations=rotate, seed=seed,
                     key_path=tmp_path / "key.csv")
    result = solve(tmp_path / "tiles", tmp_path / "out.tif", options=SolveOptions(rotations=rotate, seed=seed))
    solution = read_placement_csv(result.outputs["report_placement"])
    return score_placement(solution, cut.key), result


@pytest.mark.filterwarnings("ignore::stitch.errors.NotGeoreferencedWarning")
@pytest.mark.parametrize(
    "array",
    [
        pytest.param(skimage_image("camera")[:, :280, :280], id="skimage camera (CC0)"),
        pytest.param(skimage_image("coffee")[:, 60:340, 150:430], id="skimage coffee (CC0)"),
        pytest.param(jacksboro_dem()[:280, :280], id="matplotlib jacksboro DEM int16"),
    ],
)
def test_upright_10x10_is_perfect(tmp_path, array):
    scores, result = _roundtrip(tmp_path, array)
    assert (scores.direct, scores.neighbor, scores.perfect) == (1.0, 1.0, True)
    assert result.placement.shape == (10, 10)  # inferred, not given


@pytest.mark.filterwarnings("ignore::stitch.errors.NotGeoreferencedWarning")
def test_quarter_turns_small_set_is_perfect(tmp_path):
    scores, _ = _roundtrip(tmp_path, skimage_image("coffee")[:, 60:256, 150:346], rotate=90, seed=2)
    assert scores.perfect, scores


def test_mosaic_pixels_equal_source_with_anchor(tmp_path, utm_raster, tiles_dir):
    """With one intact tile, pixels, transform and CRS of the source come back."""
    result = solve(tiles_dir, tmp_path / "out.tif")
    with rasterio.open(utm_raster) as a, rasterio.open(result.outputs["mosaic"]) as b:
        assert b.crs == a.crs
        np.testing.assert_array_equal(b.read(), a.read())


@pytest.mark.filterwarnings("ignore::stitch.errors.NotGeoreferencedWarning")
def test_same_seed_same_outputs(tmp_path, tiles_dir):
    runs = []
    for k in range(2):
        r = solve(tiles_dir, tmp_path / f"out{k}.tif", options=SolveOptions(seed=7))
        with rasterio.open(r.outputs["mosaic"]) as src:
            runs.append((r.outputs["report_placement"].read_bytes(), src.read()))
    assert runs[0][0] == runs[1][0]
    np.testing.assert_array_equal(runs[0][1], runs[1][1])


@pytest.mark.filterwarnings("ignore::stitch.errors.NotGeoreferencedWarning")
def test_non_square_tiles_with_half_turns(tmp_path):
    """Non-square tiles may only need half turns (a quarter turn would change their shape)."""
    src = write_raster(tmp_path / "src.tif", skimage_image("astronaut")[:, :160, :252])
    cut = cut_raster(src, tmp_path / "tiles", (36, 20), shuffle=True, rotations=180, seed=4, key_path=tmp_path / "k.csv")
    result = solve(tmp_path / "tiles", tmp_path / "out.tif", options=SolveOptions(rotations=180, seed=4))
    scores = score_placement(read_placement_csv(result.outputs["report_placement"]), cut.key)
    assert scores.perfect, scores


@pytest.mark.filterwarnings("ignore::stitch.errors.NotGeoreferencedWarning")
def test_mirrored_and_turned_tiles(tmp_path):
    src = write_raster(tmp_path / "src.tif", skimage_image("coffee")[:, 100:268, 200:368])
    cut = cut_raster(src, tmp_path / "tiles", 28, shuffle=True, rotations=90, mirrored=True, seed=6,
                     key_path=tmp_path / "k.csv")
    assert cut.key.mirrored.any() and cut.key.rotations.any()
    opts = SolveOptions(rotations=90, mirrored=True, seed=6)
    result = solve(tmp_path / "tiles", tmp_path / "out.tif", options=opts)
    scores = score_placement(read_placement_csv(result.outputs["report_placement"]), cut.key)
    assert scores.perfect, scores


@pytest.mark.parametrize("mirrored", [False, True], ids=["turned", "turned and mirrored"])
def test_tiles_turned_by_hand_come_back_as_the_source(tmp_path, mirrored):
    """Tiles stored turned (and mirrored) with numpy's own rot90 and fliplr,
    not stitch's code: the file is the upright tile turned anticlockwise k
    times (np.rot90), then mirrored (np.fliplr), so the placement contract
    (mirror, then turn clockwise k times) brings it back. One tile keeps its
    georeferencing upright, which fixes the frame. The mosaic must equal the
    source pixel for pixel, and placement.csv must name each tile's k and
    mirror. Source: scikit-image's coffee (CC0), 4 x 5 tiles of 28 px."""
    img = skimage_image("coffee")[:, 60:172, 150:290]
    transform = from_origin(431000.0, 5800000.0, 0.5, 0.5)
    rng = np.random.default_rng(7)
    folder = tmp_path / "tiles"
    folder.mkdir()
    truth = {}
    cells = [(r, c) for r in range(4) for c in range(5)]
    for n, k in enumerate(rng.permutation(len(cells))):
        r, c = cells[k]
        tile = img[:, r * TILE:(r + 1) * TILE, c * TILE:(c + 1) * TILE]
        name = f"frame_{n:02d}.tif"
        if (r, c) == (1, 2):  # the anchor, upright with its own transform
            write_raster(folder / name, tile, transform=transform * transform.translation(c * TILE, r * TILE),
                         crs="EPSG:32630")
            truth[name] = (r, c, 0, False)
            continue
        turns, flip = int(rng.integers(4)), bool(mirrored and rng.random() < 0.5)
        stored = np.rot90(tile, turns, axes=(1, 2))
        if flip:
            stored = stored[:, :, ::-1]  # np.fliplr on each band
        write_raster(folder / name, np.ascontiguousarray(stored))
        truth[name] = (r, c, turns, flip)
    result = solve(folder, tmp_path / "m.tif", options=SolveOptions(rotations=90, mirrored=mirrored, seed=3))
    with rasterio.open(result.outputs["mosaic"]) as out:
        np.testing.assert_array_equal(out.read(), img)
        assert out.transform == transform
    got = read_placement_csv(result.outputs["report_placement"])
    for i, name in enumerate(got.names):
        assert (got.rows[i], got.cols[i], got.rotations[i], bool(got.mirrored[i])) == truth[name], name


def test_the_scorer_on_hand_made_turned_and_mirrored_placements():
    """The scorer checked by hand on a 2 x 3 key. Turning the whole solution
    a quarter clockwise moves cell (r, c) of a 2-row grid to (c, 1 - r) and
    adds one quarter turn to every tile; mirroring it left-right moves (r, c)
    to (r, 2 - c) and flips every tile's mirror bit, with its rotation
    negated. Either is the same mosaic turned, so every score is perfect;
    one tile turned on its own costs that tile and its two or three seams."""
    from stitch.layout import Placement

    names = tuple("abcdef")
    rows, cols = np.array([0, 0, 0, 1, 1, 1]), np.array([0, 1, 2, 0, 1, 2])
    rot = np.array([0, 1, 2, 3, 0, 1])
    mir = np.zeros(6, bool)
    key = Placement(names, (2, 3), rows, cols, rot, mir)
    quarter = Placement(names, (3, 2), cols, 1 - rows, (rot + 1) % 4, mir)
    s = score_placement(quarter, key)
    assert (s.direct, s.neighbor, s.perfect) == (1.0, 1.0, True)
    mirrored = Placement(names, (2, 3), rows, 2 - cols, (-rot) % 4, ~mir)
    s = score_placement(mirrored, key)
    assert (s.direct, s.neighbor, s.perfect) == (1.0, 1.0, True)
    one_off = Placement(names, (2, 3), rows, cols, np.where(np.arange(6) == 4, 2, rot), mir)
    s = score_placement(one_off, key)
    # Tile e (row 1, col 1) has three neighbours (b, d, f) among the 7 seams.
    assert s.direct == pytest.approx(5 / 6) and s.neighbor == pytest.approx(4 / 7) and not s.perfect


def test_tile_sizes_as_cut_takes_them():
    from stitch.errors import OptionError
    from stitch.puzzles import parse_tile_size

    assert parse_tile_size("64") == (64, 64)
    assert parse_tile_size("64x48") == (64, 48) == parse_tile_size("64X48")  # width x height
    for bad in ("x", "abc", "64x", "64x48x2", "1", "64x1"):
        with pytest.raises(OptionError, match="--tile-size must be PX or WIDTHxHEIGHT"):
            parse_tile_size(bad)


def test_flight_block_mask_by_hand():
    """A 100 x 100 raster, block not turned, half cover: the rectangle's
    half sides are 0.5 * 100 * sqrt(0.5) * 1.25 = 44.19 px across and
    0.5 * 100 * sqrt(0.5) * 0.8 = 28.28 px down, about the centre 49.5:
    columns 6 to 93 (88) and rows 22 to 77 (56), 4,928 pixels. A quarter
    turn transposes it; any turn keeps it symmetric about the centre."""
    from stitch.puzzles import flight_block_mask

    m = flight_block_mask((100, 100), angle=0, cover=0.5)
    rows, cols = np.flatnonzero(m.any(axis=1)), np.flatnonzero(m.any(axis=0))
    assert (rows[0], rows[-1], cols[0], cols[-1]) == (22, 77, 6, 93)
    assert m.sum() == 88 * 56
    np.testing.assert_array_equal(flight_block_mask((100, 100), angle=90, cover=0.5), m.T)
    t = flight_block_mask((120, 90), angle=25, cover=0.4)
    np.testing.assert_array_equal(t, t[::-1, ::-1])
    assert abs(t.mean() - 0.4) < 0.03


def test_cut_writes_tiles_as_documented_and_never_replaces_without_overwrite(tmp_path):
    """GeoTIFF tiles are DEFLATE-compressed with horizontal differencing
    (TIFF Predictor 2; 3, floating point, for float tiles), read with
    tifffile independently of GDAL; GeoTIFF anchors keep their tags and get
    no world file; PNG anchors get a world file and .prj and no GDAL
    .aux.xml; a second cut into the same folder is refused without
    overwrite and replaces the tiles with it. (Compression 8 is Adobe
    DEFLATE in the TIFF 6 tag registry, from memory.)"""
    import tifffile

    from stitch.errors import OutputExistsError

    utm = from_origin(431000.0, 5800000.0, 0.5, 0.5)
    src = write_raster(tmp_path / "src.tif", skimage_image("coffee")[:, :56, :56], transform=utm, crs="EPSG:32630")
    cut = cut_raster(src, tmp_path / "t", 28, strip_georef=True, keep_georef=1, seed=1)
    with tifffile.TiffFile(tmp_path / "t" / "r000_c000.tif") as tif:
        tags = tif.pages[0].tags
        assert tags["Compression"].value == 8 and tags["Predictor"].value == 2
    assert not list((tmp_path / "t").glob("*.tfw"))
    with rasterio.open(tmp_path / "t" / cut.georeferenced[0]) as anchor:
        assert anchor.crs.to_epsg() == 32630
    flt = write_raster(tmp_path / "f.tif", jacksboro_dem()[None, :56, :56].astype("float32"))
    cut_raster(flt, tmp_path / "f", 28, seed=1)
    with tifffile.TiffFile(tmp_path / "f" / "r000_c000.tif") as tif:
        assert tif.pages[0].tags["Predictor"].value == 3
    png = cut_raster(src, tmp_path / "p", 28, strip_georef=True, keep_georef=1, fmt="png", seed=1)
    anchor = tmp_path / "p" / png.georeferenced[0]
    assert anchor.with_suffix(".pgw").is_file() and anchor.with_suffix(".prj").is_file()
    assert not list((tmp_path / "p").glob("*.aux.xml"))
    with pytest.raises(OutputExistsError):
        cut_raster(src, tmp_path / "p", 28, strip_georef=True, keep_georef=1, fmt="png", seed=1)
    again = cut_raster(src, tmp_path / "p", 28, strip_georef=True, keep_georef=1, fmt="png", seed=1, overwrite=True)
    assert again.georeferenced == png.georeferenced
