"""Find, read and validate tiles; cut their edge strips; keep surviving georeferencing.

This is the first stage of the pipeline: everything later works on a
:class:`TileSet`, which holds only the tiles' headers and the two-pixel strips
along their sides. Full tiles are read again from disk, one at a time, when the
mosaic is written, so memory stays proportional to the tiles' perimeters.

Side and strip conventions
--------------------------
Sides are numbered clockwise from the top: 0 top, 1 right, 2 bottom, 3 left.
The strip of side ``s`` is taken from the tile turned clockwise by
``(1 - s) % 4`` quarter turns, which brings side ``s`` to the right; the strip
is then the last two columns, shaped ``(length, 2, bands)``: column 0 is the
pixel one step inside the tile, column 1 the boundary pixel, and rows run top
to bottom of the turned tile, which is clockwise around the original tile.
"""

from __future__ import annotations

import logging
import math
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import rasterio
from affine import Affine
from rasterio.crs import CRS
from rasterio.errors import NotGeoreferencedWarning as _GdalNotGeoreferenced
from rasterio.errors import RasterioError

from .errors import RasterReadError, TileSetError
from .orientation import orient

__all__ = [
    "RASTER_SUFFIXES",
    "EdgeStrips",
    "TileGeoref",
    "TileSet",
    "NOISE_LIKE",
    "cut_strips",
    "edge_strips",
    "find_tiles",
    "noise_like",
    "is_own_output",
    "pad_to_cell",
    "partial_sizes",
    "read_masked",
    "read_tile",
    "read_tileset",
    "scan_folder",
    "side_strips",
    "skipped_note",
]

log = logging.getLogger(__name__)

#: File name endings read as tiles (case-insensitive).
RASTER_SUFFIXES = (".tif", ".tiff", ".png", ".jpg", ".jpeg")

#: Sidecar world-file endings GDAL looks for beside each raster kind
#: (GDAL's world-file convention: first and last letter of the extension + "w").
_WORLD_SUFFIXES = {
    ".tif": (".tfw", ".tifw", ".wld"),
    ".tiff": (".tfw", ".tiffw", ".wld"),
    ".png": (".pgw", ".pngw", ".wld"),
    ".jpg": (".jgw", ".jpgw", ".wld"),
    ".jpeg": (".jgw", ".jpegw", ".wld"),
}

#: Endings of sidecar files that belong to tiles (world files, CRS, GDAL's
#: .aux.xml, overviews and masks): not reported as skipped. Any other file
#: that is not a raster is named in a note.
_SIDECARS = {".tfw", ".tifw", ".tiffw", ".pgw", ".pngw", ".jgw", ".jpgw", ".jpegw", ".wld", ".prj", ".xml", ".ovr",
             ".msk"}

#: A tile's edges are noise-like when, in every band, neighbouring boundary
#: pixels differ by at least this factor times the spread of the pixels
#: themselves: independent noise gives sqrt(2) (the variance of a difference
#: of two independent draws is twice theirs, a fact of statistics), any
#: ground detail far less, since neighbouring pixels of a scene are alike.
#: The factor is our choice, no source.
NOISE_LIKE = 1.2

#: Largest tile GDAL may be asked to read, in pixels; larger headers are refused
#: before any pixel is read (a corrupt header can claim terabytes).
MAX_TILE_PIXELS = 64_000_000


def side_strips(pixels, depth=2):
    """The four edge strips of one tile, two pixels deep (or ``depth``).

    Parameters
    ----------
    pixels : ndarray, shape (bands, rows, cols)
    depth : int, optional
        Pixels from the edge inwards; deeper strips are for tiles that
        overlap (:func:`stitch.overlap.overlap_strips`).

    Returns
    -------
    list of ndarray
        For sides 0..3 (top, right, bottom, left) an array shaped
        ``(length, depth, bands)``; the last column is the boundary pixel,
        the one before it the pixel one step inside (see the module notes
        for the row order).
    """
    strips = []
    for side in range(4):
        turned = orient(pixels, (1 - side) % 4)
        strips.append(np.moveaxis(turned[:, :, -depth:], 0, -1))
    return strips


@dataclass(frozen=True)
class TileGeoref:
    """Georeferencing that survived on one tile.

    Attributes
    ----------
    transform : affine.Affine
        Pixel (col, row) of the tile to map coordinates, GDAL's convention.
    crs : rasterio.crs.CRS or None
    source : str
        Where it came from, e.g. ``"GeoTIFF tags"`` or ``"world file a.tfw"``.
    from_name : bool
        True when it comes from the tile's cache name
        (:meth:`stitch.names.NameFinding.tile_georef`), not from the file.
    """

    transform: Affine
    crs: CRS | None
    source: str
    from_name: bool = False


def edge_strips(pixels, mask, depth=2):
    """The four edge strips of one tile and where their pixels are valid.

    Parameters
    ----------
    pixels : ndarray, shape (bands, rows, cols)
    mask : ndarray of bool, shape (rows, cols)
        True where nodata.
    depth : int, optional
        As in :func:`side_strips`.

    Returns
    -------
    strips : list of ndarray
        As :func:`side_strips`.
    valid : list of ndarray of bool
        For sides 0..3, shaped ``(length, depth)``.
    """
    return side_strips(pixels, depth), [v[..., 0] for v in side_strips(~mask[None], depth)]


@dataclass(frozen=True)
class EdgeStrips:
    """The edge strips of every tile, one array per side.

    ``sides[s]`` has shape ``(n_tiles, length, depth, bands)``, the tiles' own
    integer type or float32, with the layout of :func:`side_strips`. ``valid[s]`` has shape
    ``(n_tiles, length, depth)`` and is False where a pixel is nodata or masked.
    ``depth`` is 2, or the overlap for the strips tiles that overlap share
    (``shared``, :func:`stitch.overlap.overlap_strips`): two true neighbours
    then hold the same pixels, not two that continue each other, which
    changes which rows a measure may use and what the footprint rule compares
    (:func:`stitch.seams.usable_rows`, :func:`stitch.seams.footprint_rows`).
    """

    sides: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]
    valid: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]
    shared: bool = False

    @classmethod
    def from_pixels(cls, tiles, valid=None):
        """Edge strips of tiles held in memory.

        ``tiles`` is a sequence of ``(bands, rows, cols)`` arrays of one shape
        (turned or mirrored views are fine); ``valid``, optionally, one
        ``(rows, cols)`` boolean mask per tile (False: nodata). Without it
        every pixel is valid.
        """
        strips = [side_strips(np.ascontiguousarray(t)) for t in tiles]
        sides = tuple(np.stack([st[s] for st in strips]) for s in range(4))
        if valid is None:
            return cls(sides, tuple(np.ones(x.shape[:-1], bool) for x in sides))
        masks = [side_strips(np.ascontiguousarray(m)[None]) for m in valid]
        return cls(sides, tuple(np.stack([mk[s][..., 0] for mk in masks]) for s in range(4)))


@dataclass(frozen=True)
class TileSet:
    """A validated folder of same-shaped tiles, read down to their edges.

    Attributes
    ----------
    folder : Path
    names : tuple of str
        File names relative to ``folder`` (POSIX separators), sorted.
    width, height, count : int
        Pixel size and band count shared by every tile.
    dtype : str
        Shared data type.
    nodata : float or None
        Nodata value of the first tile that declares one.
    georefs : tuple of TileGeoref or None
        Surviving georeferencing per tile.
    edges : EdgeStrips
    blank : ndarray of bool
        True for tiles that are constant or entirely nodata.
    colorinterp : tuple
        Band colour interpretation of the first tile, copied to the mosaic.
    sizes : ndarray of int, shape (n_tiles, 2), or None
        Width and height of each tile file when some are partial edge tiles
        (narrower ones for the last column, shorter ones for the last row, at
        most one corner tile); None when every tile is ``width x height``.
        Partial tiles' edge strips are cut as if the tile were full size,
        with the missing part nodata (see :func:`partial_sizes`).
    skipped : tuple of str
        Files in the folder that are neither rasters nor tiles' sidecars
        (:func:`scan_folder`), for the run's notes.
    overlap : int
        Pixels each tile shares with each neighbour (0: tiles meet edge to
        edge); set once found (:func:`stitch.overlap.find_overlap`).
    tile_names : stitch.names.NameFinding or None
        What the surviving file names say (:func:`stitch.names.with_names`);
        None until read.
    """

    folder: Path
    names: tuple[str, ...]
    width: int
    height: int
    count: int
    dtype: str
    nodata: float | None
    georefs: tuple[TileGeoref | None, ...]
    edges: EdgeStrips
    blank: np.ndarray
    colorinterp: tuple = ()
    sizes: np.ndarray | None = None
    skipped: tuple[str, ...] = ()
    overlap: int = 0
    tile_names: object = None

    @property
    def step(self):
        """``(x, y)`` pixels from one cell's upper-left corner to the next's:
        the tile size less the overlap."""
        return self.width - self.overlap, self.height - self.overlap

    @property
    def partial(self):
        """Boolean mask of partial edge tiles (all False without them)."""
        if self.sizes is None:
            return np.zeros(len(self.names), bool)
        return (self.sizes[:, 0] < self.width) | (self.sizes[:, 1] < self.height)

    def __len__(self):
        return len(self.names)

    @property
    def paths(self):
        """Absolute paths of the tiles, in ``names`` order."""
        return tuple(self.folder / n for n in self.names)

    @property
    def is_square(self):
        return self.width == self.height

    def structureless(self):
        """Boolean mask of tiles whose edges show no structure: blank, or
        noise-like (:data:`NOISE_LIKE`), as open water, haze or an empty sensor
        frame look. No seam can be matched on them."""
        return self.blank | noise_like(self.edges)

    def duplicate_groups(self):
        """Names of non-blank tiles whose four edge strips are identical, grouped.

        Such tiles are interchangeable: no seam can tell them apart.
        """
        groups = {}
        for i in np.flatnonzero(~self.blank):
            key = b"".join(np.ascontiguousarray(self.edges.sides[s][i]).tobytes() for s in range(4))
            groups.setdefault(key, []).append(self.names[i])
        return tuple(tuple(g) for g in groups.values() if len(g) > 1)

    def read(self, index):
        """Read tile ``index`` from disk as ``(bands, rows, cols)``."""
        return read_tile(self.folder / self.names[index])


def is_own_output(path):
    """True for files stitch wrote: mosaics (tagged ``STITCH_CAUTION``) and report files.

    They are never taken as tiles, so a mosaic written into the tile folder
    is not read back on a later run.
    """
    path = Path(path)
    if (path.parent / "summary.json").is_file() and path.name in ("preview.png", "convergence.png"):
        return True
    if path.suffix.lower() in (".tif", ".tiff"):
        try:
            with _open(path) as src:
                return _is_own_mosaic(src)
        except RasterReadError:
            return False
    return False


def _is_own_mosaic(src):
    return "STITCH_CAUTION" in src.tags()


def skipped_note(skipped):
    """One line naming the files a folder holds that are neither tiles nor
    tiles' sidecars, or None.

    >>> skipped_note(("notes.txt", "key.csv"))
    'skipped 2 file(s) that are not rasters: key.csv, notes.txt'
    """
    if not skipped:
        return None
    names = sorted(skipped)
    more = f" and {len(names) - 5} more" if len(names) > 5 else ""
    return f"skipped {len(names)} file(s) that are not rasters: {', '.join(names[:5])}{more}"


def find_tiles(folder, *, recursive=False, exclude=()):
    """Raster files in ``folder`` by their ending, sorted by name.

    Hidden files, stitch's own outputs (see :func:`is_own_output`) and files
    without a raster ending are left out (:func:`scan_folder` also names the
    last).

    Parameters
    ----------
    folder : path-like
    recursive : bool, optional
        Descend into sub-folders.
    exclude : iterable of path-like, optional
        Files never taken as tiles (e.g. the run's own outputs).

    Returns
    -------
    list of Path
    """
    return scan_folder(folder, recursive=recursive, exclude=exclude)[0]


def scan_folder(folder, *, recursive=False, exclude=()):
    """:func:`find_tiles`, and the files it skipped that are neither rasters
    nor tiles' sidecars (relative POSIX names, sorted), for the run's notes.

    Returns
    -------
    (list of Path, tuple of str)
    """
    folder = Path(folder)
    if not folder.is_dir():
        raise TileSetError(f"tile folder {str(folder)!r} does not exist or is not a folder")
    excluded = {Path(p).resolve() for p in exclude}
    pattern = "**/*" if recursive else "*"
    found, others = [], []
    for path in folder.glob(pattern):
        if path.name.startswith(".") or not path.is_file() or path.resolve() in excluded:
            continue
        if path.suffix.lower() not in RASTER_SUFFIXES:
            if path.suffix.lower() not in _SIDECARS:
                others.append(path.relative_to(folder).as_posix())
            continue
        if path.suffix.lower() == ".png" and is_own_output(path):
            continue
        found.append(path)
    return sorted(found, key=lambda p: p.relative_to(folder).as_posix()), tuple(sorted(others))


def gdal_reason(exc, path):
    """GDAL's message for ``exc`` as one clause: without the file name it
    repeats (the error line names the file already) or its closing full
    stop.

    >>> gdal_reason(RasterioError("'a/t.tif' not recognized as being in a supported file format."), "a/t.tif")
    'not recognized as being in a supported file format'
    """
    text = str(exc).strip()
    for name in (f"'{path}'", str(path), f"'{Path(path).name}'", Path(path).name):
        if text.startswith(name):
            text = text[len(name):].lstrip(": ")
            break
    return text.rstrip(". ") or type(exc).__name__


def _open(path):
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", _GdalNotGeoreferenced)
            return rasterio.open(path)
    except RasterioError as exc:
        raise RasterReadError(
            f"cannot read tile {str(path)!r}: {gdal_reason(exc, path)}; remove or replace the file"
        ) from exc


def read_tile(path):
    """Read a tile's pixels as ``(bands, rows, cols)``."""
    with _open(path) as src:
        try:
            return src.read()
        except RasterioError as exc:
            raise RasterReadError(
                f"cannot read pixels of tile {str(path)!r} (truncated or corrupt?): {gdal_reason(exc, path)}; "
                "remove or replace the file"
            ) from exc


def read_masked(path, nodata=None, dtype=None):
    """A tile's pixels and where they are nodata.

    Parameters
    ----------
    path : path-like
    nodata : float, optional
        The set's nodata value, applied when the file declares none.
    dtype : numpy dtype, optional
        Type of the returned pixels (default the file's).

    Returns
    -------
    pixels : ndarray, shape (bands, rows, cols)
    mask : ndarray of bool, shape (rows, cols)
        True where a band is nodata (GDAL's mask), every band holds the set's
        nodata value, or a value is not finite.
    """
    path = Path(path)
    with _open(path) as src:
        try:
            masked = src.read(masked=True)
        except RasterioError as exc:
            raise RasterReadError(
                f"cannot read pixels of tile {path.name!r} (truncated or corrupt?): {gdal_reason(exc, path)}; "
                "remove or replace the file"
            ) from exc
        declared = src.nodata
    pixels = np.asarray(masked.data, dtype=dtype)
    mask = np.ma.getmaskarray(masked).any(axis=0)
    if nodata is not None and declared is None:
        mask |= (pixels == nodata).all(axis=0)
    if pixels.dtype.kind == "f":
        mask |= ~np.isfinite(pixels).all(axis=0)
    return pixels, mask


def _is_usable_transform(t):
    vals = (t.a, t.b, t.c, t.d, t.e, t.f)
    if not all(math.isfinite(v) for v in vals):
        return False
    det = t.a * t.e - t.b * t.d
    return det != 0 and all(abs(v) < 1e12 for v in vals)


def _read_prj(path):
    prj = path.with_suffix(".prj")
    if prj.is_file():
        try:
            return CRS.from_wkt(prj.read_text(errors="replace"))
        except Exception:  # a broken .prj is reported, not fatal
            log.warning("ignoring unreadable CRS file %s", prj)
    return None


def _tile_georef(path, src):
    """Georeferencing GDAL found on an open tile, or None."""
    t = src.transform
    sidecars = [path.with_suffix(s) for s in _WORLD_SUFFIXES.get(path.suffix.lower(), ())]
    sidecars += [path.with_suffix(s.upper()) for s in _WORLD_SUFFIXES.get(path.suffix.lower(), ())]
    if t.is_identity and src.crs is None:
        broken = next((p for p in sidecars if p.is_file()), None)
        if broken is not None:
            log.warning("ignoring world file %s: GDAL could not read it (six numbers, one a line, with non-zero "
                        "pixel sizes); tile %s is treated as unreferenced", broken.name, path.name)
        return None
    if not _is_usable_transform(t):
        log.warning("tile %s has a corrupt geotransform %s; treating it as unreferenced", path.name, tuple(t)[:6])
        return None
    sidecar = next((p for p in sidecars if p.is_file()), None)
    crs = src.crs or _read_prj(path)
    if sidecar is not None and not (path.suffix.lower() in (".tif", ".tiff") and src.tags(ns="")):
        source = f"world file {sidecar.name}"
    else:
        source = "GeoTIFF tags" if path.suffix.lower() in (".tif", ".tiff") else "raster metadata"
    return TileGeoref(transform=t, crs=crs, source=source)


def _describe(shape):
    w, h, count, dtype = shape
    return f"{w}x{h} px, {count} band{'s' if count != 1 else ''}, {dtype}"


def read_tileset(folder, *, recursive=False, exclude=(), progress=None, max_tile_pixels=MAX_TILE_PIXELS):
    """Read every tile in ``folder`` down to its edge strips.

    Parameters
    ----------
    folder : path-like
        Folder holding GeoTIFF, PNG or JPEG tiles.
    recursive : bool, optional
        Also read tiles in sub-folders.
    exclude : iterable of path-like, optional
        Files to leave out (the run's own outputs).
    progress : callable, optional
        Called as ``progress("read", done, total)``.
    max_tile_pixels : int, optional
        Refuse tiles whose header claims more pixels, before reading any.

    Returns
    -------
    TileSet

    Raises
    ------
    TileSetError
        No tiles, or tiles that differ in size, band count or data type.
    RasterReadError
        A file with a raster ending that GDAL cannot read.
    """
    folder = Path(folder)
    paths, skipped = scan_folder(folder, recursive=recursive, exclude=exclude)
    if not paths:
        raise TileSetError(
            f"no tiles in {str(folder)!r}: expected GeoTIFF, PNG or JPEG files "
            f"({', '.join(RASTER_SUFFIXES)})"
        )
    names = tuple(p.relative_to(folder).as_posix() for p in paths)

    # Headers first, so a mixed folder fails before any pixel is read.
    shapes, nodatas, georefs, colorinterp, own = [], [], [], (), []
    for path in paths:
        with _open(path) as src:
            if _is_own_mosaic(src):
                own.append(path)
                continue
            if src.width * src.height > max_tile_pixels:
                raise TileSetError(
                    f"tile {path.name!r} claims {src.width}x{src.height} pixels, more than the "
                    f"{max_tile_pixels:,} a tile may have; remove it, or raise --max-tile-pixels if it is real"
                )
            shapes.append((src.width, src.height, src.count, src.dtypes[0]))
            if len(set(src.dtypes)) > 1:
                raise TileSetError(f"tile {path.name!r} mixes band data types {sorted(set(src.dtypes))}")
            nodatas.append(src.nodata)
            georefs.append(_tile_georef(path, src))
            if not colorinterp:
                colorinterp = tuple(src.colorinterp)
    if own:
        log.info("leaving out %s: written by stitch", ", ".join(p.name for p in own))
        paths = [p for p in paths if p not in own]
        names = tuple(p.relative_to(folder).as_posix() for p in paths)
        if not paths:
            raise TileSetError(f"no tiles in {str(folder)!r}: only mosaics written by stitch")
    counts = {}
    for s in shapes:
        counts[s] = counts.get(s, 0) + 1
    sizes = None
    if len(counts) > 1:
        sizes = partial_sizes(shapes)
        if sizes is None:  # quarter turns may have stored narrow tiles as short ones
            sizes = partial_sizes(shapes, turned=True)
    if len(counts) > 1 and sizes is None:
        common = max(counts, key=counts.get)
        odd = [(n, s) for n, s in zip(names, shapes) if s != common]
        listed = "; ".join(f"{n} ({_describe(s)})" for n, s in odd[:5])
        more = f" and {len(odd) - 5} more" if len(odd) > 5 else ""
        raise TileSetError(
            f"{len(odd)} of {len(names)} tiles differ from the others ({_describe(common)}): "
            f"{listed}{more}; move them out of {str(folder)!r}"
        )
    width, height, count, dtype = shapes[0]
    if sizes is not None:
        width, height = int(sizes[:, 0].max()), int(sizes[:, 1].max())
        log.info("%d partial edge tile(s) beside %dx%d ones",
                 int(((sizes[:, 0] < width) | (sizes[:, 1] < height)).sum()), width, height)
    if width < 2 or height < 2:
        raise TileSetError(f"tiles in {str(folder)!r} are {width}x{height} px; at least 2x2 is needed")
    nodata = next((v for v in nodatas if v is not None), None)

    # Integer strips keep their type (exact in float32 later, and 4x smaller for 8-bit).
    strip_dtype = np.dtype(dtype) if np.dtype(dtype).kind in "iu" else np.dtype(np.float32)
    edges, blank = cut_strips(paths, width, height, count, nodata, strip_dtype, progress=progress)
    if blank.any():
        log.info("%d blank tile(s) (constant or all nodata): %s", blank.sum(),
                 ", ".join(np.asarray(names)[blank][:5]))
    return TileSet(
        folder=folder,
        names=names,
        width=width,
        height=height,
        count=count,
        dtype=dtype,
        nodata=nodata,
        georefs=tuple(georefs),
        edges=edges,
        blank=blank,
        colorinterp=colorinterp,
        sizes=sizes,
        skipped=skipped,
    )


def cut_strips(paths, width, height, count, nodata, dtype, *, depth=2, shared=False, progress=None):
    """Read each tile and cut its edge strips, ``depth`` pixels deep.

    Partial edge tiles are cut from a full ``width x height`` cell with the
    missing part nodata, at its upper left (:func:`pad_to_cell`).

    Returns
    -------
    edges : EdgeStrips
        With the ``shared`` flag (strips that overlapping tiles share).
    blank : ndarray of bool
        Tiles that are constant or entirely nodata.
    """
    n = len(paths)
    sides = [np.empty((n, height if s % 2 else width, depth, count), dtype) for s in range(4)]
    valid = [np.ones((n, height if s % 2 else width, depth), bool) for s in range(4)]
    blank = np.zeros(n, bool)
    for i, path in enumerate(paths):
        pixels, mask = read_masked(path, nodata, dtype)
        good = pixels[:, ~mask]
        if pixels.shape[1:] != (height, width):
            pixels, mask = pad_to_cell(pixels, mask, width, height)
        blank[i] = good.size == 0 or bool(np.all(good.max(axis=1) == good.min(axis=1)))
        for s, (strip, ok) in enumerate(zip(*edge_strips(pixels, mask, depth))):
            sides[s][i] = strip
            valid[s][i] = ok
        if progress is not None:
            progress("read", i + 1, n)
    return EdgeStrips(sides=tuple(sides), valid=tuple(valid), shared=shared), blank


def noise_like(edges):
    """Tiles whose boundary pixels show no spatial structure (see :data:`NOISE_LIKE`).

    Parameters
    ----------
    edges : EdgeStrips

    Returns
    -------
    ndarray of bool, shape (n_tiles,)
        Constant tiles count as noise-like too.
    """
    n, bands = edges.sides[0].shape[0], edges.sides[0].shape[-1]
    step = np.zeros((n, bands))
    count = np.zeros((n, 1))
    steps = np.zeros((n, 1))
    total = np.zeros((n, bands))
    total_sq = np.zeros((n, bands))
    for side, valid in zip(edges.sides, edges.valid):
        x = side[:, :, 1, :].astype(np.float64)
        v = valid[:, :, 1]
        w = v[..., None].astype(np.float64)
        total += (x * w).sum(axis=1)
        total_sq += (x * x * w).sum(axis=1)
        count += w.sum(axis=1)
        pair = (v[:, 1:] & v[:, :-1])[..., None].astype(np.float64)
        step += (np.diff(x, axis=1) ** 2 * pair).sum(axis=1)
        steps += pair.sum(axis=1)
    mean = total / np.maximum(count, 1)
    spread = np.maximum(total_sq / np.maximum(count, 1) - mean**2, 0.0)  # variance of the pixels
    step = step / np.maximum(steps, 1)  # mean squared step between neighbours
    flat = spread <= 1e-12 * np.maximum(mean**2, 1.0)
    return np.all(flat | (step >= NOISE_LIKE**2 * spread), axis=1) | (steps[:, 0] == 0)


def pad_to_cell(pixels, mask, width, height, offset=(0, 0)):
    """A partial edge tile in a full ``width x height`` cell, the rest nodata.

    The raster ends inside a partial tile's cell, so its strips are cut from
    the full cell with the missing part nodata: its outer sides then face only
    the border, by the footprint rule. Upright, the tile's pixels sit at the
    cell's upper left (``offset`` (0, 0)); ``offset`` is the column and row of
    its first pixel when the tile is turned or mirrored in its file.

    Returns
    -------
    pixels : ndarray, shape (bands, height, width)
    mask : ndarray of bool, shape (height, width)
        True where nodata.
    """
    x, y = offset
    rows, cols = pixels.shape[1:]
    full = np.zeros((pixels.shape[0], height, width), pixels.dtype)
    full_mask = np.ones((height, width), bool)
    full[:, y:y + rows, x:x + cols] = pixels
    full_mask[y:y + rows, x:x + cols] = mask
    return full, full_mask


def partial_sizes(shapes, *, turned=False):
    """Tile sizes when a folder is a full-size set plus partial edge tiles, else None.

    Tiled exports end in a narrower right column and a shorter bottom row
    when the raster's size is no multiple of the tile size: tiles of one full
    size ``W x H``, narrower ones ``w x H`` (one width), shorter ones
    ``W x h`` (one height) and at most one corner tile ``w x h``, all with
    the same bands and data type.

    Parameters
    ----------
    shapes : list of (width, height, count, dtype)
    turned : bool, optional
        The tiles may be turned a quarter in their files, so a narrow tile
        can be stored as a short one and the other way round: square full
        tiles, partial tiles with one side ``W`` and the other ``w`` or
        ``h``, at most one corner tile (``w x h`` or ``h x w``).

    Returns
    -------
    ndarray of int, shape (n, 2), or None

    Examples
    --------
    >>> partial_sizes([(64, 64, 3, "uint8"), (20, 64, 3, "uint8"), (64, 9, 3, "uint8"), (20, 9, 3, "uint8")])
    array([[64, 64],
           [20, 64],
           [64,  9],
           [20,  9]])
    >>> partial_sizes([(64, 64, 3, "uint8"), (32, 32, 3, "uint8")]) is None
    True

    A narrow tile stored turned looks like a short one of another height:

    >>> partial_sizes([(64, 64, 1, "uint8"), (20, 64, 1, "uint8"), (64, 20, 1, "uint8"), (64, 9, 1, "uint8")])
    >>> partial_sizes([(64, 64, 1, "uint8"), (20, 64, 1, "uint8"), (64, 20, 1, "uint8"), (64, 9, 1, "uint8")],
    ...               turned=True).shape
    (4, 2)
    """
    if len({(c, d) for _, _, c, d in shapes}) != 1:
        return None
    sizes = np.array([(w, h) for w, h, _, _ in shapes], np.int64)
    big_w, big_h = sizes[:, 0].max(), sizes[:, 1].max()
    full = (sizes[:, 0] == big_w) & (sizes[:, 1] == big_h)
    corner = (sizes[:, 0] < big_w) & (sizes[:, 1] < big_h)
    narrow = (sizes[:, 0] < big_w) & (sizes[:, 1] == big_h)
    short = (sizes[:, 0] == big_w) & (sizes[:, 1] < big_h)
    if not full.any() or corner.sum() > 1:
        return None
    if turned:
        if big_w != big_h:
            return None
        cut = {int(v) for v in sizes[~full].ravel() if v < big_w}  # the partial sides, w and h
        if len(cut) > 2 or (corner.any() and not (narrow | short).any()):
            return None
        if corner.any() and len(cut) == 2 and set(sizes[corner][0].tolist()) != cut:
            return None
        return sizes
    narrow_w = {int(w) for w, h in sizes if w < big_w}
    short_h = {int(h) for w, h in sizes if h < big_h}
    if len(narrow_w) > 1 or len(short_h) > 1:
        return None
    if corner.any() and not (narrow.any() and short.any()):
        return None  # a corner tile comes with a partial column and a partial row
    return sizes
