"""Ground control fits, checked against EPSG's method formulas and GDAL.

Outside references:
* EPSG method 9624 (affine parametric transformation), the worked example of
  IOGP Publication 373-7-2 (Geomatics Guidance Note 7, part 2, "Coordinate
  Conversions and Transformations including Formulas"), as transcribed in the
  EPSG registry's method record: Jamaica 1875 / Jamaica (Old Grid) (Clarke's
  feet) to JAD69 / Jamaica National Grid (metres, EPSG:24200), A0 = 82357.457,
  A1 = 0.304794369, A2 = 0.000015417425, B0 = 28091.324,
  B1 = -0.000015417425, B2 = 0.304794369; source (553900.00, 482500.00) ft
  maps to (251190.497, 175146.067) m; the reverse has D = 0.092899608,
  A0' = -270201.960, A1' = 3.280900499, A2' = -0.000165958, B0' = -92178.507,
  B1' = 0.000165958, B2' = 3.280900499.
* EPSG method 9621 (similarity transformation): X = X0 + a x + b y,
  Y = Y0 - b x + a y with a = M cos(theta), b = M sin(theta).
* GDAL's GDALGCPsToGeoTransform, through ``rasterio.transform.from_gcps``.
"""

import numpy as np
import pytest
import rasterio
from affine import Affine
from rasterio.control import GroundControlPoint
from rasterio.transform import from_gcps

from conftest import skimage_image, write_raster
from stitch.control import fit_affine, fit_similarity, mosaic_point, read_gcps
from stitch.errors import GeoreferenceError
from stitch.georef import GeorefSpec, read_world_file, world_file_path
from stitch.layout import Placement
from stitch.pipeline import SolveOptions, solve
from stitch.puzzles import cut_raster

EPSG_9624 = (82357.457, 0.304794369, 0.000015417425, 28091.324, -0.000015417425, 0.304794369)


def test_epsg_9624_worked_example():
    a0, a1, a2, b0, b1, b2 = EPSG_9624
    src = np.array([[553900.0, 482500.0], [550000.0, 480000.0], [560000.0, 481000.0], [555000.0, 490000.0]])
    dst = np.column_stack([a0 + a1 * src[:, 0] + a2 * src[:, 1], b0 + b1 * src[:, 0] + b2 * src[:, 1]])
    got = fit_affine(src, dst)
    np.testing.assert_allclose(got, EPSG_9624, rtol=1e-7, atol=1e-6)
    g0, g1, g2, h0, h1, h2 = got
    x, y = 553900.00, 482500.00
    assert g0 + g1 * x + g2 * y == pytest.approx(251190.497, abs=1e-3)
    assert h0 + h1 * x + h2 * y == pytest.approx(175146.067, abs=1e-3)


def test_epsg_9624_worked_example_reverse():
    """The guidance note's reverse parameters, fitted from the target side."""
    a0, a1, a2, b0, b1, b2 = EPSG_9624
    src = np.array([[553900.0, 482500.0], [550000.0, 480000.0], [560000.0, 481000.0], [555000.0, 490000.0]])
    dst = np.column_stack([a0 + a1 * src[:, 0] + a2 * src[:, 1], b0 + b1 * src[:, 0] + b2 * src[:, 1]])
    r0, r1, r2, s0, s1, s2 = fit_affine(dst, src)
    assert a1 * b2 - a2 * b1 == pytest.approx(0.092899608, abs=1e-9)
    assert (r0, s0) == pytest.approx((-270201.960, -92178.507), abs=1e-2)
    assert (r1, r2, s1, s2) == pytest.approx((3.280900499, -0.000165958, 0.000165958, 3.280900499), abs=1e-9)


def test_similarity_follows_epsg_9621_form():
    m, theta, x0, y0 = 0.5, np.radians(12.0), 1000.0, 2000.0
    a, b = m * np.cos(theta), m * np.sin(theta)
    src = np.array([[0.0, 0.0], [100.0, 20.0]])
    dst = np.column_stack([x0 + a * src[:, 0] + b * src[:, 1], y0 - b * src[:, 0] + a * src[:, 1]])
    np.testing.assert_allclose(fit_similarity(src, dst), (x0, y0, a, b), atol=1e-9)


def test_affine_fit_equals_gdal_gcps_to_geotransform():
    rng = np.random.default_rng(4)
    true = Affine(0.5, 0.05, 431000.0, 0.04, -0.5, 5800000.0)
    cols, rows = rng.uniform(0, 500, 12), rng.uniform(0, 400, 12)
    xy = np.array([true @ (c, r) for c, r in zip(cols, rows)]) + rng.normal(0, 0.02, (12, 2))
    gdal = from_gcps([GroundControlPoint(row=r, col=c, x=x, y=y) for c, r, (x, y) in zip(cols, rows, xy)])
    a0, a1, a2, b0, b1, b2 = fit_affine(np.column_stack([cols, rows]), xy)
    ours = Affine(a1, a2, a0, b1, b2, b0)
    np.testing.assert_allclose(tuple(ours)[:6], tuple(gdal)[:6], rtol=1e-9, atol=1e-7)


def test_degenerate_sets_are_refused():
    with pytest.raises(GeoreferenceError, match="one line"):
        fit_affine([[0, 0], [1, 1], [2, 2], [3, 3]], [[0, 0], [1, 1], [2, 2], [3, 3]])
    with pytest.raises(GeoreferenceError, match="at least 3"):
        fit_affine([[0, 0], [1, 1]], [[0, 0], [1, 1]])
    with pytest.raises(GeoreferenceError, match="at least 2 distinct"):
        fit_similarity([[1, 1]], [[0, 0]])


@pytest.mark.parametrize(
    "text, message",
    [
        pytest.param("tile,col,row,x\na,1,1,5\n", "lacks column", id="missing column"),
        pytest.param("tile,col,row,x,y\na,1,one,5,6\n", "must be numbers", id="non-numeric"),
        pytest.param("tile,col,row,x,y\na,1,1,nan,6\n", "finite", id="nan"),
        pytest.param("tile,col,row,x,y\n", "no points", id="empty"),
    ],
)
def test_bad_control_files(tmp_path, text, message):
    f = tmp_path / "gcp.csv"
    f.write_text(text)
    with pytest.raises(GeoreferenceError, match=message):
        read_gcps(f)


def test_tile_positions_follow_turns_and_mirrors():
    """A marked corner of a turned tile lands where orient() puts it."""
    from stitch.orientation import orient

    for r in range(4):
        for m in (False, True):
            p = Placement(("a",), (1, 1), [0], [0], [r], [m])
            tile = np.zeros((1, 4, 6))
            tile[0, 1, 2] = 1  # pixel centre (2.5, 1.5)
            out = orient(tile, r, m)[0]
            row, col = np.argwhere(out == 1)[0]
            assert mosaic_point(p, 0, 2.5, 1.5, 6, 4) == pytest.approx((col + 0.5, row + 0.5))


def _gcp_csv(path, key, transform, picks, tile=28):
    lines = ["tile,col,row,x,y"]
    for i, (u, v) in picks:
        x, y = transform @ (key.cols[i] * tile + u, key.rows[i] * tile + v)
        lines.append(f"{key.names[i]},{u},{v},{float(x)!r},{float(y)!r}")
    path.write_text("\n".join(lines) + "\n")
    return path


@pytest.mark.parametrize(
    "transform",
    [
        pytest.param(Affine(0.5, 0.0, 431000.0, 0.0, -0.5, 5800000.0), id="north-up UTM"),
        pytest.param(Affine(0.45, 0.12, 431000.0, 0.11, -0.47, 5800000.0), id="rotated and sheared"),
    ],
)
def test_solve_with_control_points_recovers_the_transform(tmp_path, transform):
    img = skimage_image("coffee")[:, 60:200, 150:290]
    src = write_raster(tmp_path / "src.tif", img)
    cut = cut_raster(src, tmp_path / "t", 28, shuffle=True, seed=2, key_path=tmp_path / "k.csv")
    gcps = _gcp_csv(tmp_path / "gcp.csv", cut.key, transform, [(0, (3.5, 4.5)), (4, (20, 2)), (20, (1, 27)),
                                                               (24, (27.5, 27.5)), (12, (14, 14))])
    opts = SolveOptions(georef=GeorefSpec(gcps=str(gcps), crs="EPSG:32630"))
    result = solve(tmp_path / "t", tmp_path / "m.tif", options=opts)
    assert result.control.rmse_px < 1e-6
    with rasterio.open(result.outputs["mosaic"]) as out:
        assert out.transform.almost_equals(transform, precision=1e-7)
        assert out.crs.to_epsg() == 32630
    # GDAL's reading of our world file agrees (rotation terms included).
    assert read_world_file(world_file_path(result.outputs["mosaic"])).almost_equals(transform, precision=1e-7)


def test_control_point_outlier_is_flagged(tmp_path):
    img = skimage_image("coffee")[:, 60:200, 150:290]
    src = write_raster(tmp_path / "src.tif", img)
    cut = cut_raster(src, tmp_path / "t", 28, shuffle=True, seed=2, key_path=tmp_path / "k.csv")
    t = Affine(0.5, 0.0, 431000.0, 0.0, -0.5, 5800000.0)
    picks = [(i, (14, 14)) for i in (0, 2, 4, 10, 12, 14, 20, 22, 24)]
    gcps = _gcp_csv(tmp_path / "gcp.csv", cut.key, t, picks)
    lines = gcps.read_text().splitlines()
    name, u, v, x, y = lines[5].split(",")
    lines[5] = ",".join([name, u, v, str(float(x) + 40.0), y])  # one point 40 m off
    gcps.write_text("\n".join(lines) + "\n")
    opts = SolveOptions(georef=GeorefSpec(gcps=str(gcps), crs="EPSG:32630"))
    centre = cut.key.names[12]
    with pytest.warns(UserWarning, match=rf"control point\(s\) #5 \({centre} at col 14, row 14\), 35.6 metres lie "
                                         r"more than 3 x the RMSE of the others"):
        result = solve(tmp_path / "t", tmp_path / "m.tif", options=opts)
    assert result.control.outliers == (4,)
    # Given minus fitted. The x fit is a plane through nine points on a 3 x 3
    # grid; the centre point's leverage (its hat-matrix diagonal) there is
    # 1/9, so it keeps 40 x (1 - 1/9) = 35.56 m of its 40 m error (least
    # squares, from memory). The y fit is untouched: dY is 0 everywhere.
    dxy = result.control.residuals_xy
    assert dxy[4, 0] == pytest.approx(40 * 8 / 9, abs=1e-6)
    assert np.abs(dxy[:, 1]).max() < 1e-6
    assert result.control.points[4].tile == centre


def test_control_columns_by_name_in_any_order(tmp_path):
    """GDAL's pixel/line names stand for col/row, in any column order; the
    fit equals the one from the documented header."""
    img = skimage_image("coffee")[:, 60:200, 150:290]
    src = write_raster(tmp_path / "src.tif", img)
    cut = cut_raster(src, tmp_path / "t", 28, shuffle=True, seed=2, key_path=tmp_path / "k.csv")
    t = Affine(0.45, 0.12, 431000.0, 0.11, -0.47, 5800000.0)
    std = _gcp_csv(tmp_path / "gcp.csv", cut.key, t, [(0, (3.5, 4.5)), (4, (20, 2)), (20, (1, 27)), (24, (27, 9))])
    rows = [ln.split(",") for ln in std.read_text().splitlines()[1:]]
    gdal = tmp_path / "gdal.csv"
    gdal.write_text("Line,X,tile,pixel,y\n" + "".join(f"{r},{x},{n},{c},{y}\n" for n, c, r, x, y in rows))
    a, b = read_gcps(std), read_gcps(gdal)
    assert a == b
    (tmp_path / "twice.csv").write_text("tile,col,pixel,row,x,y\na,1,1,1,0,0\n")
    with pytest.raises(GeoreferenceError, match="names col twice; expected the columns tile,col,row,x,y in any order"):
        read_gcps(tmp_path / "twice.csv")


def test_control_point_on_unknown_tile(tmp_path, tiles_dir):
    f = tmp_path / "gcp.csv"
    f.write_text("tile,col,row,x,y\nnope.tif,1,1,0,0\nnope.tif,2,2,1,1\n")
    opts = SolveOptions(georef=GeorefSpec(gcps=str(f), crs="EPSG:32630"))
    with pytest.raises(GeoreferenceError, match="names tile 'nope.tif', which is not in the tile folder"):
        solve(tiles_dir, tmp_path / "m.tif", options=opts)
