"""Georeference the mosaic: transforms, CRSs and world files.

Sources, from the most to the least explicit:

* ``--bounds`` or ``--origin``/``--pixel-size`` with ``--crs``
  (:func:`from_bounds`, :func:`from_origin`);
* tiles that kept their georeferencing, read by GDAL from GeoTIFF tags or a
  sidecar world file (:func:`from_anchors`);
* none: the mosaic stays in pixel space.

Transforms are :class:`affine.Affine` in GDAL's convention: ``(col, row)`` of a
pixel *corner* to map ``(x, y)``; ``(0, 0)`` is the upper-left corner of the
upper-left pixel.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import affine
import numpy as np
import rasterio
import rasterio.transform
from affine import Affine
from rasterio.crs import CRS
from rasterio.enums import WktVersion
from rasterio.errors import CRSError

from .errors import GeoreferenceError, OptionError

__all__ = [
    "Georeference",
    "GeorefSpec",
    "anchor_cells",
    "from_anchors",
    "from_bounds",
    "from_origin",
    "parse_crs",
    "describe_extent",
    "map_units",
    "pixel_size",
    "prj_path",
    "prj_text",
    "read_world_file",
    "world_file_path",
    "world_file_text",
]

#: Largest disagreement between two anchor tiles, in pixels.
ANCHOR_TOLERANCE_PX = 0.25


def pixel_size(transform):
    """A pixel's width and height on the ground, in map units: the lengths
    of the transform's column and row steps, so also for rotated grids.

    >>> pixel_size(Affine(0.5, 0, 431000, 0, -0.5, 5800000))
    (0.5, 0.5)
    >>> pixel_size(Affine.rotation(30) * Affine.scale(2, -3))
    (2.0, 3.0)
    """
    t = transform
    return float(math.hypot(t.a, t.d)), float(math.hypot(t.b, t.e))


@dataclass(frozen=True)
class Georeference:
    """Where the mosaic lies on the map.

    Attributes
    ----------
    transform : affine.Affine
        Mosaic pixel corner ``(col, row)`` to map ``(x, y)``.
    crs : rasterio.crs.CRS or None
    source : str
        Human-readable origin, e.g. ``"anchor tiles a.tif, b.tif"``.
    """

    transform: Affine
    crs: CRS | None
    source: str

    @property
    def is_pixel_space(self):
        return self.crs is None and self.transform.is_identity

    def facts(self, width, height):
        """Where a ``width x height`` px mosaic lies, as plain data: the
        transform in affine's (and rasterio's) order and in GDAL's
        geotransform order, the bounds, the pixel size and their unit.

        >>> g = Georeference(Affine(0.5, 0, 431000, 0, -0.5, 5800000), CRS.from_epsg(32630), "given")
        >>> f = g.facts(320, 256)
        >>> f["bounds"], f["pixel_size"], f["units"]
        ([431000.0, 5799872.0, 431160.0, 5800000.0], [0.5, 0.5], 'metres')
        >>> f["gdal_geotransform"]
        [431000.0, 0.5, 0.0, 5800000.0, 0.0, -0.5]
        """
        t = self.transform
        west, south, east, north = rasterio.transform.array_bounds(height, width, t)
        return {
            "transform": [float(v) for v in tuple(t)[:6]],
            "transform_order": "affine a, b, c, d, e, f: x = a*col + b*row + c, y = d*col + e*row + f "
                               "(rasterio's order; pixel corners)",
            "gdal_geotransform": [float(v) for v in t.to_gdal()],
            "bounds": None if self.is_pixel_space else [float(west), float(south), float(east), float(north)],
            "pixel_size": list(pixel_size(t)),
            "units": "pixels" if self.is_pixel_space else map_units(self.crs),
            "size_px": [int(width), int(height)],
        }


#: The mosaic in pixel space (no georeferencing found).
PIXEL_SPACE = Georeference(Affine.identity(), None, "none (pixel space)")


@dataclass(frozen=True)
class GeorefSpec:
    """Georeferencing the user gave on the command line or in a script.

    Give ``bounds`` *or* ``origin`` (with ``pixel_size``), and ``crs``.

    Attributes
    ----------
    bounds : (west, south, east, north), optional
    origin : (x, y), optional
        Map coordinate of the mosaic's upper-left corner.
    pixel_size : (size_x, size_y), optional
        Ground size of one pixel; ``size_y`` positive (rows run south).
    crs : str or CRS, optional
    gcps : path-like, optional
        Ground control CSV (``tile,col,row,x,y``), see :mod:`stitch.control`.
    similarity : bool
        Fit control points with 4 parameters instead of 6.
    """

    bounds: tuple[float, float, float, float] | None = None
    origin: tuple[float, float] | None = None
    pixel_size: tuple[float, float] | None = None
    crs: str | CRS | None = None
    gcps: str | None = None
    similarity: bool = False

    def __post_init__(self):
        given = [name for name, v in (("--bounds", self.bounds), ("--origin", self.origin), ("--gcps", self.gcps))
                 if v is not None]
        if len(given) > 1:
            raise OptionError(f"give one of --bounds, --origin or --gcps, not {' and '.join(given)}")
        if self.gcps is not None and self.crs is None:
            raise OptionError("--gcps needs --crs, the CRS of the control points' map coordinates")
        if self.origin is not None and self.pixel_size is None:
            raise OptionError("--origin needs --pixel-size")
        if self.pixel_size is not None and self.origin is None:
            raise OptionError("--pixel-size needs --origin")
        if self.bounds is not None:
            w, s, e, n = self.bounds
            if not all(map(math.isfinite, self.bounds)) or not (e > w and n > s):
                raise OptionError(f"--bounds must be WEST SOUTH EAST NORTH with east > west and north > south, got {self.bounds}")
        if self.pixel_size is not None:
            if not all(math.isfinite(v) and v > 0 for v in self.pixel_size):
                raise OptionError(f"--pixel-size must be positive, got {self.pixel_size}")
        if (self.bounds is not None or self.origin is not None) and self.crs is None:
            raise OptionError("--bounds and --origin need --crs (e.g. --crs EPSG:32633)")
        if self.crs is not None:
            _check_units(self, parse_crs(self.crs))

    @property
    def is_empty(self):
        return self.bounds is None and self.origin is None and self.gcps is None


def parse_crs(value):
    """A :class:`rasterio.crs.CRS` from an EPSG code, WKT or PROJ string.

    Examples
    --------
    >>> parse_crs("EPSG:4326").to_epsg()
    4326
    """
    if value is None or isinstance(value, CRS):
        return value
    text = str(value).strip()
    if text.isdigit():
        raise OptionError(f"--crs {value!r} is a bare number; write the authority too, as EPSG:{text}")
    try:
        with rasterio.Env():  # GDAL's messages go to the log, not the screen
            return CRS.from_user_input(value)
    except CRSError as exc:
        reason = str(exc).split(". ")[0].rstrip(".")  # GDAL's first sentence; PROJ's detail and codes follow
        reason = reason[:1].lower() + reason[1:]
        raise OptionError(f"--crs {value!r} is not a CRS GDAL knows ({reason}); give an EPSG code such as "
                          "EPSG:32633, a WKT or a PROJ string") from None


def _crs_name(crs):
    epsg = crs.to_epsg()
    return f"EPSG:{epsg}" if epsg else "the --crs given"


def _plural(unit):
    """``"metre"`` -> ``"metres"``, ``"US survey foot"`` -> ``"US survey feet"``."""
    return unit[:-4] + "feet" if unit.endswith("foot") else unit + "s"


def describe_extent(facts):
    """One line on where a mosaic lies, from :meth:`Georeference.facts`.

    >>> describe_extent({"bounds": [0.0, 0.0, 10.0, 5.0], "units": "metres", "pixel_size": [0.5, 0.5],
    ...                  "size_px": [20, 10]})
    'west 0, south 0, east 10, north 5 (metres); pixel 0.5 x 0.5; 20 x 10 px'
    """
    w, h = facts["size_px"]
    if facts.get("bounds") is None:
        return f"{w} x {h} px, no map coordinates"
    west, south, east, north = facts["bounds"]
    sx, sy = facts["pixel_size"]
    return (f"west {west:.10g}, south {south:.10g}, east {east:.10g}, north {north:.10g} ({facts['units']}); "
            f"pixel {sx:.6g} x {sy:.6g}; {w} x {h} px")


def map_units(crs):
    """What coordinates in ``crs`` are counted in, for messages: ``"metres"``,
    ``"US survey feet"``, ``"degrees"``, or ``"map units"`` when unknown.

    >>> map_units(CRS.from_epsg(32633)), map_units(CRS.from_epsg(4326)), map_units(None)
    ('metres', 'degrees', 'map units')
    """
    if crs is None:
        return "map units"
    if crs.is_geographic:
        return "degrees"
    return _plural(crs.linear_units) if crs.linear_units and crs.linear_units != "unknown" else "map units"


def _check_units(spec, crs):
    """Refuse coordinates that cannot be in ``crs``'s units: degrees given
    with a projected CRS (a mosaic under one unit across whose numbers all
    lie within longitude and latitude ranges), or numbers beyond longitude
    and latitude ranges with a geographic one (our rule, no source)."""
    if spec.bounds is not None:
        w, s, e, n = spec.bounds
        xs, ys, flag, span = (w, e), (s, n), "--bounds", max(e - w, n - s)
    elif spec.origin is not None:
        xs, ys, flag, span = (spec.origin[0],), (spec.origin[1],), "--origin", max(spec.pixel_size) * 100
    else:
        return
    numbers = " ".join(f"{v:.12g}" for v in (spec.bounds or spec.origin))
    looks_lonlat = all(abs(x) <= 180 for x in xs) and all(abs(y) <= 90 for y in ys)
    if crs.is_projected and looks_lonlat and span < 1:
        unit = map_units(crs)
        raise OptionError(f"{flag} {numbers} look like longitude and latitude, but {_crs_name(crs)} is in {unit}: "
                          f"give {flag} in {unit}, or --crs EPSG:4326 if they are degrees")
    if crs.is_geographic and not (all(abs(x) <= 360 for x in xs) and all(abs(y) <= 90 for y in ys)):
        raise OptionError(f"{flag} {numbers} are not longitude and latitude, but {_crs_name(crs)} is in degrees: "
                          f"give the --crs the numbers are in (e.g. a UTM zone's EPSG code)")


def from_bounds(bounds, width, height, crs):
    """Georeference a ``width x height`` pixel mosaic to fill ``bounds``."""
    w, s, e, n = bounds
    return Georeference(rasterio.transform.from_bounds(w, s, e, n, width, height), parse_crs(crs),
                        f"bounds {w:.12g} {s:.12g} {e:.12g} {n:.12g}")


def from_origin(origin, pixel_size, crs):
    """Georeference from the upper-left corner and the pixel size."""
    x, y = origin
    sx, sy = pixel_size
    return Georeference(rasterio.transform.from_origin(x, y, sx, sy), parse_crs(crs),
                        f"origin {x:.12g} {y:.12g}, pixel size {sx:.12g} x {sy:.12g}")


def _tile_offset(placement, index, tile_w, tile_h):
    return Affine.translation(placement.cols[index] * tile_w, placement.rows[index] * tile_h)


def from_anchors(placement, tileset):
    """Georeference the mosaic from placed tiles that kept their georeferencing.

    Each anchor tile at cell ``(row, col)`` implies a mosaic transform
    ``T_tile * translation(-col * step_x, -row * step_y)``, the step being
    the tile size less any overlap (:attr:`stitch.tiles.TileSet.step`). Anchors must be
    upright and unmirrored in the placement (a turned anchor means the frame
    is wrong), share a CRS and agree within :data:`ANCHOR_TOLERANCE_PX`.

    Returns
    -------
    Georeference or None
        None when no placed tile carries georeferencing.

    Raises
    ------
    GeoreferenceError
        Anchors disagree (different CRS, pixel size or grid).
    """
    anchors = [i for i, g in enumerate(tileset.georefs) if g is not None and placement.rows[i] >= 0]
    if not anchors:
        return None
    implied = []
    for i in anchors:
        g = tileset.georefs[i]
        if placement.rotations[i] or placement.mirrored[i]:
            raise GeoreferenceError(
                f"anchor tile {tileset.names[i]!r} keeps its georeferencing but was placed turned "
                f"{placement.rotations[i] * 90} degrees{' and mirrored' if placement.mirrored[i] else ''}; "
                "pin it or solve with --rotations 0"
            )
        implied.append(g.transform @ ~_tile_offset(placement, i, *tileset.step))
    ref, ref_i = implied[0], anchors[0]
    ref_crs = tileset.georefs[ref_i].crs
    for t, i in zip(implied[1:], anchors[1:]):
        crs = tileset.georefs[i].crs
        if (crs is None) != (ref_crs is None) or (crs is not None and crs != ref_crs):
            raise GeoreferenceError(
                f"anchor tiles {tileset.names[ref_i]!r} and {tileset.names[i]!r} are in different CRSs "
                f"({ref_crs} vs {crs}); reproject one or remove its georeferencing"
            )
        # Compare where both put the mosaic's corners, in pixels of the first.
        corners = [(0, 0), (placement.shape[1] * tileset.step[0], placement.shape[0] * tileset.step[1])]
        worst_px, worst_map = 0.0, 0.0
        for c in corners:
            a = np.array(ref @ c)
            b = np.array(t @ c)
            back = np.array(~ref @ tuple(b)) - np.array(c)
            worst_px = max(worst_px, float(np.hypot(*back)))
            worst_map = max(worst_map, float(np.hypot(*(a - b))))
        if worst_px > ANCHOR_TOLERANCE_PX:
            raise GeoreferenceError(
                f"anchor tiles {tileset.names[ref_i]!r} and {tileset.names[i]!r} disagree by "
                f"{worst_map:.3f} map units ({worst_px:.2f} px) given their cells in the placement; "
                "their georeferencing or the placement is wrong; pin them or drop one"
            )
    names = ", ".join(tileset.names[i] for i in anchors[:3]) + (" ..." if len(anchors) > 3 else "")
    # Tiles georeferenced by their cache names (stitch.names) say so.
    what = "tile name" if all(tileset.georefs[i].from_name for i in anchors) else "anchor tile"
    return Georeference(ref, ref_crs, f"{what}{'s' if len(anchors) > 1 else ''} {names}")


def anchor_cells(tileset):
    """Relative cells of the tiles that kept georeferencing, checked for agreement.

    Each anchor's upper-left corner, expressed in pixels of the first anchor,
    must fall on the tile grid (whole multiples of the step, within
    :data:`ANCHOR_TOLERANCE_PX`), with the same CRS and pixel size.

    Returns
    -------
    list of (index, row_offset, col_offset)
        Offsets in whole tiles from the first anchor; empty without anchors.

    Raises
    ------
    GeoreferenceError
        Anchors in different CRSs, with different pixel sizes, or off-grid.
    """
    anchors = [i for i, g in enumerate(tileset.georefs) if g is not None]
    if not anchors:
        return []
    first = tileset.georefs[anchors[0]]
    name0 = tileset.names[anchors[0]]
    out = [(anchors[0], 0, 0)]
    for i in anchors[1:]:
        g = tileset.georefs[i]
        name = tileset.names[i]
        if (g.crs is None) != (first.crs is None) or (g.crs is not None and g.crs != first.crs):
            raise GeoreferenceError(
                f"anchor tiles {name0!r} and {name!r} are in different CRSs ({first.crs} vs {g.crs}); "
                "reproject one or remove its georeferencing"
            )
        scale = np.array([[g.transform.a, g.transform.b], [g.transform.d, g.transform.e]])
        scale0 = np.array([[first.transform.a, first.transform.b], [first.transform.d, first.transform.e]])
        if not np.allclose(scale, scale0, rtol=1e-6, atol=0):
            raise GeoreferenceError(
                f"anchor tiles {name0!r} and {name!r} have different pixel sizes "
                f"({first.transform.a:g} x {first.transform.e:g} vs {g.transform.a:g} x {g.transform.e:g}); "
                "resample one or remove its georeferencing"
            )
        col, row = ~first.transform @ (g.transform.c, g.transform.f)
        sx, sy = tileset.step
        tc, tr = col / sx, row / sy
        off_px = float(np.hypot((tc - round(tc)) * sx, (tr - round(tr)) * sy))
        if off_px > ANCHOR_TOLERANCE_PX:
            dx, dy = (np.array(g.transform @ (0, 0)) - np.array(first.transform @ (round(tc) * sx, round(tr) * sy)))
            raise GeoreferenceError(
                f"anchor tiles {name0!r} and {name!r} are not on one tile grid: off by {off_px:.2f} px "
                f"({float(np.hypot(dx, dy)):.3f} map units); fix or remove one's georeferencing"
            )
        out.append((i, int(round(tr)), int(round(tc))))
    return out


def world_file_path(raster_path):
    """Sidecar world-file path: first and last letter of the extension + ``w``.

    Examples
    --------
    >>> world_file_path("mosaic.tif").name
    'mosaic.tfw'

    An upper-case extension gets an upper-case ``W`` (GDAL looks for both
    cases of the whole ending, not a mix):

    >>> world_file_path("UP.TIF").name
    'UP.TFW'
    """
    p = Path(raster_path)
    ext = p.suffix.lstrip(".")
    if len(ext) >= 2:
        w = "W" if ext.isupper() else "w"
        return p.with_suffix(f".{ext[0]}{ext[-1]}{w}")
    return p.with_suffix(".wld")


def prj_path(raster_path):
    """Sidecar CRS file beside a raster and its world file: ``.prj``.

    >>> prj_path("mosaic.tif").name
    'mosaic.prj'
    """
    return Path(raster_path).with_suffix(".prj")


def prj_text(crs):
    """The CRS as a ``.prj`` holds it: WKT1 in the ESRI dialect, which
    desktop GIS readers of world files expect (common practice, no source);
    GDAL and rasterio read it back (:meth:`rasterio.crs.CRS.from_wkt`)."""
    try:
        return crs.to_wkt(version=WktVersion.WKT1_ESRI) + "\n"
    except CRSError:  # a CRS the ESRI dialect cannot express: GDAL's own WKT
        return crs.to_wkt() + "\n"


def world_file_text(transform):
    """The six lines of a world file for ``transform`` (:func:`affine.dumpsw`).

    Lines are A, D, B, E, C, F: x pixel size, the two rotation terms, y pixel
    size (negative for north-up), then the map coordinate of the *centre* of
    the upper-left pixel, which is the corner plus half a pixel.
    """
    # Plain floats: dumpsw writes each term's repr, and a numpy scalar's repr
    # is no number a reader can parse.
    return affine.dumpsw(Affine(*(float(v) for v in tuple(transform)[:6])))


def read_world_file(path):
    """Read a world file into an :class:`~affine.Affine` (corner convention)
    with :func:`affine.loadsw`.

    Raises
    ------
    GeoreferenceError
        Not six numbers, or a degenerate transform.
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="ascii", errors="replace")
    except OSError as exc:
        raise GeoreferenceError(f"cannot read world file {str(path)!r}: {exc.strerror}") from None
    found = len(text.split())
    if found != 6:
        raise GeoreferenceError(f"world file {path.name!r} must hold six numbers, one a line; found {found} values")
    try:
        transform = affine.loadsw(text)
    except ValueError as exc:
        raise GeoreferenceError(f"world file {path.name!r} holds a value that is not a number ({exc})") from None
    if not all(map(math.isfinite, tuple(transform)[:6])):
        raise GeoreferenceError(f"world file {path.name!r} must hold six finite numbers")
    if transform.determinant == 0:
        raise GeoreferenceError(f"world file {path.name!r} has a zero pixel size or collinear axes")
    return transform

