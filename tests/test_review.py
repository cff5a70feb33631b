"""Review kit: footprints, preview, convergence plot, summary, HTML page, preflight.

Outside references: RFC 7946 (GeoJSON: WGS 84 longitude/latitude, closed
linear rings, counter-clockwise exterior rings); PROJ through rasterio for
the coordinate transform; Debian's Chromium renders the page.
"""

import json
import os
import shutil
import subprocess

import numpy as np
import pytest
from PIL import Image
from shapely.geometry import LinearRing, shape
from shapely.ops import unary_union
from typer.testing import CliRunner

from conftest import jacksboro_dem, skimage_image, write_raster
from stitch.cli import app
from stitch.pipeline import solve
from stitch.preflight import inspect_tiles
from stitch.review import tiles_geojson

runner = CliRunner()


@pytest.fixture
def solved(tmp_path, tiles_dir):
    return solve(tiles_dir, tmp_path / "m.tif")


def test_geojson_is_rfc7946_and_tiles_the_mosaic(solved):
    doc = json.loads(solved.outputs["report_footprints"].read_text())
    assert doc["type"] == "FeatureCollection" and "crs" not in doc
    p = solved.placement
    assert len(doc["features"]) == int(p.placed.sum())
    for feat in doc["features"]:
        ring = feat["geometry"]["coordinates"][0]
        assert ring[0] == ring[-1]  # closed
        assert LinearRing(ring).is_ccw  # RFC 7946 section 3.1.6
        lon, lat = np.array(ring).T
        assert (np.abs(lon) <= 180).all() and (np.abs(lat) <= 90).all()
        props = feat["properties"]
        assert set(props) >= {"tile", "row", "col", "rotation", "mirrored", "confidence", "seam_top", "seam_right",
                              "seam_bottom", "seam_left", "pinned", "blank", "low_confidence"}
    # In the mosaic's own CRS the footprints cover its bounds exactly, without overlap.
    native = json.loads(tiles_geojson(solved, native=True))
    assert native["crs"]["properties"]["name"] == "EPSG:32630"
    polys = [shape(f["geometry"]) for f in native["features"]]
    union = unary_union(polys)
    t = solved.georeference.transform
    area = abs(t.a * t.e - t.b * t.d) * p.shape[0] * solved.tileset.height * p.shape[1] * solved.tileset.width
    assert union.area == pytest.approx(area, rel=1e-9)
    assert sum(q.area for q in polys) == pytest.approx(union.area, rel=1e-9)


def test_geojson_corners_are_proj_s_lon_lat_of_the_tile_corners(solved):
    """Every footprint's corners, computed independently: the mosaic's
    transform as GDAL reads it from the GeoTIFF, the tile's cell from the
    feature's own row and column, then PROJ (rasterio.warp.transform) from
    UTM zone 30N to WGS 84. Near 4 W 52 N a longitude/latitude swap is
    plain to see."""
    import rasterio
    from rasterio.warp import transform as proj

    doc = json.loads(solved.outputs["report_footprints"].read_text())
    with rasterio.open(solved.outputs["mosaic"]) as src:
        t, crs = src.transform, src.crs
    w, h = solved.tileset.width, solved.tileset.height
    for feat in doc["features"]:
        r, c = feat["properties"]["row"], feat["properties"]["col"]
        px = [(c * w, r * h), ((c + 1) * w, r * h), ((c + 1) * w, (r + 1) * h), (c * w, (r + 1) * h)]
        xs, ys = zip(*(t * q for q in px))
        lon, lat = proj(crs, "EPSG:4326", xs, ys)
        expected = np.array(sorted(zip(np.round(lon, 9), np.round(lat, 9))))
        ring = feat["geometry"]["coordinates"][0][:-1]
        got = np.array(sorted((round(x, 9), round(y, 9)) for x, y in ring))
        np.testing.assert_allclose(got, expected, rtol=0, atol=1e-9)
        assert all(-5 < x < -3 and 51 < y < 53 for x, y in ring)  # longitude first (RFC 7946, section 3.1.1)


def test_pngs_have_the_expected_size_and_content(solved):
    """The preview shows the mosaic itself (8-bit RGB as is): away from the
    grid lines and marks drawn over it, its pixels are the GeoTIFF's, as
    GDAL reads them; a legend strip lies below."""
    import rasterio

    prev = np.asarray(Image.open(solved.outputs["report_preview"]).convert("RGB"))
    with rasterio.open(solved.outputs["mosaic"]) as src:
        mosaic = np.moveaxis(src.read(), 0, -1)
    h, w = mosaic.shape[:2]
    assert prev.shape[1] == w and prev.shape[0] > h  # full size (under 2000 px), legend below
    p, ts = solved.placement, solved.tileset
    flagged = set(solved.flagged)
    checked = 0
    for i in np.flatnonzero(p.placed):
        if p.names[i] in flagged or i in solved.pinned:
            continue  # outlined or dotted
        r0, c0 = p.rows[i] * ts.height, p.cols[i] * ts.width
        inner = (slice(r0 + 4, r0 + ts.height - 4), slice(c0 + 4, c0 + ts.width - 4))
        np.testing.assert_array_equal(prev[inner], mosaic[inner])
        checked += 1
    assert checked >= 0.8 * p.placed.sum()
    conv = np.asarray(Image.open(solved.outputs["report_convergence"]))
    assert conv.shape[:2] == (360, 720) and conv.std() > 10


def test_summary_best_cost_never_rises(solved):
    summary = json.loads(solved.outputs["report_summary"].read_text())
    best = summary["search"]["best_cost"]
    assert len(best) == summary["search"]["generations"] > 0
    assert all(b2 <= b1 + 1e-6 * abs(b1) for b1, b2 in zip(best, best[1:]))
    assert summary["caution"].startswith("A reconstructed mosaic is not survey-grade")
    assert summary["options"]["seed"] == 0 and summary["versions"]["gdal"]
    assert summary["options"]["measure"] == "auto" and summary["seam_measure"] in ("mgc", "prediction")
    assert summary["seam_measure"] == solved.measure


def _chromium():
    return shutil.which("chromium") or shutil.which("chromium-browser")


def test_index_html_renders_in_headless_chromium(tmp_path, solved):
    browser = _chromium()
    if browser is None:
        if os.environ.get("CI"):
            pytest.fail("chromium is missing; .ci/run installs Debian's chromium")
        pytest.skip("chromium is not installed")
    page = solved.outputs["report_page"]
    text = page.read_text()
    assert "http://" not in text and "https://" not in text  # self-contained
    dom = subprocess.run(
        [browser, "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-background-networking",
         "--disable-component-update", "--disable-sync", f"--user-data-dir={tmp_path / 'profile'}",
         "--dump-dom", page.as_uri()],
        capture_output=True, text=True, timeout=120, check=True,
    ).stdout
    assert '<table id="flagged">' in dom
    body = dom.split('<table id="flagged">')[1].split("</table>")[0]
    flagged = solved.flagged
    assert body.count("<tr>") == 1 + max(1, len(flagged))
    for name in flagged:
        assert name in body
    assert "not survey-grade" in dom


def _folder(tmp_path, arrays):
    d = tmp_path / "f"
    d.mkdir(parents=True)
    for k, a in enumerate(arrays):
        write_raster(d / f"t{k:02d}.tif", a)
    return d


def test_inspect_good_folder(tmp_path, tiles_dir):
    found = inspect_tiles(tiles_dir)
    assert found.ok and found.tiles == 100 and "10x10" in found.grid_shapes
    assert found.georeferenced and found.anchors_agree is True
    r = runner.invoke(app, ["inspect", str(tiles_dir), "--json"])
    assert r.exit_code == 0 and json.loads(r.output)["ok"] is True


def test_inspect_mixed_sizes_fails(tmp_path):
    img = skimage_image("camera")
    d = _folder(tmp_path, [img[:, :32, :32], img[:, 32:64, :32], img[:, :16, :16]])
    found = inspect_tiles(d)
    assert not found.ok and "differ from the others" in found.problems[0]
    r = runner.invoke(app, ["inspect", str(d)])
    assert r.exit_code == 1 and "solve would fail" in r.output


def test_inspect_blank_heavy_and_duplicates(tmp_path):
    dem = jacksboro_dem()[None, :32, :32]
    arrays = [np.zeros_like(dem)] * 5 + [dem, dem, dem[:, ::-1, :].copy()]
    found = inspect_tiles(_folder(tmp_path, arrays))
    assert found.ok
    assert len(found.blank) == 5 and found.duplicates == (("t05.tif", "t06.tif"),)
    all_blank = inspect_tiles(_folder(tmp_path / "b", [np.zeros_like(dem)] * 4))
    assert not all_blank.ok and "blank" in all_blank.problems[0]


def test_tile_and_side_confidence_share_one_scale(tmp_path, tiles_dir):
    """A tile's confidence is the mean of the seam values on its sides, as
    written to tiles.geojson (seam_top ... seam_left)."""
    from stitch.pipeline import SolveOptions, solve

    result = solve(tiles_dir, tmp_path / "m.tif", options=SolveOptions(seed=5))
    p = result.placement
    for i in np.flatnonzero(p.placed):
        assert p.confidence[i] == pytest.approx(np.nanmean(result.side_scores[i]), abs=1e-9)
    features = json.loads(result.outputs["report_footprints"].read_text())["features"]
    props = features[0]["properties"]
    sides = [props[k] for k in ("seam_top", "seam_right", "seam_bottom", "seam_left") if props[k] is not None]
    assert props["confidence"] == pytest.approx(np.mean(sides), abs=1e-3)


@pytest.mark.filterwarnings("ignore::stitch.errors.NotGeoreferencedWarning")
def test_flagged_tiles_of_uniform_sky_are_told_apart_as_interchangeable(tmp_path):
    """48 tiles of 32 px from the top of scikit-image's ``camera`` (CC0): the
    few tiles flagged lie in the even sky, where any of them would do; the
    review kit labels them interchangeable (placement.csv, tiles.geojson,
    summary.json), not doubtful."""
    import csv

    from stitch.pipeline import SolveOptions, solve
    from stitch.puzzles import cut_raster, score_placement

    src = write_raster(tmp_path / "src.tif", skimage_image("camera")[:, 0:192, 0:256])
    cut = cut_raster(src, tmp_path / "t", 32, shuffle=True, seed=3, key_path=tmp_path / "k.csv")
    result = solve(tmp_path / "t", tmp_path / "m.tif", options=SolveOptions(seed=0))
    assert score_placement(result.placement, cut.key).perfect
    assert result.flagged
    with open(result.outputs["report_placement"], newline="") as f:
        rows = {r["tile"]: r for r in csv.DictReader(f)}
    assert {rows[name]["review"] for name in result.flagged} == {"interchangeable"}
    assert all(r["review"] == "" for name, r in rows.items() if name not in result.flagged)
    features = json.loads(result.outputs["report_footprints"].read_text())["features"]
    labels = {f["properties"]["tile"]: f["properties"]["review"] for f in features}
    assert {labels[name] for name in result.flagged} == {"interchangeable"}
    summary = json.loads(result.outputs["report_summary"].read_text())
    assert sorted(summary["interchangeable_tiles"]) == sorted(result.flagged)


def test_inspect_says_what_a_user_needs_in_words(tmp_path, tiles_dir, monkeypatch):
    """No "None" for a missing nodata; anchors with their CRS and pixel size
    (the fixture's EPSG:32630 raster of 0.5 m pixels); the one-off compile
    time when the search loops are not cached yet."""
    import stitch.preflight

    r = runner.invoke(app, ["inspect", str(tiles_dir)])
    assert r.exit_code == 0, r.output
    assert "uint8, no nodata declared" in r.output and "None" not in r.output
    assert "georeferenced tiles: 1 (they agree; EPSG:32630; pixel 0.5 metres)" in r.output
    monkeypatch.setattr(stitch.preflight, "kernels_compiled", lambda: True)
    assert "compile" not in runner.invoke(app, ["inspect", str(tiles_dir)]).output
    monkeypatch.setattr(stitch.preflight, "kernels_compiled", lambda: False)
    r = runner.invoke(app, ["inspect", str(tiles_dir)])
    assert "plus ~15 s once, to compile the search loops" in r.output


def test_the_page_names_the_measure_that_scored_the_seams(solved):
    """With the default --seam auto, the page says which measure auto chose,
    never the bare word "auto"."""
    text = solved.outputs["report_page"].read_text()
    assert solved.options.measure == "auto" and solved.measure in ("mgc", "prediction")
    assert f"{solved.measure} (chosen by auto)" in text
    # and where the mosaic lies: the fixture's own extent (280 px of 0.5 m from 431000, 5800000)
    assert "west 431000, south 5799860, east 431140, north 5800000 (metres); pixel 0.5 x 0.5; 280 x 280 px" in text
