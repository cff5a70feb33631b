"""Ground control: fit the mosaic's transform to surveyed points.

A ground control file is a CSV with the named columns ``tile``, ``col``,
``row``, ``x`` and ``y``, in any order (``pixel`` and ``line``, GDAL's
names, may stand for ``col`` and ``row``): a position inside a named tile in
GDAL's pixel/line convention ((0, 0) is the upper-left corner of the tile's
upper-left pixel, (0.5, 0.5) its centre; ``col``/``pixel`` counts to the
right, ``row``/``line`` down) and its map coordinate, in the CRS given with
``--crs``.

Two fits, by least squares:

* affine, 6 parameters (EPSG method 9624, "Affine parametric
  transformation"): ``X = A0 + A1 x + A2 y``, ``Y = B0 + B1 x + B2 y``;
* similarity, 4 parameters (EPSG method 9621, "Similarity transformation"):
  one scale, one rotation and a shift; used with ``--similarity`` or when only
  two points are given.

Each point's residual (given minus fitted, in x and y and as a distance) is
reported in the CRS's units and in pixels, with the RMSE; points off by more
than three times the RMSE of the other points are flagged.
"""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from affine import Affine

from .errors import GeoreferenceError
from .orientation import orient_point

__all__ = ["ControlPoint", "GcpFit", "fit_affine", "fit_similarity", "mosaic_point", "read_gcps", "fit_control"]

CSV_COLUMNS = ("tile", "col", "row", "x", "y")

#: GDAL's names for a position inside a raster, accepted for ``col`` and ``row``.
ALIASES = {"pixel": "col", "line": "row"}


@dataclass(frozen=True)
class ControlPoint:
    """One ground control point: a tile position and its map coordinate."""

    tile: str
    col: float
    row: float
    x: float
    y: float


@dataclass(frozen=True)
class GcpFit:
    """A fitted mosaic transform and how well it fits its points.

    Attributes
    ----------
    transform : affine.Affine
        Mosaic pixel corner (col, row) to map (x, y).
    method : str
        ``"affine (EPSG:9624)"`` or ``"similarity (EPSG:9621)"``.
    residuals_map : ndarray, shape (n,)
        Distance between fitted and given map coordinates, map units.
    residuals_px : ndarray, shape (n,)
        The same in mosaic pixels.
    rmse_map, rmse_px : float
    outliers : tuple of int
        Points whose residual exceeds three times the RMSE of the other points.
    residuals_xy : ndarray, shape (n, 2)
        Given minus fitted map coordinate, x and y (dX, dY), map units.
    points : tuple of ControlPoint
        The points, in the order of the residuals.
    """

    transform: Affine
    method: str
    residuals_map: np.ndarray
    residuals_px: np.ndarray
    rmse_map: float
    rmse_px: float
    outliers: tuple
    residuals_xy: np.ndarray
    points: tuple

    def label(self, i):
        """How point ``i`` is named in messages: its number and tile."""
        p = self.points[i]
        return f"#{i + 1} ({p.tile} at col {p.col:g}, row {p.row:g})"


#: Largest coordinate a control file may hold: beyond any CRS's extent in
#: metres, feet or degrees (our bound, no source), and far from float overflow.
MAX_COORDINATE = 1e12

#: A control fit whose RMSE exceeds this many tile sizes is refused: the
#: points contradict each other (a duplicate with other coordinates, a point
#: on the wrong tile), whatever the placement (our choice, no source).
MAX_RMSE_TILES = 1.0


def read_gcps(path):
    """Read a ground control CSV (``tile,col,row,x,y``).

    Raises
    ------
    GeoreferenceError
        Missing columns, non-numeric or non-finite values, or no points.
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8-sig")
    except OSError as exc:
        raise GeoreferenceError(f"cannot read ground control file {str(path)!r}: {exc.strerror}") from None
    except UnicodeDecodeError:
        raise GeoreferenceError(f"ground control file {str(path)!r} is not UTF-8 text") from None
    reader = csv.DictReader(io.StringIO(text))
    header = [h.strip().lower() for h in (reader.fieldnames or [])]
    named = [ALIASES.get(h, h) for h in header]
    missing = [c for c in CSV_COLUMNS if c not in named]
    twice = sorted({c for c in named if c in CSV_COLUMNS and named.count(c) > 1})
    if missing or twice:
        what = f"lacks column(s) {', '.join(missing)}" if missing else f"names {', '.join(twice)} twice"
        raise GeoreferenceError(
            f"ground control file {path.name!r} {what}; expected the columns {','.join(CSV_COLUMNS)} in any "
            "order (pixel and line may stand for col and row)"
        )
    points = []
    for lineno, row in enumerate(reader, start=2):
        row = {ALIASES.get(h, h): row[k] for k, h in zip(reader.fieldnames, header)}
        try:
            values = [float(row[c]) for c in CSV_COLUMNS[1:]]
        except (TypeError, ValueError):
            raise GeoreferenceError(f"{path.name} line {lineno}: col, row, x and y must be numbers") from None
        if not all(map(math.isfinite, values)):
            raise GeoreferenceError(f"{path.name} line {lineno}: values must be finite numbers")
        if max(abs(v) for v in values) >= MAX_COORDINATE:
            raise GeoreferenceError(f"{path.name} line {lineno}: a value of {max(values, key=abs):.3g} is beyond any "
                                    f"map coordinate (at most {MAX_COORDINATE:.0e} in size); check the columns")
        points.append(ControlPoint((row["tile"] or "").strip(), *values))
    if not points:
        raise GeoreferenceError(f"ground control file {path.name!r} holds no points")
    return points


def fit_affine(src, dst):
    """Least-squares 6-parameter affine (EPSG method 9624).

    Parameters
    ----------
    src, dst : array_like, shape (n, 2)
        Source and target coordinates.

    Returns
    -------
    (A0, A1, A2, B0, B1, B2)
        ``X = A0 + A1 x + A2 y``, ``Y = B0 + B1 x + B2 y``.

    Raises
    ------
    GeoreferenceError
        Fewer than three points, or all on one line.
    """
    src = np.asarray(src, float)
    dst = np.asarray(dst, float)
    if len(src) < 3:
        raise GeoreferenceError(f"an affine fit needs at least 3 control points, got {len(src)}; use --similarity")
    design = np.column_stack([np.ones(len(src)), src])
    if np.linalg.matrix_rank(design - [0, *src.mean(axis=0)], tol=1e-9 * max(1.0, np.abs(src).max())) < 3:
        raise GeoreferenceError("control points lie on one line; an affine fit needs points spread in two directions")
    (a0, a1, a2), *_ = np.linalg.lstsq(design, dst[:, 0], rcond=None)
    (b0, b1, b2), *_ = np.linalg.lstsq(design, dst[:, 1], rcond=None)
    return a0, a1, a2, b0, b1, b2


def fit_similarity(src, dst):
    """Least-squares 4-parameter similarity (EPSG method 9621).

    ``X = X0 + a x + b y``, ``Y = Y0 - b x + a y`` with ``a = M cos(theta)``,
    ``b = M sin(theta)``.

    Returns
    -------
    (X0, Y0, a, b)
    """
    src = np.asarray(src, float)
    dst = np.asarray(dst, float)
    if len(src) < 2 or np.allclose(src, src[0]):
        raise GeoreferenceError("a similarity fit needs at least 2 distinct control points")
    x, y = src[:, 0], src[:, 1]
    one, zero = np.ones(len(src)), np.zeros(len(src))
    design = np.vstack([np.column_stack([one, zero, x, y]), np.column_stack([zero, one, y, -x])])
    (x0, y0, a, b), *_ = np.linalg.lstsq(design, np.concatenate([dst[:, 0], dst[:, 1]]), rcond=None)
    return x0, y0, a, b


def mosaic_point(placement, index, col, row, width, height, step=None):
    """Where a position inside a tile file lands in the mosaic, in pixels.

    Follows the tile's mirror and clockwise quarter turns
    (:func:`stitch.orientation.orient_point`); coordinates are continuous
    (pixel corners). Cells start every ``step`` pixels (default the tile
    size; less for tiles that overlap).
    """
    sx, sy = (width, height) if step is None else step
    u, v = orient_point(col, row, width, height, placement.rotations[index], placement.mirrored[index])
    return placement.cols[index] * sx + u, placement.rows[index] * sy + v


def fit_control(points, placement, width, height, *, similarity=False, step=None):
    """Fit the mosaic transform to control points given in tile coordinates.

    ``step`` is as in :func:`mosaic_point`.

    Raises
    ------
    GeoreferenceError
        A point names a tile that is not placed, or the set is degenerate.
    """
    index = {name: i for i, name in enumerate(placement.names)}
    src, dst = [], []
    for p in points:
        i = index.get(p.tile)
        if i is None or placement.rows[i] < 0:
            raise GeoreferenceError(f"control point names tile {p.tile!r}, which is not placed; check the name")
        src.append(mosaic_point(placement, i, p.col, p.row, width, height, step))
        dst.append((p.x, p.y))
    src, dst = np.array(src), np.array(dst)
    if similarity or len(points) == 2:
        # Pixel rows run down and map y up: fit on (col, -row), then fold the flip in.
        x0, y0, a, b = fit_similarity(src * [1, -1], dst)
        transform = Affine(a, -b, x0, -b, -a, y0)
        method = "similarity (EPSG:9621)"
    else:
        a0, a1, a2, b0, b1, b2 = fit_affine(src, dst)
        transform = Affine(a1, a2, a0, b1, b2, b0)
        method = "affine (EPSG:9624)"
    # Rotation terms a billion times smaller than the pixel size are rounding
    # noise of the least squares; zero them so north-up stays north-up.
    if abs(transform.b) < 1e-9 * abs(transform.a) and abs(transform.d) < 1e-9 * abs(transform.e):
        transform = Affine(transform.a, 0.0, transform.c, 0.0, transform.e, transform.f)
    _check_fit(transform, src, dst, width, height)
    fitted = np.array([transform @ tuple(s) for s in src])
    res_xy = dst - fitted
    res_map = np.hypot(*res_xy.T)
    px = math.sqrt(abs(transform.a * transform.e - transform.b * transform.d))
    res_px = res_map / px if px > 0 else res_map
    rmse_map = float(np.sqrt(np.mean(res_map**2)))
    # An outlier inflates the RMSE it is compared with (with n points no
    # residual can exceed sqrt(n) x RMSE), so each point is compared with the
    # RMSE of the others; sub-hundredth-pixel residuals are never flagged.
    outliers = []
    if len(res_map) >= 3:
        sq = res_map**2
        for i in range(len(res_map)):
            others = math.sqrt((sq.sum() - sq[i]) / (len(sq) - 1))
            if res_map[i] > 3 * others and res_px[i] > 0.01:
                outliers.append(i)
    outliers = tuple(outliers)
    rmse_px = float(np.sqrt(np.mean(res_px**2)))
    if rmse_px > MAX_RMSE_TILES * max(width, height):
        worst = int(np.argmax(res_px))
        raise GeoreferenceError(
            f"the control points contradict each other: RMSE {rmse_px:.3g} px, more than a tile "
            f"({max(width, height)} px); point {worst + 1} ({points[worst].tile}) is {res_px[worst]:.3g} px off the "
            "fit: check for duplicates with other coordinates and points on the wrong tile")
    return GcpFit(transform, method, res_map, res_px, rmse_map, rmse_px, outliers, res_xy, tuple(points))


def _check_fit(transform, src, dst, width, height):
    """Refuse a fit that no survey could mean, with the numbers.

    A pixel/line image with map y pointing up has a negative determinant
    (rows run south: GDAL's north-up geotransform, common practice, no
    source); a positive one mirrors the mosaic, as x and y given in the wrong
    order do. A pixel size many orders below the map points' own precision
    means the points collapse onto one map position.
    """
    det = transform.a * transform.e - transform.b * transform.d
    if not math.isfinite(det):
        raise GeoreferenceError("the control fit is not finite; check the coordinates")
    pixel = math.sqrt(abs(det))
    spread_px = float(np.ptp(src, axis=0).max())
    spread_map = float(np.ptp(dst, axis=0).max())
    scale = max(1.0, float(np.abs(dst).max()))
    if spread_map <= 1e-9 * scale or pixel * spread_px <= 1e-9 * scale:
        raise GeoreferenceError(
            f"the control points map {spread_px:.0f} px of the mosaic onto {spread_map:.3g} map units (pixel size "
            f"{pixel:.3g}): they sit at one map position; check their x and y")
    if det > 0:
        raise GeoreferenceError(
            "the control points give a mirrored mosaic (the fit's determinant is positive: map y grows with the "
            "rows); x and y are probably swapped (for EPSG:4326, x is longitude and y latitude)")
