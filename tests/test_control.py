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


# Direct checks of fit_control, on a 2 x 3 grid of 32 px upright tiles, so
# that each number the fit reports is compared with one computed here
# independently (numpy least squares, the documented outlier rule).

def _grid_placement():
    names = tuple("abcdef")
    return Placement(names, (2, 3), [0, 0, 0, 1, 1, 1], [0, 1, 2, 0, 1, 2], [0] * 6, [False] * 6)


def _points(transform, spots, noise=None):
    """Control points at (tile, col, row) with map coordinates from ``transform``
    plus ``noise`` (map units, one (dx, dy) per point)."""
    from stitch.control import ControlPoint

    p = _grid_placement()
    index = {n: i for i, n in enumerate(p.names)}
    out = []
    for k, (tile, col, row) in enumerate(spots):
        i = index[tile]
        x, y = transform * (p.cols[i] * 32 + col, p.rows[i] * 32 + row)
        dx, dy = (0.0, 0.0) if noise is None else noise[k]
        out.append(ControlPoint(tile, col, row, x + dx, y + dy))
    return out


SPOTS = [("a", 2.5, 3.5), ("c", 30.0, 4.0), ("d", 5.0, 28.0), ("f", 29.5, 30.5), ("b", 16.0, 16.0),
         ("e", 8.0, 12.0)]


def test_fit_control_is_affine_unless_asked():
    """The 6-parameter affine (EPSG method 9624) by default; the
    4-parameter similarity (EPSG method 9621) when asked or with two points."""
    from stitch.control import fit_control

    t = Affine(0.5, 0.0, 431000.0, 0.0, -0.5, 5800000.0)
    p = _grid_placement()
    assert fit_control(_points(t, SPOTS[:4]), p, 32, 32).method == "affine (EPSG:9624)"
    assert fit_control(_points(t, SPOTS[:4]), p, 32, 32, similarity=True).method == "similarity (EPSG:9621)"
    assert fit_control(_points(t, SPOTS[:2]), p, 32, 32).method == "similarity (EPSG:9621)"


@pytest.mark.parametrize("n", [2, 4])
def test_a_turned_similarity_is_given_back(n):
    """Exact points of a similarity turned 30 degrees with 0.5 m pixels
    (affine's Affine.rotation and Affine.scale build it; rows run down, map
    y up) give that transform back, from two points or four."""
    from stitch.control import fit_control

    t = Affine.translation(431000.0, 5800000.0) * Affine.rotation(30) * Affine.scale(0.5, -0.5)
    fit = fit_control(_points(t, SPOTS[:n]), _grid_placement(), 32, 32, similarity=True)
    assert fit.transform.almost_equals(t, precision=1e-6)
    assert fit.rmse_px < 1e-6


def test_residuals_and_rmse_match_an_independent_least_squares_fit():
    """Six noisy points, 0.5 m pixels: residuals (given minus fitted, per
    point), their lengths in map units and in pixels (map units over the
    pixel size, the root of the determinant's magnitude) and both RMSEs
    equal those of numpy's least squares on the same design."""
    from stitch.control import fit_control, mosaic_point

    t = Affine(0.5, 0.02, 431000.0, -0.01, -0.5, 5800000.0)
    noise = [(0.3, -0.1), (-0.2, 0.25), (0.05, 0.4), (-0.35, -0.2), (0.1, 0.0), (0.0, -0.3)]
    points = _points(t, SPOTS, noise)
    fit = fit_control(points, _grid_placement(), 32, 32)
    p = _grid_placement()
    src = np.array([mosaic_point(p, p.names.index(q.tile), q.col, q.row, 32, 32) for q in points])
    dst = np.array([(q.x, q.y) for q in points])
    design = np.column_stack([np.ones(len(src)), src])
    coef = np.linalg.lstsq(design, dst, rcond=None)[0]
    res = dst - design @ coef
    a1, b1 = coef[1]
    a2, b2 = coef[2]
    pixel = np.sqrt(abs(a1 * b2 - a2 * b1))
    np.testing.assert_allclose(fit.residuals_xy, res, atol=1e-6)
    np.testing.assert_allclose(fit.residuals_map, np.hypot(*res.T), atol=1e-6)
    np.testing.assert_allclose(fit.residuals_px, np.hypot(*res.T) / pixel, atol=1e-5)
    assert fit.rmse_map == pytest.approx(np.sqrt(np.mean(np.sum(res**2, axis=1))), abs=1e-6)
    assert fit.rmse_px == pytest.approx(np.sqrt(np.mean(np.sum(res**2, axis=1))) / pixel, abs=1e-5)


def test_outliers_follow_the_documented_rule():
    """Random noisy sets with one gross error of random size: the points
    flagged are exactly those whose residual exceeds three times the RMSE of
    the other points and 0.01 px (the rule in stitch.control's notes),
    recomputed here from the fit's own residuals (in the three-point sets,
    the fewest compared, no residual gets that far)."""
    from stitch.control import fit_control

    t = Affine(0.5, 0.0, 431000.0, 0.0, -0.5, 5800000.0)
    rng = np.random.default_rng(3)
    flagged_any = 0
    for trial in range(120):
        n = 3 if trial % 3 == 0 else 6
        noise = rng.normal(0, 10 ** rng.uniform(-3.5, -1), (n, 2))
        noise[rng.integers(n)] += rng.normal(0, 10 ** rng.uniform(-2.5, 0.5), 2)
        fit = fit_control(_points(t, SPOTS[:n], noise), _grid_placement(), 32, 32, similarity=n == 3)
        sq = fit.residuals_map**2
        expected = tuple(i for i in range(n)
                         if fit.residuals_map[i] > 3 * np.sqrt((sq.sum() - sq[i]) / (n - 1))
                         and fit.residuals_px[i] > 0.01)
        assert fit.outliers == expected
        flagged_any += bool(expected)
    assert flagged_any > 20


def test_a_mirrored_fit_is_refused_whatever_the_pixel_size():
    """x and y given swapped make the determinant positive: refused also
    with 0.1 m pixels (a determinant far below 1)."""
    from stitch.control import ControlPoint, fit_control

    t = Affine(0.1, 0.0, 431000.0, 0.0, -0.1, 5800000.0)
    swapped = [ControlPoint(q.tile, q.col, q.row, q.y, q.x) for q in _points(t, SPOTS[:4])]
    with pytest.raises(GeoreferenceError, match="give a mirrored mosaic"):
        fit_control(swapped, _grid_placement(), 32, 32)


def test_points_that_collapse_onto_one_map_position_are_refused():
    from stitch.control import ControlPoint, fit_control

    same = [ControlPoint(tile, col, row, 431000.0, 5800000.0) for tile, col, row in SPOTS[:4]]
    with pytest.raises(GeoreferenceError, match="they sit at one map position"):
        fit_control(same, _grid_placement(), 32, 32)


def test_a_similarity_needs_two_distinct_points():
    with pytest.raises(GeoreferenceError, match="at least 2 distinct control points"):
        fit_similarity([(1.0, 2.0)], [(10.0, 20.0)])
    with pytest.raises(GeoreferenceError, match="at least 2 distinct control points"):
        fit_similarity([(1.0, 2.0), (1.0, 2.0)], [(10.0, 20.0), (11.0, 21.0)])


@pytest.mark.parametrize("t", [Affine(0.5, 0.1, 431000.0, 0.0, -0.5, 5800000.0),
                               Affine(0.5, 0.0, 431000.0, 0.1, -0.5, 5800000.0),
                               Affine(0.5, 0.0, 431000.0, 0.0, -0.5, 5800000.0)])
def test_an_exact_affine_comes_back_with_its_shear_and_north_up_stays_north_up(t):
    """Rotation terms are zeroed only when both are a billion times below
    the pixel size (least-squares rounding): a shear in one term alone is
    kept, and exact north-up points give b = d = 0.0 exactly."""
    from stitch.control import fit_control

    fit = fit_control(_points(t, SPOTS), _grid_placement(), 32, 32)
    assert fit.transform.almost_equals(t, precision=1e-7)
    if t.b == 0.0 and t.d == 0.0:
        assert fit.transform.b == 0.0 and fit.transform.d == 0.0


def test_a_point_on_a_tile_not_placed_or_unknown_is_refused():
    from stitch.control import ControlPoint, fit_control

    t = Affine(0.5, 0.0, 431000.0, 0.0, -0.5, 5800000.0)
    p = _grid_placement()
    unplaced = Placement(p.names, p.shape, [0, 0, 0, 1, 1, -1], [0, 1, 2, 0, 1, -1], [0] * 6, [False] * 6)
    points = _points(t, SPOTS[:4])
    with pytest.raises(GeoreferenceError, match="names tile 'f', which is not placed"):
        fit_control(points, unplaced, 32, 32)
    with pytest.raises(GeoreferenceError, match="names tile 'zz', which is not placed"):
        fit_control(points + [ControlPoint("zz", 1.0, 1.0, 431000.0, 5800000.0)], p, 32, 32)


def test_contradicting_points_name_the_worst_one():
    """One point 80 m (160 px) off on 32 px tiles: the RMSE passes a tile,
    the fit is refused and the message numbers that point as in the file
    (from 1) with its tile."""
    from stitch.control import fit_control

    t = Affine(0.5, 0.0, 431000.0, 0.0, -0.5, 5800000.0)
    noise = [(0.0, 0.0)] * 4 + [(80.0, 24.0), (0.0, 0.0)]
    with pytest.raises(GeoreferenceError, match=r"RMSE 53.9 px, more than a tile \(32 px\); point 5 \(b\) is 116 px off"):
        fit_control(_points(t, SPOTS, noise), _grid_placement(), 32, 32)
