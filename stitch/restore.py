"""Write a tile folder back under the tiles' recovered names.

What the user of a scrambled cache wants back is usually the cache itself:
every placed tile under the name its cell has in the scheme the surviving
names follow (:func:`stitch.names.restored_names`): the ``z/x/y`` tree,
quadkeys, or ``<base>_<row>_<col>``. Tiles are copied byte for byte; only a
tile the placement turned or mirrored is written anew, upright, in its own
format (lossless for PNG and GeoTIFF; JPEG at :data:`REENCODE_JPEG_QUALITY`),
and the list says so. Files land through :func:`stitch.files.atomic_path`,
so inside a staged run they appear with the mosaic or not at all; an
existing file is replaced only with ``overwrite``.
"""

from __future__ import annotations

import csv
import io
import shutil
import warnings
from dataclasses import dataclass
from pathlib import Path, PurePosixPath

import numpy as np
import rasterio

from .errors import OptionError, OutputError
from .files import atomic_path, write_text_atomic
from .names import restored_names
from .orientation import orient

__all__ = ["REENCODE_JPEG_QUALITY", "RestoredTile", "check_restore_dir", "restore_tiles", "write_restore_list"]

#: JPEG quality of a tile that had to be turned upright before restoring.
REENCODE_JPEG_QUALITY = 95

_DRIVERS = {".png": "PNG", ".jpg": "JPEG", ".jpeg": "JPEG", ".tif": "GTiff", ".tiff": "GTiff"}


@dataclass(frozen=True)
class RestoredTile:
    """One tile written back: where from, under which name, how sure."""

    source: str
    name: str
    confidence: float
    flagged: bool
    copied: bool
    """True when the bytes were copied unchanged, False when turned upright
    and written anew."""


def check_restore_dir(restore_dir, tiles_dir, *, overwrite=False):
    """Refuse, before any work, a restore folder that is the tile folder or
    inside it (the inputs are never changed), or one that already holds
    files, without ``overwrite``.

    Raises
    ------
    OptionError
    """
    restore_dir, tiles_dir = Path(restore_dir), Path(tiles_dir)
    r, t = restore_dir.resolve(), tiles_dir.resolve()
    if r == t or t in r.parents:
        raise OptionError(f"--restore {str(restore_dir)!r} is inside the tile folder {str(tiles_dir)!r}; the "
                          "tiles are never replaced: restore into another folder, then swap the folders yourself")
    if restore_dir.is_file():
        raise OptionError(f"--restore {str(restore_dir)!r} is a file; give a folder")
    if not overwrite and restore_dir.is_dir() and any(restore_dir.iterdir()):
        raise OptionError(f"--restore folder {str(restore_dir)!r} is not empty; give an empty or new folder, or "
                          "--overwrite to replace tiles of the same names there")


def restore_tiles(tileset, placement, restore_dir, *, threshold=0.5, overwrite=False):
    """Write every placed tile into ``restore_dir`` under its recovered name.

    Parameters
    ----------
    tileset : stitch.tiles.TileSet
        With its surviving names read (``tileset.tile_names``).
    placement : stitch.layout.Placement
        With confidence; the named tiles pinned where their names say.
    restore_dir : path-like
        Created if missing.
    threshold : float
        Tiles below this confidence are flagged in the list.
    overwrite : bool

    Returns
    -------
    list of RestoredTile
        In the order of the tile set.

    Raises
    ------
    OptionError
        No tile name survived, so the cells have no names to take.
    """
    finding = tileset.tile_names
    if not finding:
        raise OptionError("--restore: no tile kept its name (z/x/y, quadkey or <base>_<row>_<col>), so no cell "
                          "has a name to restore; keep at least one named tile in the folder")
    suffixes = [PurePosixPath(n).suffix for n in tileset.names]
    targets = restored_names(placement, finding, suffixes)
    restore_dir = Path(restore_dir)
    restore_dir.mkdir(parents=True, exist_ok=True)
    out = []
    conf = np.nan_to_num(placement.confidence, nan=0.0)
    for i, name in targets.items():
        path = restore_dir / name
        path.parent.mkdir(parents=True, exist_ok=True)
        source = tileset.folder / tileset.names[i]
        turned = bool(placement.rotations[i] or placement.mirrored[i])
        with atomic_path(path, overwrite=overwrite) as tmp:
            try:
                if turned:
                    _write_upright(tileset, placement, i, tmp)
                else:
                    shutil.copyfile(source, tmp)
            except OSError as exc:
                raise OutputError(f"cannot write restored tile {str(path)!r}: {exc.strerror or exc}") from exc
        out.append(RestoredTile(tileset.names[i], name, float(conf[i]), bool(conf[i] < threshold), not turned))
    return out


def _write_upright(tileset, placement, i, tmp):
    """Tile ``i`` turned upright, in its own file format, at ``tmp``."""
    source = tileset.folder / tileset.names[i]
    pixels = orient(tileset.read(i), placement.rotations[i], placement.mirrored[i])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # a tile without georeferencing
        with rasterio.open(source) as src:
            profile = {"driver": _DRIVERS.get(source.suffix.lower(), src.driver), "count": src.count,
                       "dtype": src.dtypes[0], "nodata": src.nodata}
        profile.update(width=pixels.shape[2], height=pixels.shape[1])
        if profile["driver"] == "JPEG":
            profile.update(quality=REENCODE_JPEG_QUALITY)
            profile.pop("nodata")
        with rasterio.open(tmp, "w", **profile) as dst:
            dst.write(pixels)
    Path(str(tmp) + ".aux.xml").unlink(missing_ok=True)  # GDAL's PNG metadata sidecar


def write_restore_list(restored, path, *, overwrite=False):
    """The restore list, ``restore.csv``: source, restored name, confidence,
    flagged (check before replacing the cache), copied (bytes unchanged)."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["source", "restored_as", "confidence", "flagged", "copied"])
    for t in sorted(restored, key=lambda t: t.name):
        w.writerow([t.source, t.name, f"{t.confidence:.4f}", int(t.flagged), int(t.copied)])
    return write_text_atomic(path, buf.getvalue(), overwrite=overwrite)
