"""Georeferencing of the mosaic, checked against GDAL (through rasterio) and affine.

Outside references:
* The world file's six lines A, D, B, E, C, F, with C, F the map coordinates
  of the *centre* of the upper-left pixel (the corner plus half a pixel):
  common practice, no source (no standard defines the world file); checked
  against GDAL's own reading of PNG and JPEG sidecars and affine's
  ``loadsw``/``dumpsw``, the documented conventions of both libraries.
* ``rasterio.transform.from_bounds`` / ``from_origin`` (rasterio docs).
* OGC GeoTIFF 1.1 (OGC 19-008r4) for the GeoKeys; PixelIsArea as the raster
  type a mosaic of area pixels carries is common practice, no source.
"""

import numpy as np
import pytest
import rasterio
from affine import Affine
from rasterio.transform import from_bounds as rio_from_bounds
from rasterio.transform import from_origin as rio_from_origin

from conftest import skimage_image, write_raster
from stitch.errors import GeoreferenceError, NotGeoreferencedWarning, OptionError, OutputExistsError
from stitch.georef import GeorefSpec, read_world_file, world_file_path, world_file_text
from stitch.pipeline import SolveOptions, solve


def _pixels_apart(t1, t2, width, height):
    """Largest distance, in pixels of t1, between where t1 and t2 put the raster's corners."""
    worst = 0.0
    for c in [(0, 0), (width, 0), (0, height), (width, height)]:
        x, y = t2 @ c
        back = np.array(~t1 @ (x, y)) - np.array(c)
        worst = max(worst, float(np.hypot(*back)))
    return worst


def test_anchor_tile_gives_source_transform(tmp_path, utm_raster, tiles_dir):
    result = solve(tiles_dir, tmp_path / "out.tif")
    with rasterio.open(utm_raster) as src, rasterio.open(result.outputs["mosaic"]) as out:
        assert out.crs == src.crs
        assert _pixels_apart(src.transform, out.transform, src.width, src.height) < 1e-6
    assert result.georeference.source.startswith("anchor tile")


def test_bounds_give_rasterio_from_bounds(tmp_path, tiles_dir):
    bounds = (500000.0, 4100000.0, 500140.0, 4100140.0)
    opts = SolveOptions(georef=GeorefSpec(bounds=bounds, crs="EPSG:32633"))
    result = solve(tiles_dir, tmp_path / "out.tif", options=opts)
    with rasterio.open(result.outputs["mosaic"]) as out:
        assert out.transform == rio_from_bounds(*bounds, out.width, out.height)
        assert out.crs.to_epsg() == 32633


def test_origin_and_pixel_size_give_rasterio_from_origin(tmp_path, tiles_dir):
    opts = SolveOptions(georef=GeorefSpec(origin=(10.5, 45.25), pixel_size=(1e-5, 2e-5), crs="EPSG:4326"))
    result = solve(tiles_dir, tmp_path / "out.tif", options=opts)
    with rasterio.open(result.outputs["mosaic"]) as out:
        assert out.transform == rio_from_origin(10.5, 45.25, 1e-5, 2e-5)
        assert out.crs.to_epsg() == 4326


def test_world_file_lines_follow_gdal_convention():
    # A, D, B, E, C, F with C, F at the UL pixel centre (common practice, no source).
    t = Affine(0.5, 0.0, 431000.0, 0.0, -0.5, 5800000.0)
    lines = [float(v) for v in world_file_text(t).split()]
    assert lines == [0.5, 0.0, 0.0, -0.5, 431000.25, 5799999.75]
    assert world_file_path("out.tif").name == "out.tfw"
    assert world_file_path("a/b.png").name == "b.pgw"
    assert world_file_path("c.jpg").name == "c.jgw"


@pytest.mark.parametrize(
    "transform",
    [
        pytest.param(Affine(0.5, 0.0, 431000.0, 0.0, -0.5, 5800000.0), id="north-up metres"),
        pytest.param(Affine(1e-5, 0.0, -122.4, 0.0, -1e-5, 37.8), id="north-up degrees"),
        pytest.param(Affine(0.3, 0.1, 1000.0, 0.1, -0.3, 2000.0), id="rotated"),
        # b != d and |a| != |e|: a writer that swapped lines B and D, or A and
        # E, would be caught here (with b == d it would not).
        pytest.param(Affine(0.3, 0.12, 1000.0, -0.05, -0.6, 2000.0), id="asymmetric rotation, non-square pixels"),
    ],
)
@pytest.mark.parametrize("driver, ext", [("PNG", "png"), ("JPEG", "jpg")])
def test_gdal_reads_our_world_file(tmp_path, transform, driver, ext):
    """GDAL's PNG and JPEG drivers read the sidecar (.pgw, .jgw) themselves
    (GDAL's world-file reading, through rasterio): they must return our
    transform. stitch's own reader is checked separately below."""
    img = write_raster(tmp_path / f"t.{ext}", skimage_image("camera")[:, :32, :32], driver=driver)
    world_file_path(img).write_text(world_file_text(transform))
    with rasterio.open(img) as src:
        assert tuple(src.transform) == pytest.approx(tuple(transform), abs=1e-9)


def test_our_world_file_reader_agrees_with_gdal(tmp_path):
    transform = Affine(0.3, 0.12, 1000.0, -0.05, -0.6, 2000.0)
    png = write_raster(tmp_path / "t.png", skimage_image("camera")[:, :32, :32], driver="PNG")
    world_file_path(png).write_text(world_file_text(transform))
    with rasterio.open(png) as src:
        gdal = src.transform
    assert tuple(read_world_file(world_file_path(png))) == pytest.approx(tuple(gdal), abs=1e-9)


def test_the_mosaics_world_file_is_read_by_gdal_as_the_mosaics_transform(tmp_path, tiles_dir):
    """The .tfw a solve writes, beside a PNG copy of the mosaic, gives GDAL
    the GeoTIFF's own transform (read from its tags)."""
    from rasterio.shutil import copy

    result = solve(tiles_dir, tmp_path / "m.tif", options=SolveOptions(georef=GeorefSpec(
        origin=(431000.0, 5800000.0), pixel_size=(0.5, 0.25), crs="EPSG:32630")))
    copy(result.outputs["mosaic"], tmp_path / "copy.png", driver="PNG")
    (tmp_path / "copy.png.aux.xml").unlink(missing_ok=True)  # GDAL's own sidecar would win over the world file
    (tmp_path / "copy.pgw").write_bytes(result.outputs["world_file"].read_bytes())
    with rasterio.open(result.outputs["mosaic"]) as tif, rasterio.open(tmp_path / "copy.png") as png:
        assert tuple(png.transform) == pytest.approx(tuple(tif.transform), abs=1e-9)
        assert tif.transform.e == -0.25 and tif.transform.a == 0.5  # non-square pixels as given


def test_the_mosaics_prj_holds_its_crs(tmp_path, tiles_dir):
    """The .prj beside the world file holds the GeoTIFF's CRS as ESRI WKT1,
    the dialect desktop readers of world files expect (common practice, no
    source); GDAL (rasterio's CRS.from_wkt) reads it back as the same CRS."""
    from rasterio.crs import CRS

    result = solve(tiles_dir, tmp_path / "m.tif", options=SolveOptions(georef=GeorefSpec(
        origin=(431000.0, 5800000.0), pixel_size=(0.5, 0.5), crs="EPSG:32630")))
    prj = result.outputs["prj"]
    assert prj == tmp_path / "m.prj"
    text = prj.read_text()
    assert text.startswith('PROJCS["WGS_1984_UTM_Zone_30N"')  # the ESRI dialect's names
    with rasterio.open(result.outputs["mosaic"]) as tif:
        assert CRS.from_wkt(text) == tif.crs
        assert CRS.from_wkt(text).to_epsg() == 32630


def test_a_mosaic_in_pixel_space_gets_no_sidecars(tmp_path, utm_raster):
    """No map coordinates, no world file or .prj; an old pair of the same
    name is removed with --overwrite rather than left describing the new
    mosaic."""
    from stitch.puzzles import cut_raster

    tiles_dir = tmp_path / "tiles"
    cut_raster(utm_raster, tiles_dir, 56, shuffle=True, strip_georef=True, seed=5, key_path=tmp_path / "key.csv")
    out = tmp_path / "m.tif"
    solve(tiles_dir, out, options=SolveOptions(georef=GeorefSpec(
        origin=(431000.0, 5800000.0), pixel_size=(0.5, 0.5), crs="EPSG:32630")))
    assert (tmp_path / "m.tfw").is_file() and (tmp_path / "m.prj").is_file()
    with pytest.warns(NotGeoreferencedWarning):
        result = solve(tiles_dir, out, options=SolveOptions(), overwrite=True)
    assert sorted(k for k in result.outputs if not k.startswith("report")) == ["mosaic"]
    assert not (tmp_path / "m.tfw").exists() and not (tmp_path / "m.prj").exists()
    with rasterio.open(out) as tif:
        assert tif.crs is None and tif.transform.is_identity


def test_an_existing_prj_is_not_replaced_without_overwrite(tmp_path, tiles_dir):
    (tmp_path / "m.prj").write_text("precious")
    with pytest.raises(OutputExistsError, match="m.prj"):
        solve(tiles_dir, tmp_path / "m.tif", options=SolveOptions(georef=GeorefSpec(
            origin=(431000.0, 5800000.0), pixel_size=(0.5, 0.5), crs="EPSG:32630")))
    assert (tmp_path / "m.prj").read_text() == "precious"


def test_world_file_reader_refuses_garbage(tmp_path):
    p = tmp_path / "bad.tfw"
    p.write_text("1\n0\n0\nfoo\n0\n0\n")
    with pytest.raises(GeoreferenceError, match="not a number"):
        read_world_file(p)
    p.write_text("1\n0\n0\n")
    with pytest.raises(GeoreferenceError, match="six"):
        read_world_file(p)
    p.write_text("0\n0\n0\n0\n1\n1\n")
    with pytest.raises(GeoreferenceError, match="zero pixel size"):
        read_world_file(p)


@pytest.mark.parametrize(
    "kwargs, message",
    [
        pytest.param(dict(bounds=(0, 0, 1, 1)), "need --crs", id="bounds without crs"),
        pytest.param(dict(bounds=(1, 0, 0, 1), crs="EPSG:4326"), "east > west", id="inverted bounds"),
        pytest.param(dict(origin=(0, 0), crs="EPSG:4326"), "needs --pixel-size", id="origin without size"),
        pytest.param(dict(origin=(0, 0), pixel_size=(0, 1), crs="EPSG:4326"), "positive", id="zero pixel"),
    ],
)
def test_bad_georef_options(kwargs, message):
    with pytest.raises(OptionError, match=message):
        GeorefSpec(**kwargs)


def test_anchors_that_disagree_are_refused(tmp_path, utm_raster):
    """Two anchors whose cells do not match their coordinates: exit with both names."""
    from stitch.puzzles import cut_raster

    out = tmp_path / "tiles"
    cut = cut_raster(utm_raster, out, 28, shuffle=True, strip_georef=True, keep_georef=2, seed=3)
    a = out / cut.georeferenced[0]
    with rasterio.open(a, "r+") as dst:
        dst.transform = dst.transform @ Affine.translation(7, 0)  # 7 px off
    with pytest.raises(GeoreferenceError, match=r"not on one tile grid: off by 7.00 px \(3.500 map units\)") as err:
        solve(out, tmp_path / "out.tif")
    assert all(name in str(err.value) for name in cut.georeferenced)


def test_anchors_in_different_crs_are_refused(tmp_path, utm_raster):
    from stitch.puzzles import cut_raster

    out = tmp_path / "tiles"
    cut = cut_raster(utm_raster, out, 28, shuffle=True, strip_georef=True, keep_georef=2, seed=3)
    with rasterio.open(out / cut.georeferenced[1], "r+") as dst:
        dst.crs = "EPSG:32631"
    with pytest.raises(GeoreferenceError, match="different CRSs"):
        solve(out, tmp_path / "out.tif")


def _geotiff_tags(path):
    """ModelPixelScale, ModelTiepoint and GeoKeys read with tifffile, independently of GDAL."""
    import tifffile

    with tifffile.TiffFile(path) as tif:
        tags = tif.pages[0].tags
        scale = tuple(tags[33550].value)  # ModelPixelScaleTag
        tie = tuple(tags[33922].value)  # ModelTiepointTag
        keydir = tags[34735].value  # GeoKeyDirectoryTag: header, then (key, location, count, value) entries
    keys = {keydir[i]: keydir[i + 3] for i in range(4, len(keydir), 4) if keydir[i + 1] == 0}
    return scale, tie, keys


def test_geotiff_tags_follow_ogc_geotiff(tmp_path, tiles_dir, utm_raster):
    """OGC GeoTIFF 1.1 (OGC 19-008r4): pixel scale and tiepoint match the transform,
    the tiepoint ties raster (0, 0) (the upper-left corner) to the map, and
    ProjectedCRSGeoKey (3072) is the EPSG code. The raster type is PixelIsArea
    (GTRasterTypeGeoKey 1025 = 1): the standard defines the key; that area
    pixels are the default for imagery is common practice, no source."""
    result = solve(tiles_dir, tmp_path / "m.tif")
    with rasterio.open(utm_raster) as src:
        t = src.transform
    scale, tie, keys = _geotiff_tags(result.outputs["mosaic"])
    assert scale[:2] == (t.a, -t.e)
    assert tie[:2] == (0.0, 0.0) and tie[3:5] == (t.c, t.f)
    assert keys[1025] == 1
    assert keys[3072] == 32630


def test_geographic_crs_uses_geodetic_geokey(tmp_path, tiles_dir):
    """OGC GeoTIFF 1.1: a geographic CRS goes in GeodeticCRSGeoKey (2048)."""
    opts = SolveOptions(georef=GeorefSpec(origin=(-105.6, 40.4), pixel_size=(2.5e-5, 2.5e-5), crs="EPSG:4326"))
    result = solve(tiles_dir, tmp_path / "m.tif", options=opts)
    scale, tie, keys = _geotiff_tags(result.outputs["mosaic"])
    assert keys[2048] == 4326 and keys[1025] == 1
    assert scale[:2] == (2.5e-5, 2.5e-5) and tie[3:5] == (-105.6, 40.4)


def test_cog_layout_reported_by_gdal(tmp_path):
    """GDAL reports LAYOUT=COG for files from its COG driver; tiled, with overviews."""
    from stitch.layout import Placement
    from stitch.mosaic import write_mosaic
    from stitch.puzzles import cut_raster
    from stitch.tiles import read_tileset

    src = write_raster(tmp_path / "retina.tif", skimage_image("retina")[:, :1024, :1024],
                       transform=from_origin_utm(), crs="EPSG:32630")
    cut = cut_raster(src, tmp_path / "t", 128, seed=1)
    ts = read_tileset(tmp_path / "t")
    key = cut.key
    order = [key.names.index(n) for n in ts.names]
    p = Placement(ts.names, key.shape, key.rows[order], key.cols[order], key.rotations[order], key.mirrored[order])
    from stitch.georef import Georeference

    g = Georeference(from_origin_utm(), rasterio.crs.CRS.from_epsg(32630), "test")
    out = write_mosaic(ts, p, g, tmp_path / "m.tif", cog=True)["mosaic"]
    with rasterio.open(out) as dst:
        assert dst.tags(ns="IMAGE_STRUCTURE")["LAYOUT"] == "COG"
        assert dst.profile["tiled"] and dst.overviews(1)
        assert dst.transform == from_origin_utm()
    assert not list(tmp_path.glob(".*partial*"))


def from_origin_utm():
    return rio_from_origin(431000.0, 5800000.0, 0.5, 0.5)


def test_us_survey_feet_crs_keeps_its_epsg_code(tmp_path, tiles_dir):
    """A projected CRS in US survey feet (EPSG:2263, NAD83 / New York Long Island (ftUS))."""
    bounds = (980000.0, 190000.0, 980280.0, 190280.0)
    opts = SolveOptions(georef=GeorefSpec(bounds=bounds, crs="EPSG:2263"))
    result = solve(tiles_dir, tmp_path / "m.tif", options=opts)
    _, _, keys = _geotiff_tags(result.outputs["mosaic"])
    assert keys[3072] == 2263
    with rasterio.open(result.outputs["mosaic"]) as out:
        assert out.transform == rio_from_bounds(*bounds, out.width, out.height)


def test_png_anchor_with_world_file_and_prj(tmp_path, utm_raster):
    """A PNG tile that kept a .pgw world file and a .prj: GDAL reads the sidecar, stitch the .prj."""
    from stitch.puzzles import cut_raster

    cut = cut_raster(utm_raster, tmp_path / "t", 28, shuffle=True, strip_georef=True, keep_georef=1, fmt="png",
                     seed=4, key_path=tmp_path / "k.csv")
    anchor = tmp_path / "t" / cut.georeferenced[0]
    assert anchor.with_suffix(".pgw").is_file() and anchor.with_suffix(".prj").is_file()
    result = solve(tmp_path / "t", tmp_path / "m.tif")
    assert "anchor tile" in result.georeference.source
    with rasterio.open(utm_raster) as src, rasterio.open(result.outputs["mosaic"]) as out:
        assert out.crs == src.crs
        assert out.transform.almost_equals(src.transform, precision=1e-9)


def test_corrupt_world_file_makes_the_tile_unreferenced(tmp_path, caplog):
    from stitch.puzzles import cut_raster
    from stitch.tiles import read_tileset

    src = write_raster(tmp_path / "s.png", skimage_image("coffee")[:, :56, :56], driver="PNG")
    cut_raster(src, tmp_path / "t", 28, fmt="png", seed=1)
    (tmp_path / "t" / "r000_c000.pgw").write_text("0\n0\n0\n0\n100\n200\n")  # zero pixel size
    with caplog.at_level("WARNING"):
        ts = read_tileset(tmp_path / "t")
    assert all(g is None for g in ts.georefs)
    assert "ignoring world file r000_c000.pgw" in caplog.text


def test_an_anchor_one_tile_off_is_named(tmp_path, utm_raster):
    """Two anchors whose tags agree on one tile grid, but one sits a whole
    tile east of where it belongs: its seams do not hold there, and the run
    names it instead of trusting it quietly."""
    from affine import Affine

    from stitch.pipeline import solve
    from stitch.puzzles import cut_raster

    cut = cut_raster(utm_raster, tmp_path / "t", 28, shuffle=True, strip_georef=True, keep_georef=2, seed=5,
                     key_path=tmp_path / "k.csv")
    moved = cut.georeferenced[0]
    with rasterio.open(tmp_path / "t" / moved, "r+") as dst:
        t = dst.transform
        dst.transform = Affine(t.a, t.b, t.c + 28 * t.a, t.d, t.e, t.f)  # one tile width east
    with pytest.warns(UserWarning, match=rf"anchor tile\(s\) {moved} sit where"):
        result = solve(tmp_path / "t", tmp_path / "m.tif")
    assert any(moved in note for note in result.warnings)


@pytest.mark.parametrize("spec, message", [
    pytest.param(dict(bounds=(-4.01, 52.36, -4.0, 52.37), crs="EPSG:32630"),
                 "--bounds -4.01 52.36 -4 52.37 look like longitude and latitude, but EPSG:32630 is in metres",
                 id="degrees with a UTM zone"),
    pytest.param(dict(origin=(-4.01, 52.37), pixel_size=(1e-5, 1e-5), crs="EPSG:32630"),
                 "--origin -4.01 52.37 look like longitude", id="degree origin with a UTM zone"),
    pytest.param(dict(bounds=(431000, 5800000, 431160, 5800128), crs="EPSG:4326"),
                 "are not longitude and latitude, but EPSG:4326 is in degrees", id="metres with WGS 84"),
    pytest.param(dict(bounds=(-2000, 0, 2000, 100), crs="EPSG:2263"), None, id="feet are not degrees"),
])
def test_coordinates_that_cannot_be_in_the_crs_units_are_refused(spec, message):
    """Units of the CRSs from the EPSG dataset through PROJ: EPSG:32630 (UTM
    30N) in metres, EPSG:4326 in degrees, EPSG:2263 (NAD83 / New York Long
    Island) in US survey feet."""
    if message is None:
        GeorefSpec(**spec)
        return
    with pytest.raises(OptionError, match=message.replace("(", r"\(")):
        GeorefSpec(**spec)


def test_crs_alone_is_refused_before_the_search(tmp_path, utm_raster):
    from stitch.puzzles import cut_raster

    cut_raster(utm_raster, tmp_path / "t", 56, shuffle=True, strip_georef=True, seed=5, key_path=tmp_path / "k.csv")
    with pytest.raises(OptionError, match="--crs EPSG:32630 alone does not put the mosaic on the map"):
        solve(tmp_path / "t", tmp_path / "m.tif", options=SolveOptions(georef=GeorefSpec(crs="EPSG:32630")))
    assert list(tmp_path.glob("m*")) == []


def test_crs_names_the_crs_of_world_files_without_prj(tmp_path, utm_raster):
    """A PNG anchor whose .prj was lost keeps its .pgw: --crs says what CRS
    it is in, and the mosaic gets both; a --crs that contradicts a tile's
    own CRS is refused."""
    from stitch.puzzles import cut_raster

    cut = cut_raster(utm_raster, tmp_path / "t", 28, shuffle=True, strip_georef=True, keep_georef=1, fmt="png",
                     seed=4, key_path=tmp_path / "k.csv")
    (tmp_path / "t" / cut.georeferenced[0]).with_suffix(".prj").unlink()
    result = solve(tmp_path / "t", tmp_path / "m.tif", options=SolveOptions(georef=GeorefSpec(crs="EPSG:32630")))
    assert result.georeference.source.endswith("(CRS from --crs)")
    with rasterio.open(utm_raster) as src, rasterio.open(result.outputs["mosaic"]) as out:
        assert out.crs == src.crs
        assert out.transform.almost_equals(src.transform, precision=1e-9)

    cut_raster(utm_raster, tmp_path / "u", 28, shuffle=True, strip_georef=True, keep_georef=1, seed=4,
               key_path=tmp_path / "k2.csv")
    with pytest.raises(OptionError, match="--crs EPSG:32631 disagrees with anchor tile .* \\(EPSG:32630\\)"):
        solve(tmp_path / "u", tmp_path / "m2.tif", options=SolveOptions(georef=GeorefSpec(crs="EPSG:32631")))


def test_the_override_warning_says_how_far_the_anchors_are_moved(tmp_path, tiles_dir, caplog):
    """The anchor tile (coffee_utm.tif's own tags) puts the mosaic's corner
    at 431000, 5800000 with 0.5 m pixels; an origin 10 m east and 5 m north
    moves it by +10, +5 metres: 20 and 10 of its pixels, 22.4 px."""
    with caplog.at_level("WARNING"):
        solve(tiles_dir, tmp_path / "m.tif", options=SolveOptions(georef=GeorefSpec(
            origin=(431010.0, 5800005.0), pixel_size=(0.5, 0.5), crs="EPSG:32630")))
    assert ("overrides anchor tile tile_0036.tif: it moves the mosaic's upper-left corner by +10, +5 metres "
            "(22.4 px of theirs), with pixels of 0.5 x 0.5 against their 0.5 x 0.5") in caplog.text


@pytest.mark.parametrize("spec, refused", [
    # Projected CRS (EPSG:32630, metres): lon/lat ranges are inclusive, the
    # span must be under one unit.
    (dict(bounds=(179.5, 89.2, 180.0, 90.0)), True),
    (dict(bounds=(180.2, 89.0, 180.6, 89.5)), False),
    (dict(bounds=(100.0, 90.1, 100.5, 90.5)), False),
    (dict(bounds=(100.0, 110.0, 100.5, 110.5)), False),
    (dict(bounds=(100.0, 10.0, 100.5, 10.2)), True),
    (dict(bounds=(-4.0, 52.0, -3.0, 52.5)), False),
    (dict(bounds=(-4.0, 52.0, -2.5, 52.5)), False),
    (dict(origin=(-4.01, 52.37), pixel_size=(0.00995, 0.00995)), True),
    (dict(origin=(-4.01, 52.37), pixel_size=(0.0101, 0.0101)), False),
    (dict(origin=(200.0, 50.0), pixel_size=(1e-5, 1e-5)), False),
])
def test_the_degree_check_of_a_projected_crs_at_its_limits(spec, refused):
    """Where "looks like longitude and latitude" begins and ends (our rule,
    no source: |x| <= 180, |y| <= 90, and the whole mosaic within one map
    unit; for an origin, 100 pixels)."""
    if refused:
        with pytest.raises(OptionError, match="look like longitude and latitude"):
            GeorefSpec(crs="EPSG:32630", **spec)
    else:
        GeorefSpec(crs="EPSG:32630", **spec)


@pytest.mark.parametrize("bounds, refused", [
    ((359.5, 0.0, 360.0, 1.0), False),
    ((359.5, 0.0, 360.5, 1.0), True),
    ((10.0, 89.0, 11.0, 90.0), False),
    ((10.0, 89.0, 11.0, 90.5), True),
    ((10.0, 100.0, 11.0, 120.0), True),
])
def test_the_degree_check_of_a_geographic_crs_at_its_limits(bounds, refused):
    """EPSG:4326 takes |x| <= 360 (longitudes past the antimeridian) and
    |y| <= 90 (our rule, no source)."""
    if refused:
        with pytest.raises(OptionError, match="are not longitude and latitude"):
            GeorefSpec(bounds=bounds, crs="EPSG:4326")
    else:
        GeorefSpec(bounds=bounds, crs="EPSG:4326")


def _anchored(cells, transforms, crss=None, names=None, shape=(3, 4), turns=None, mirrors=None):
    """A placement of 32 px tiles and the tile set bits from_anchors reads."""
    from types import SimpleNamespace

    from rasterio.crs import CRS

    from stitch.layout import Placement
    from stitch.tiles import TileGeoref

    n = len(cells)
    names = names or tuple(f"t{i}.tif" for i in range(n))
    crss = crss or ["EPSG:32630"] * n
    p = Placement(names, shape, [r for r, _ in cells], [c for _, c in cells], turns or [0] * n,
                  mirrors or [False] * n)
    georefs = tuple(None if t is None else TileGeoref(t, None if c is None else CRS.from_string(c), "GeoTIFF tags")
                    for t, c in zip(transforms, crss))
    ts = SimpleNamespace(georefs=georefs, names=names, width=32, height=32, step=(32, 32))
    return p, ts


def _tile_at(row, col, origin=(431000.0, 5800000.0), pixel=0.5):
    """The transform of the tile in cell (row, col) of a north-up grid
    (affine's convention: a pixel corner's map position)."""
    return Affine(pixel, 0.0, origin[0] + col * 32 * pixel, 0.0, -pixel, origin[1] - row * 32 * pixel)


def test_an_anchor_in_the_first_row_or_column_places_the_mosaic():
    from stitch.georef import from_anchors

    p, ts = _anchored([(0, 2), (1, 0)], [_tile_at(0, 2), None])
    g = from_anchors(p, ts)
    assert g.transform == _tile_at(0, 0) and g.source == "anchor tile t0.tif"
    p, ts = _anchored([(1, 3), (2, 0)], [None, _tile_at(2, 0)])
    assert from_anchors(p, ts).transform == _tile_at(0, 0)


@pytest.mark.parametrize("turn, mirror, said", [(1, False, "turned 90 degrees; "),
                                                (0, True, "turned 0 degrees and mirrored; "),
                                                (2, True, "turned 180 degrees and mirrored; ")])
def test_a_turned_or_mirrored_anchor_is_refused(turn, mirror, said):
    from stitch.georef import from_anchors

    p, ts = _anchored([(0, 0), (1, 1)], [None, _tile_at(1, 1)], turns=[0, turn], mirrors=[False, mirror])
    with pytest.raises(GeoreferenceError) as err:
        from_anchors(p, ts)
    assert str(err.value) == ("anchor tile 't1.tif' keeps its georeferencing but was placed " + said
                              + "pin it or solve with --rotations 0")


def test_anchors_that_disagree_in_the_placement_are_named_with_the_distance():
    """The second of three anchors sits one cell off where its coordinates
    put it: refused, with both names and how far apart they put the mosaic."""
    from stitch.georef import from_anchors

    p, ts = _anchored([(0, 0), (1, 1), (2, 2)], [_tile_at(0, 0), _tile_at(1, 2), _tile_at(2, 2)])
    with pytest.raises(GeoreferenceError) as err:
        from_anchors(p, ts)
    assert str(err.value) == ("anchor tiles 't0.tif' and 't1.tif' disagree by 16.000 map units (32.00 px) given "
                              "their cells in the placement; their georeferencing or the placement is wrong; "
                              "pin them or drop one")


def test_anchors_that_agree_at_one_corner_only_are_refused():
    """Both put the mosaic's corner at one point, but with pixels of 0.5 and
    0.501 m: at the far corner of a 4 x 3 grid of 32 px tiles (128 x 96 px)
    they differ by hypot(0.128, 0.096) = 0.16 m (0.32 px), over the
    quarter-pixel tolerance."""
    from stitch.georef import from_anchors

    p, ts = _anchored([(0, 0), (0, 1)], [_tile_at(0, 0), _tile_at(0, 1, pixel=0.501)], shape=(3, 4))
    with pytest.raises(GeoreferenceError, match=r"disagree by 0\.160 map units \(0\.32 px\)"):
        from_anchors(p, ts)


def test_anchors_in_two_crss_are_named():
    from stitch.georef import from_anchors

    p, ts = _anchored([(0, 0), (1, 1)], [_tile_at(0, 0), _tile_at(1, 1)], crss=["EPSG:32630", "EPSG:32631"])
    with pytest.raises(GeoreferenceError, match=r"anchor tiles 't0.tif' and 't1.tif' are in different CRSs"):
        from_anchors(p, ts)
    p, ts = _anchored([(0, 0), (1, 1)], [_tile_at(0, 0), _tile_at(1, 1)], crss=["EPSG:32630", None])
    with pytest.raises(GeoreferenceError, match="are in different CRSs"):
        from_anchors(p, ts)


@pytest.mark.parametrize("n, source", [(1, "anchor tile t0.tif"), (2, "anchor tiles t0.tif, t1.tif"),
                                       (3, "anchor tiles t0.tif, t1.tif, t2.tif"),
                                       (4, "anchor tiles t0.tif, t1.tif, t2.tif ...")])
def test_the_anchor_source_names_three_tiles_at_most(n, source):
    from stitch.georef import from_anchors

    cells = [(0, 0), (0, 1), (1, 0), (1, 1)][:n]
    p, ts = _anchored(cells, [_tile_at(r, c) for r, c in cells])
    assert from_anchors(p, ts).source == source


def test_anchor_cells_refuse_other_crss_and_pixel_sizes():
    """anchor_cells, before any search: CRSs must match (a missing one is
    another), and pixel sizes must agree to a millionth."""
    from stitch.georef import anchor_cells

    _, ts = _anchored([(0, 0), (1, 1)], [_tile_at(0, 0), _tile_at(1, 1)], crss=["EPSG:32630", None])
    with pytest.raises(GeoreferenceError, match="are in different CRSs"):
        anchor_cells(ts)
    _, ts = _anchored([(0, 0), (1, 1)], [_tile_at(0, 0), _tile_at(1, 1)], crss=["EPSG:32630", "EPSG:32631"])
    with pytest.raises(GeoreferenceError, match="are in different CRSs"):
        anchor_cells(ts)
    for pixel in (0.6, 0.50001):
        _, ts = _anchored([(0, 0), (1, 1)], [_tile_at(0, 0), _tile_at(1, 1, pixel=pixel)])
        with pytest.raises(GeoreferenceError, match="have different pixel sizes"):
            anchor_cells(ts)
    _, ts = _anchored([(0, 0), (1, 1)], [_tile_at(0, 0), _tile_at(1, 1, pixel=0.5000001)])
    assert [(r, c) for _, r, c in anchor_cells(ts)] == [(0, 0), (1, 1)]


def test_map_units_by_the_crs():
    """Units as PROJ names them (EPSG dataset): metres for UTM 30N, degrees
    for WGS 84, US survey feet for NAD83 / New York Long Island (EPSG:2263)."""
    from rasterio.crs import CRS

    from stitch.georef import map_units

    assert map_units(None) == "map units"
    assert map_units(CRS.from_epsg(32630)) == "metres"
    assert map_units(CRS.from_epsg(4326)) == "degrees"
    assert map_units(CRS.from_epsg(2263)) == "US survey feet"


def test_prj_text_falls_back_to_gdal_wkt_for_a_crs_esri_cannot_hold():
    """A CRS the ESRI dialect cannot express (stood in for by one whose ESRI
    export fails, as PROJ's does for such CRSs) is written in GDAL's own
    WKT, ending in a newline, and reads back as the same CRS."""
    from rasterio.crs import CRS
    from rasterio.errors import CRSError

    from stitch.georef import prj_text

    crs = CRS.from_epsg(32630)

    class NoEsri:
        def to_wkt(self, version=None):
            if version is not None:
                raise CRSError("no ESRI form")
            return crs.to_wkt()

    text = prj_text(NoEsri())
    assert text == crs.to_wkt() + "\n"
    assert CRS.from_wkt(text) == crs
