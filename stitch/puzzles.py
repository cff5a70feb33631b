"""Measure stitch on your own data: cut a raster into tiles, score a placement.

:func:`cut_raster` makes a tile folder with a known answer (optionally
shuffled, turned and stripped of georeferencing); :func:`score_placement`
compares a solution with that answer using the measures of Cho, Avidan &
Freeman (CVPR 2010):

direct comparison
    share of tiles in their correct cell with the correct orientation, the
    cell taken as it stands (the solution's row and column against the
    key's, as the measure is defined);
shifted direct comparison
    the same after the one global shift that suits the solution best (our
    variant: a solution one row down, otherwise right, scores 1 here and 0
    above);
neighbour comparison
    share of true adjacencies kept, with the correct sides facing;
perfect reconstruction
    every tile correct relative to the others (shifted direct comparison 1).

All are independent of a global quarter turn (and mirror) when tiles were
turned and nothing fixes the frame; the neighbour comparison never depends
on the frame.
"""

from __future__ import annotations

import logging
import warnings
from collections import Counter
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import rasterio
from rasterio.errors import NotGeoreferencedWarning as _GdalNotGeoreferenced
from rasterio.errors import RasterioError
from rasterio.windows import Window

from .errors import OptionError, RasterReadError
from .files import atomic_path, check_outputs, write_text_atomic
from .georef import prj_path, prj_text, world_file_path, world_file_text
from .layout import Placement, seam_pairs, write_placement_csv
from .names import DEFAULT_TILE_MATRIX_SET, quadkey, tile_matrix_set
from .orientation import TURN_MODES, unorient

__all__ = ["CutResult", "Scores", "cut_raster", "flight_block_mask", "parse_tile_size", "score_placement"]

log = logging.getLogger(__name__)

_FORMATS = {"tif": ("GTiff", ".tif"), "png": ("PNG", ".png"), "jpg": ("JPEG", ".jpg")}

#: JPEG quality of tiles cut with ``fmt="jpg"``: the libjpeg default, and what
#: tilers commonly write (common practice, no source).
JPEG_QUALITY = 75


@dataclass(frozen=True)
class Scores:
    """Placement accuracy against an answer key (Cho, Avidan & Freeman 2010;
    ``shifted_direct`` is our variant, see the module notes)."""

    direct: float
    neighbor: float
    perfect: bool
    tiles: int
    adjacencies: int
    missing: int
    shifted_direct: float = float("nan")

    def as_dict(self):
        return {"direct": self.direct, "shifted_direct": self.shifted_direct, "neighbour": self.neighbor,
                "perfect": self.perfect, "tiles": self.tiles, "adjacencies": self.adjacencies,
                "missing": self.missing}


@dataclass(frozen=True)
class CutResult:
    """A cut: the answer key and where the tiles went."""

    key: Placement
    folder: Path
    key_path: Path
    georeferenced: tuple[str, ...]
    dropped: tuple[int, int] = (0, 0)
    """Columns and rows of the raster's remainder left out (without ``partial``)."""


def parse_tile_size(text):
    """``"64"`` -> (64, 64); ``"64x48"`` -> (64, 48) as (width, height)."""
    try:
        parts = [int(p) for p in str(text).lower().split("x")]
    except ValueError:
        raise OptionError(f"--tile-size must be PX or WIDTHxHEIGHT in pixels, not {text!r}") from None
    if len(parts) == 1:
        parts = parts * 2
    if len(parts) != 2 or min(parts) < 2:
        raise OptionError(f"--tile-size must be PX or WIDTHxHEIGHT with sizes of at least 2, not {text!r}")
    return parts[0], parts[1]


def _write_tile(path, pixels, profile, transform, crs, driver, *, overwrite):
    with atomic_path(path, overwrite=overwrite) as tmp:
        prof = dict(profile, driver=driver, width=pixels.shape[2], height=pixels.shape[1])
        if driver == "GTiff":
            prof.update(compress="deflate", predictor=3 if np.dtype(pixels.dtype).kind == "f" else 2)
        if driver == "JPEG":
            prof.update(quality=JPEG_QUALITY)
            prof.pop("nodata", None)  # JPEG holds no nodata; the pixels keep their values
        if driver == "GTiff" and transform is not None:
            prof.update(transform=transform, crs=crs)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", _GdalNotGeoreferenced)
            with rasterio.open(tmp, "w", **prof) as dst:
                dst.write(pixels)
        # GDAL's PNG driver keeps metadata in a sidecar; none is wanted here.
        Path(str(tmp) + ".aux.xml").unlink(missing_ok=True)
    if driver != "GTiff" and transform is not None:
        write_text_atomic(world_file_path(path), world_file_text(transform), overwrite=overwrite)
        if crs is not None:
            write_text_atomic(prj_path(path), prj_text(crs), overwrite=overwrite)


def cut_raster(raster, out_dir, tile_size, *, shuffle=False, strip_georef=False, keep_georef=0,
               rotations=0, mirrored=False, fmt="tif", key_path=None, seed=0, overwrite=False, skip_empty=False,
               partial=False, overlap=0, layout="flat", keep_names=0, tile_matrix_set_id=DEFAULT_TILE_MATRIX_SET):
    """Cut a raster into whole tiles and write them with an answer key.

    Parameters
    ----------
    raster : path-like
    out_dir : path-like
        Folder for the tiles (created if missing).
    tile_size : (width, height) or int
    shuffle : bool
        Give tiles position-free names (``tile_0000.tif`` in random order).
    strip_georef : bool
        Drop georeferencing from the tiles...
    keep_georef : int
        ...except from this many tiles chosen at random (they stay upright).
    rotations : {0, 180, 90}
        Store tiles turned at random by half or quarter turns.
    mirrored : bool
        Store tiles mirrored at random.
    fmt : {"tif", "png", "jpg"}
        JPEG tiles are written at :data:`JPEG_QUALITY`, 8-bit only.
    key_path : path-like, optional
        Answer key CSV; default ``out_dir/answer_key.csv``.
    seed : int
    overwrite : bool
    skip_empty : bool
        Do not write tiles that hold only nodata (as tilers skip them); the
        answer key then lists only the tiles written, on the full grid.
    partial : bool
        Keep the raster's remainder as narrower tiles in the last column and
        shorter ones in the last row, as tilers write it (by default it is
        dropped).
    overlap : int
        Pixels each tile repeats of its neighbours, as exports cut with a
        buffer: tiles start every ``tile_size - overlap`` pixels.
    layout : {"flat", "xyz", "tms", "quadkey", "rowcol"}
        How tiles are named: ``flat`` as above; a tile cache's ``z/x/y``
        tree (rows from the top or, ``tms``, from the bottom) or quadkeys,
        for a raster in the tile matrix set's CRS whose pixels and corner
        fall on its tile matrix at some zoom (as a tiler writes it); or
        ``<stem>_<row>_<col>`` from 0 for any raster.
    keep_names : int
        With ``shuffle`` and a layout other than ``flat``: this many tiles
        (at random) keep their name; the others get position-free ones.
    tile_matrix_set_id : str
        OGC identifier of the tile matrix set of ``xyz``, ``tms`` and
        ``quadkey``.

    Returns
    -------
    CutResult
    """
    if isinstance(tile_size, int):
        tile_size = (tile_size, tile_size)
    tw, th = tile_size
    if fmt not in _FORMATS:
        raise OptionError(f"--format must be one of {', '.join(_FORMATS)}, not {fmt!r}")
    if rotations not in TURN_MODES:
        raise OptionError(f"--rotations must be one of {sorted(TURN_MODES)}, not {rotations!r}")
    if rotations == 90 and tw != th:
        raise OptionError("quarter turns need square tiles; use --rotations 180 or a square --tile-size")
    if layout not in LAYOUTS:
        raise OptionError(f"--layout must be one of {', '.join(LAYOUTS)}, not {layout!r}")
    if not 0 <= overlap < min(tw, th):
        raise OptionError(f"--overlap {overlap} must be at least 0 and less than the tile size ({min(tw, th)} px)")
    sx, sy = tw - overlap, th - overlap
    driver, ext = _FORMATS[fmt]
    rng = np.random.default_rng(seed)
    out_dir = Path(out_dir)
    key_path = Path(key_path) if key_path is not None else out_dir / "answer_key.csv"
    try:
        src = rasterio.open(raster)
    except RasterioError as exc:
        raise RasterReadError(f"cannot read raster {str(raster)!r}: {exc}") from exc
    with src:
        if driver == "JPEG" and src.dtypes[0] != "uint8":
            raise OptionError(f"JPEG tiles hold 8-bit pixels, and {str(raster)!r} is {src.dtypes[0]}; "
                              "use --format tif or png")
        if src.width < tw or src.height < th:
            raise OptionError(f"--tile-size {tw}x{th} is larger than {str(raster)!r} ({src.width}x{src.height})")
        # Tiles start every step; each holds `overlap` pixels of the next.
        rows, cols = (src.height - overlap) // sy, (src.width - overlap) // sx
        if partial:
            rows, cols = -(-(src.height - overlap) // sy), -(-(src.width - overlap) // sx)
        dropped = (0, 0) if partial else ((src.width - overlap) % sx, (src.height - overlap) % sy)
        n = rows * cols
        windows = [Window((k % cols) * sx, (k // cols) * sy, min(tw, src.width - (k % cols) * sx),
                          min(th, src.height - (k // cols) * sy)) for k in range(n)]
        # GDAL's dataset mask: 0 where a pixel is nodata in every band.
        empty = (np.array([not src.dataset_mask(window=w).any() for w in windows], bool) if skip_empty
                 else np.zeros(n, bool))
        if empty.all():
            raise OptionError(f"every {tw}x{th} tile of {str(raster)!r} holds only nodata; nothing to cut")
        georeferenced = not (src.transform.is_identity and src.crs is None)
        keep = np.ones(n, bool) if not strip_georef else np.zeros(n, bool)
        if strip_georef and keep_georef:
            pool = np.flatnonzero(~empty) if skip_empty else n
            keep[rng.choice(pool, size=min(keep_georef, int((~empty).sum())), replace=False)] = True
        keep &= georeferenced
        turns = np.asarray(TURN_MODES[rotations])
        rot = np.where(keep, 0, rng.choice(turns, size=n))
        mir = np.where(keep, False, rng.random(n) < 0.5) if mirrored else np.zeros(n, bool)
        order = rng.permutation(n) if shuffle else np.arange(n)
        width = max(4, len(str(n - 1)))
        names = [f"tile_{order[k]:0{width}d}{ext}" if shuffle else f"r{k // cols:03d}_c{k % cols:03d}{ext}"
                 for k in range(n)]
        if layout != "flat":
            named = _layout_names(layout, src, Path(raster).stem, rows, cols, (tw, th), overlap, ext,
                                  tile_matrix_set_id)
            kept = np.ones(n, bool)
            if shuffle:
                kept[:] = False
                pool = np.flatnonzero(~empty)
                kept[rng.choice(pool, size=min(keep_names, len(pool)), replace=False)] = True
            names = [named[k] if kept[k] else names[k] for k in range(n)]
        out_dir.mkdir(parents=True, exist_ok=True)
        written = np.flatnonzero(~empty)
        for k in written:
            (out_dir / names[k]).parent.mkdir(parents=True, exist_ok=True)
        check_outputs([out_dir / names[k] for k in written] + [key_path], overwrite=overwrite)
        profile = {"count": src.count, "dtype": src.dtypes[0], "nodata": src.nodata}
        if skip_empty:
            log.info("skipped %d of %d tiles that hold only nodata", int(empty.sum()), n)
        for k in written:
            window = windows[k]
            upright = src.read(window=window)
            # The key says: mirror (if set) then turn clockwise by rot to get
            # upright, so the file holds the inverse.
            stored = unorient(upright, rot[k], mir[k])
            transform = src.window_transform(window) if keep[k] else None
            _write_tile(out_dir / names[k], np.ascontiguousarray(stored), profile, transform,
                        src.crs if keep[k] else None, driver, overwrite=overwrite)
    w = written
    key = Placement(tuple(names[k] for k in w), (rows, cols), w // cols, w % cols, rot[w], mir[w], np.ones(len(w)))
    write_placement_csv(key, key_path, overwrite=overwrite)
    return CutResult(key, out_dir, key_path, tuple(names[k] for k in w if keep[k]), dropped)


#: ``cut_raster`` layouts: how tiles are named.
LAYOUTS = ("flat", "xyz", "tms", "quadkey", "rowcol")


def _layout_names(layout, src, stem, rows, cols, size, overlap, ext, tms_id):
    """Each cell's name in a cache layout, row-major."""
    if layout == "rowcol":
        return [f"{stem}_{k // cols}_{k % cols}{ext}" for k in range(rows * cols)]
    if overlap:
        raise OptionError(f"--layout {layout}: cache tiles do not overlap; drop --overlap")
    zoom, x0, y0, height = _matrix_cell(src, size, tms_id)
    names = []
    for k in range(rows * cols):
        r, c = y0 + k // cols, x0 + k % cols
        if layout == "xyz":
            names.append(f"{zoom}/{c}/{r}{ext}")
        elif layout == "tms":
            names.append(f"{zoom}/{c}/{height - 1 - r}{ext}")
        else:
            names.append(f"{quadkey(zoom, c, r)}{ext}")
    return names


def _matrix_cell(src, size, tms_id):
    """Zoom, column and row (from the top) of the tile at the raster's upper
    left corner, and the matrix height, for a raster on the tile matrix.

    Raises
    ------
    OptionError
        The raster is not in the matrix set's CRS, or its pixels or corner
        are off every zoom level's tile matrix.
    """
    tms = tile_matrix_set(tms_id)
    epsg = tms.crs.to_epsg()
    if src.crs is None or (epsg is not None and src.crs.to_epsg() != epsg):
        raise OptionError(f"a {tms_id} cache layout needs a raster in EPSG:{epsg}; reproject it onto the tile "
                          "matrix first (gdalwarp or rasterio.warp)")
    t = src.transform
    for zoom in range(tms.minzoom, tms.maxzoom + 1):
        m = tms.matrix(zoom)
        if abs(t.a - m.cellSize * m.tileWidth / size[0]) <= 1e-9 * t.a:
            span_x, span_y = m.cellSize * m.tileWidth, m.cellSize * m.tileHeight
            cx, cy = (t.c - m.pointOfOrigin[0]) / span_x, (m.pointOfOrigin[1] - t.f) / span_y
            if max(abs(cx - round(cx)), abs(cy - round(cy))) * size[0] > 1e-6:
                raise OptionError(f"the raster's upper-left corner is not on a tile corner of {tms_id} zoom "
                                  f"{zoom} (off by {cx - round(cx):+.4f}, {cy - round(cy):+.4f} tiles); warp it "
                                  "onto the tile matrix first")
            return zoom, int(round(cx)), int(round(cy)), m.matrixHeight
    raise OptionError(f"the raster's pixel size ({t.a:.6g}) is not that of {size[0]} px tiles at any zoom level of "
                      f"{tms_id}; warp it onto the tile matrix first")


def to_tile_matrix(src, dst, zoom, *, tile=256, tms_id=DEFAULT_TILE_MATRIX_SET):
    """Warp a georeferenced raster onto a tile matrix at ``zoom``, as a tiler
    does before cutting a cache (then :func:`cut_raster` with ``layout``
    ``"xyz"``): the matrix set's CRS (EPSG:3857 for WebMercatorQuad), pixels of
    the matrix at that zoom for ``tile``-pixel tiles, covering the whole
    tiles that lie entirely inside the raster's footprint (bilinear;
    nothing outside, so no tile holds nodata). Returns ``dst`` and the
    ``(zoom, col, row)`` of its upper-left tile."""
    import morecantile
    from rasterio.warp import Resampling, reproject, transform_bounds

    tms = morecantile.tms.get(tms_id)
    with rasterio.open(src) as s:
        west, south, east, north = transform_bounds(s.crs, "EPSG:4326", *s.bounds)
        first = tms.tile(west, north, zoom)
        last = tms.tile(east, south, zoom)
        c0, r0, c1, r1 = first.x + 1, first.y + 1, last.x - 1, last.y - 1  # whole tiles inside only
        ul = tms.xy_bounds(morecantile.Tile(c0, r0, zoom))
        lr = tms.xy_bounds(morecantile.Tile(c1, r1, zoom))
        cols, rows = (c1 - c0 + 1) * tile, (r1 - r0 + 1) * tile
        transform = rasterio.transform.from_bounds(ul.left, lr.bottom, lr.right, ul.top, cols, rows)
        out = np.zeros((s.count, rows, cols), s.dtypes[0])
        reproject(rasterio.band(s, list(range(1, s.count + 1))), out, dst_transform=transform,
                  dst_crs=f"EPSG:{tms.crs.to_epsg()}", resampling=Resampling.bilinear)
        profile = dict(driver="GTiff", width=cols, height=rows, count=s.count, dtype=s.dtypes[0],
                       crs=f"EPSG:{tms.crs.to_epsg()}", transform=transform)
    with rasterio.open(dst, "w", **profile) as d:
        d.write(out)
    return Path(dst), (zoom, c0, r0)


def flight_block_mask(shape, *, angle=25.0, cover=0.5):
    """Where a turned rectangle lies in a raster: the footprint of a drone
    flight block, as a boolean ``(rows, cols)`` mask.

    A rectangle turned by ``angle`` degrees around the raster's centre, sized
    so that it covers about ``cover`` of the raster (its sides in the
    raster's proportions, the long side stretched by a quarter); outside it
    an orthomosaic holds nodata. For building export-like test folders with
    :func:`cut_raster` and ``skip_empty``.

    Examples
    --------
    >>> m = flight_block_mask((100, 100), angle=0, cover=0.5)
    >>> round(float(m.mean()), 1)
    0.5
    """
    h, w = shape
    yy, xx = np.mgrid[0:h, 0:w]
    cy, cx = (h - 1) / 2, (w - 1) / 2
    t = np.deg2rad(angle)
    u = (xx - cx) * np.cos(t) + (yy - cy) * np.sin(t)
    v = -(xx - cx) * np.sin(t) + (yy - cy) * np.cos(t)
    half_u, half_v = 0.5 * w * np.sqrt(cover) * 1.25, 0.5 * h * np.sqrt(cover) * 0.8
    return (np.abs(u) <= half_u) & (np.abs(v) <= half_v)


def score_placement(solution, key, *, frame="auto"):
    """Direct, neighbour and perfect scores of ``solution`` against ``key``.

    Parameters
    ----------
    solution, key : stitch.layout.Placement
        Matched by tile name; tiles of the key missing from the solution count
        as wrong.
    frame : {"auto", "fixed", "free"}
        Whether a global quarter turn (and mirror) of the whole solution is
        forgiven: "free" always, "fixed" never, "auto" when either placement
        has turned (or mirrored) tiles.

    Returns
    -------
    Scores

    Examples
    --------
    A solution one column to the right of the key, otherwise right:

    >>> key = Placement(("a", "b"), (1, 2), [0, 0], [0, 1], [0, 0], [False, False])
    >>> shifted = Placement(("a", "b"), (1, 3), [0, 0], [1, 2], [0, 0], [False, False])
    >>> s = score_placement(shifted, key)
    >>> s.direct, s.shifted_direct, s.neighbor, s.perfect
    (0.0, 1.0, 1.0, True)
    """
    if frame not in ("auto", "fixed", "free"):
        raise OptionError(f"frame must be auto, fixed or free, not {frame!r}")
    index = {name: i for i, name in enumerate(solution.names)}
    kidx = np.flatnonzero(key.placed)
    n_key = len(kidx)
    if n_key == 0:
        raise OptionError("the answer key places no tile")
    missing = sum(1 for i in kidx if key.names[i] not in index or not solution.placed[index[key.names[i]]])
    free_turn = frame == "free" or (frame == "auto" and (key.rotations.any() or solution.rotations.any()))
    free_mirror = frame == "free" or (frame == "auto" and (key.mirrored.any() or solution.mirrored.any()))

    # Bring the solution into the key's tile order.
    sel = np.array([index.get(key.names[i], -1) for i in kidx])
    has = sel >= 0
    best = best_here = 0
    for m in ((False, True) if free_mirror else (False,)):
        for k in ((0, 1, 2, 3) if free_turn else (0,)):
            sol = solution.turned(k, mirror=m)
            s = np.where(has, sel, 0)
            ok = has & sol.placed[s]
            ok &= (sol.rotations[s] == key.rotations[kidx]) & (sol.mirrored[s] == key.mirrored[kidx])
            deltas = Counter(zip((key.rows[kidx] - sol.rows[s])[ok].tolist(), (key.cols[kidx] - sol.cols[s])[ok].tolist()))
            if deltas:
                best = max(best, deltas.most_common(1)[0][1])
                best_here = max(best_here, deltas.get((0, 0), 0))
    direct = best / n_key

    # Neighbour comparison on seams named by tile names and sides.
    def named(p):
        out = set()
        for a, b, f in seam_pairs(p):
            ea, eb = (p.names[a // 4], a % 4), (p.names[b // 4], b % 4)
            out.add((min(ea, eb), max(ea, eb), int(f)))
        return out

    true_seams = named(key)
    found = named(solution)
    neighbor = len(true_seams & found) / len(true_seams) if true_seams else float(direct == 1.0)
    return Scores(direct=best_here / n_key, neighbor=neighbor, perfect=bool(best == n_key), tiles=n_key,
                  adjacencies=len(true_seams), missing=missing, shifted_direct=direct)
