"""Peak memory of writing a large mosaic (bounded-memory check).

Writes N tiles of SIZE x SIZE RGB uint8 (a generated gradient with noise) into
a scratch folder, reads them as a tile set and writes the mosaic with
:func:`stitch.mosaic.write_mosaic` in their true placement; prints the
mosaic's size, the seconds and the peak resident memory of the process
(``ru_maxrss``). The default, 10,000 tiles of 256 px, makes a 1.97 GB mosaic.

    python bench/memory.py [--tiles 10000] [--size 256] [--keep DIR]

Run it as ``/usr/bin/time -v python bench/memory.py`` to see the same peak
from outside.
"""

import argparse
import math
import resource
import shutil
import tempfile
import time
from pathlib import Path

import numpy as np
import rasterio
from rasterio.transform import from_origin


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--tiles", type=int, default=10_000)
    ap.add_argument("--size", type=int, default=256)
    ap.add_argument("--keep", type=Path, help="write here and keep the files")
    args = ap.parse_args()
    side = int(math.isqrt(args.tiles))
    n = side * side
    work = args.keep or Path(tempfile.mkdtemp(prefix="stitch-mem-"))
    tiles = work / "tiles"
    tiles.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(0)
    t0 = time.perf_counter()
    profile = dict(driver="GTiff", width=args.size, height=args.size, count=3, dtype="uint8")
    yy, xx = np.mgrid[0:args.size, 0:args.size]
    for k in range(n):
        r, c = divmod(k, side)
        base = np.stack([(xx + c * 7) % 256, (yy + r * 5) % 256, (xx + yy + k) % 256]).astype(np.uint8)
        base = base ^ rng.integers(0, 8, base.shape, dtype=np.uint8)
        with rasterio.open(tiles / f"r{r:03d}_c{c:03d}.tif", "w", **profile) as dst:
            dst.write(base)
    print(f"wrote {n} tiles in {time.perf_counter() - t0:.0f} s")

    from stitch.georef import Georeference
    from stitch.layout import Placement
    from stitch.mosaic import write_mosaic
    from stitch.tiles import read_tileset

    rss0 = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    t0 = time.perf_counter()
    ts = read_tileset(tiles)
    t_read = time.perf_counter() - t0
    rows = np.array([int(nm[1:4]) for nm in ts.names])
    cols = np.array([int(nm[6:9]) for nm in ts.names])
    placement = Placement(ts.names, (side, side), rows, cols, np.zeros(n, int), np.zeros(n, bool))
    georef = Georeference(from_origin(431000.0, 5800000.0, 0.1, 0.1), rasterio.crs.CRS.from_epsg(32630), "bench")
    t0 = time.perf_counter()
    out = write_mosaic(ts, placement, georef, work / "mosaic.tif", overwrite=True)["mosaic"]
    t_write = time.perf_counter() - t0
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    raw = side * args.size * side * args.size * 3 / 2**30
    print(f"mosaic {side * args.size} x {side * args.size} px RGB = {raw:.2f} GiB raw, "
          f"{out.stat().st_size / 2**30:.2f} GiB on disk")
    print(f"read tile set {t_read:.0f} s, write mosaic {t_write:.0f} s")
    print(f"peak RSS {peak:.0f} MiB (before reading tiles: {rss0:.0f} MiB)")
    if args.keep is None:
        shutil.rmtree(work)


if __name__ == "__main__":
    main()
