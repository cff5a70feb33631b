"""Write the mosaic: a tiled, compressed GeoTIFF, its world file and ``.prj``.

The mosaic is written tile by tile into windows of the output, each tile read
from disk and turned as the placement says, so memory holds one tile at a
time whatever the mosaic's size.
"""

from __future__ import annotations

import contextlib
import logging
import warnings
from pathlib import Path

import numpy as np
import rasterio
from rasterio.enums import ColorInterp, Resampling
from rasterio.errors import NotGeoreferencedWarning as _GdalNotGeoreferenced
from rasterio.errors import RasterioError
from rasterio.shutil import copy as rio_copy
from rasterio.windows import Window

from . import __version__
from .errors import OutputError
from .files import atomic_path, retire, write_text_atomic
from .georef import prj_path, prj_text, world_file_path, world_file_text
from .orientation import orient

__all__ = ["CAUTION", "choose_nodata", "hole_marking", "mosaic_profile", "mosaic_size", "write_mosaic"]

log = logging.getLogger(__name__)

#: Shown with every result and stored in the GeoTIFF's metadata.
CAUTION = (
    "A reconstructed mosaic is not survey-grade: check flagged tiles and verify against "
    "control before legal, boundary, engineering or navigation use; local regulations and "
    "licensed survey practice prevail."
)


#: GDAL's block cache while writing (its default is 5 % of RAM): the mosaic is
#: written in row-major order, so a small cache suffices for any size.
GDAL_CACHE_BYTES = 128 * 2**20


def choose_nodata(dtype, tile_nodata, has_holes):
    """Nodata for the mosaic: the tiles' own, else NaN for float holes.

    Integer mosaics with holes and no nodata of their own get an internal
    mask band instead (:func:`hole_marking`): any value of an integer type
    may be a valid pixel (0 in a dark shadow or a water body), and a nodata
    value would mask those too.
    """
    if tile_nodata is not None:
        return tile_nodata
    if has_holes and np.dtype(dtype).kind == "f":
        return float("nan")
    return None


def hole_marking(dtype, tile_nodata, has_holes):
    """How empty cells are marked in the mosaic: ``"none"`` (there are
    none), ``"nodata <value>"`` (the tiles' own nodata, or NaN for floats), or
    ``"internal mask band"`` (GDAL's per-dataset mask, 0 in holes)."""
    if not has_holes:
        return "none"
    nodata = choose_nodata(dtype, tile_nodata, has_holes)
    return "internal mask band" if nodata is None else f"nodata {nodata}"


def mosaic_size(tileset, placement):
    """``(width, height)`` of the mosaic in pixels.

    The grid of full-size cells, except that a last column (row) holding
    only partial edge tiles is as wide (high) as they are, so the mosaic of
    a tiled export has exactly the source raster's size. Cells start every
    :attr:`~stitch.tiles.TileSet.step` pixels, so tiles that overlap their
    neighbours span their shared strips once.
    """
    rows, cols = placement.shape
    sx, sy = tileset.step
    width, height = (cols - 1) * sx + tileset.width, (rows - 1) * sy + tileset.height
    if tileset.sizes is None or not placement.placed.any():
        return width, height
    p = np.flatnonzero(placement.placed)
    w, h = tileset.sizes[p, 0], tileset.sizes[p, 1]
    odd = placement.rotations[p] % 2 == 1
    w, h = np.where(odd, h, w), np.where(odd, w, h)  # as they sit in the mosaic
    last_col = placement.cols[p] == cols - 1
    last_row = placement.rows[p] == rows - 1
    if last_col.any():
        width = (cols - 1) * sx + int(w[last_col].max())
    if last_row.any():
        height = (rows - 1) * sy + int(h[last_row].max())
    return width, height


def mosaic_profile(tileset, placement, georef, nodata):
    """Creation options of the output GeoTIFF."""
    dt = np.dtype(tileset.dtype)
    width, height = mosaic_size(tileset, placement)
    profile = {
        "driver": "GTiff",
        "width": width,
        "height": height,
        "count": tileset.count,
        "dtype": tileset.dtype,
        "crs": georef.crs,
        "transform": georef.transform,
        "nodata": nodata,
        "tiled": True,
        "blockxsize": 256,
        "blockysize": 256,
        "compress": "deflate",
        # Horizontal differencing for integers, floating-point prediction for floats.
        "predictor": 3 if dt.kind == "f" else 2,
        "bigtiff": "if_safer",
        "interleave": "pixel" if tileset.count <= 4 else "band",
    }
    if tileset.count == 3 and dt == np.uint8:
        profile["photometric"] = "rgb"
    return profile


def write_mosaic(tileset, placement, georef, path, *, overwrite=False, overviews=True, cog=False, progress=None):
    """Write the mosaic GeoTIFF and its sidecars.

    Beside a georeferenced mosaic go its world file (``.tfw``) and, when the
    CRS is known, a ``.prj`` holding it, for readers of world files. A mosaic
    in pixel space gets neither: it has no map coordinates to tell, and an
    old world file or ``.prj`` of the same name (replaced with
    ``overwrite``) is removed rather than left describing it.

    Parameters
    ----------
    tileset : stitch.tiles.TileSet
    placement : stitch.layout.Placement
    georef : stitch.georef.Georeference
    path : path-like
        Output GeoTIFF; the sidecars go beside it.
    overwrite : bool, optional
        Replace existing outputs.
    overviews : bool, optional
        Add internal overviews (factors 2, 4, ...) down to about 256 px.
    cog : bool, optional
        Write a Cloud Optimized GeoTIFF through GDAL's COG driver.
    progress : callable, optional
        Called as ``progress("write", done, total)`` per tile written.

    Returns
    -------
    dict
        ``{"mosaic": Path}``, with ``"world_file"`` and ``"prj"`` when written.
    """
    path = Path(path)
    wld = world_file_path(path)
    has_holes = bool(placement.shape[0] * placement.shape[1] > placement.placed.sum())
    nodata = choose_nodata(tileset.dtype, tileset.nodata, has_holes)
    masked = has_holes and nodata is None
    profile = mosaic_profile(tileset, placement, georef, nodata)
    with atomic_path(path, overwrite=overwrite) as final_tmp:
        tmp = final_tmp.with_name(final_tmp.name + ".gtiff") if cog else final_tmp
        try:
            with rasterio.Env(GDAL_CACHEMAX=GDAL_CACHE_BYTES, GDAL_TIFF_INTERNAL_MASK=True):
                with _gdal_failures(path, "writing"):
                    _write_pixels(tmp, profile, tileset, placement, georef, nodata, has_holes, masked, progress)
                if overviews and not cog:  # the COG driver builds its own
                    _add_overviews(tmp, path)
            if cog:
                _room_for(tmp, path, share=1.4, what="the Cloud Optimized GeoTIFF", new_file=True)
                with rasterio.Env(GDAL_CACHEMAX=GDAL_CACHE_BYTES), _gdal_failures(path, "converting to COG"):
                    rio_copy(tmp, final_tmp, driver="COG", compress="DEFLATE", predictor=profile["predictor"],
                             overview_resampling="average", bigtiff="IF_SAFER")
        except OutputError:
            raise
        except (RasterioError, OSError) as exc:
            detail = str(exc).replace(f"{tmp}: ", "").replace(f"{tmp.name}: ", "")
            raise OutputError(f"cannot write mosaic {str(path)!r}: {detail} (is the disk full or a file-size "
                              "limit reached?)") from exc
        finally:
            if cog:
                tmp.unlink(missing_ok=True)
    outputs = {"mosaic": path}
    if not georef.is_pixel_space:
        outputs["world_file"] = write_text_atomic(wld, world_file_text(georef.transform), overwrite=overwrite)
    else:
        retire(wld, overwrite=overwrite)
    if georef.crs is not None:
        outputs["prj"] = write_text_atomic(prj_path(path), prj_text(georef.crs), overwrite=overwrite)
    else:
        retire(prj_path(path), overwrite=overwrite)
    log.info("wrote %s (%d x %d px)%s", path, profile["width"], profile["height"],
             "".join(f", {p.name}" for k, p in outputs.items() if k != "mosaic"))
    return outputs


def _write_pixels(tmp, profile, tileset, placement, georef, nodata, has_holes, masked, progress):
    """Write every placed tile into its window of a new GeoTIFF at ``tmp``."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", _GdalNotGeoreferenced)
        with rasterio.open(tmp, "w", **profile) as dst:
            if has_holes and nodata is not None:
                _fill_nodata(dst, nodata)
            if masked:
                _clear_mask(dst)
            done = 0
            # Row-major cell order: each output block is finished before the
            # writer moves on, so GDAL's cache stays small. Where tiles
            # overlap, the shared strip is written twice and the later tile
            # (right of, or below, the other) is kept.
            placed = np.flatnonzero(placement.placed)
            order = placed[np.lexsort((placement.cols[placed], placement.rows[placed]))]
            sx, sy = tileset.step
            for i in order:
                pixels = orient(tileset.read(i), placement.rotations[i], placement.mirrored[i])
                window = Window(placement.cols[i] * sx, placement.rows[i] * sy, pixels.shape[2], pixels.shape[1])
                dst.write(pixels, window=window)
                if masked:
                    dst.write_mask(np.full(pixels.shape[1:], 255, np.uint8), window=window)
                done += 1
                if progress is not None:
                    progress("write", done, len(order))
            if tileset.colorinterp and len(tileset.colorinterp) == tileset.count \
                    and not (tileset.count == 3 and profile.get("photometric") == "rgb"):
                dst.colorinterp = [c if isinstance(c, ColorInterp) else ColorInterp(c)
                                   for c in tileset.colorinterp]
            dst.update_tags(
                TIFFTAG_SOFTWARE=f"stitch {__version__}",
                TIFFTAG_IMAGEDESCRIPTION="Mosaic rebuilt from unreferenced tiles. " + CAUTION,
                STITCH_CAUTION=CAUTION,
                STITCH_GEOREFERENCE=georef.source,
            )


def _add_overviews(tmp, path):
    """Internal overviews (factors 2, 4, ... down to about 256 px), built only
    on a mosaic written without error and when the disk has room for them."""
    with rasterio.open(tmp) as src:
        width, height = src.width, src.height
    factors = []
    f = 2
    while max(width, height) / f >= 256:
        factors.append(f)
        f *= 2
    if not factors:
        return
    _room_for(tmp, path, share=0.4, what="overviews")
    with _gdal_failures(path, "building overviews"), rasterio.open(tmp, "r+") as dst:
        dst.build_overviews(factors, Resampling.average)
        dst.update_tags(ns="rio_overview", resampling="average")


def _room_for(tmp, path, *, share, what, new_file=False):
    """Refuse before GDAL runs out of room: ``share`` of the file's size must
    fit on its disk and, added to it (or as a ``new_file``), under the
    process's file-size limit."""
    import resource
    import shutil

    size = tmp.stat().st_size
    need = int(size * share) + 2**20
    free = shutil.disk_usage(tmp.parent).free
    limit = resource.getrlimit(resource.RLIMIT_FSIZE)[0]
    if need > free:
        raise OutputError(f"cannot write mosaic {str(path)!r}: {what} need about {need / 2**20:.0f} MB and "
                          f"{free / 2**20:.0f} MB are free; free some space or write elsewhere")
    if limit != resource.RLIM_INFINITY and (need if new_file else size + need) > limit:
        raise OutputError(f"cannot write mosaic {str(path)!r}: {what} would pass this process's file-size limit "
                          f"({limit / 2**20:.1f} MB, ulimit -f); raise the limit")


class _Collect(logging.Handler):
    def __init__(self):
        super().__init__(level=logging.INFO)
        self.messages = []

    def emit(self, record):
        msg = record.getMessage()
        if "signalled an error" in msg:
            self.messages.append(msg)


@contextlib.contextmanager
def _gdal_failures(path, stage):
    """Turn GDAL errors rasterio only logs (a full disk found when blocks are
    flushed, on close) into an :class:`OutputError`; GDAL's messages go to the
    debug log, not the screen."""
    logger = logging.getLogger("rasterio._err")
    collect = _Collect()
    level, propagate = logger.level, logger.propagate
    logger.addHandler(collect)
    logger.setLevel(logging.INFO)
    logger.propagate = False
    try:
        yield
    finally:
        logger.removeHandler(collect)
        logger.setLevel(level)
        logger.propagate = propagate
        for msg in collect.messages:
            log.debug("GDAL while %s %s: %s", stage, path, msg)
    if collect.messages:
        first = collect.messages[0].split("msg=", 1)[-1].strip("'")
        raise OutputError(f"cannot write mosaic {str(path)!r} ({stage}): GDAL reported {first!r}; "
                          "is the disk full or a file-size limit reached?")


def _clear_mask(dst):
    """Set the whole dataset mask to 0 (hole), one block row at a time."""
    block = 256
    for row in range(0, dst.height, block):
        h = min(block, dst.height - row)
        dst.write_mask(np.zeros((h, dst.width), np.uint8), window=Window(0, row, dst.width, h))


def _fill_nodata(dst, nodata):
    """Initialise the whole raster to nodata, one block row at a time."""
    block = 256
    for row in range(0, dst.height, block):
        h = min(block, dst.height - row)
        arr = np.full((dst.count, h, dst.width), nodata, dtype=dst.dtypes[0])
        dst.write(arr, window=Window(0, row, dst.width, h))
