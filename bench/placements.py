"""Fingerprints of the placements the search finds, to prove a change moves nothing.

A refactor or a speed-up of the search should leave every placement bit for
bit as it was. This script runs the search on a fixed set of puzzles, with no
time limit (so the result does not depend on the machine), and prints one
line per puzzle: a SHA-256 of the tile and orientation grids, the total seam
cost (``repr``), the generations run and a hash of the seam agreement. Run it
before and after a change and compare the two outputs with ``diff``.

Puzzles (28 px tiles; images shipped with scikit-image and matplotlib's
sample DEM, as in ``bench/solve.py``):

* the centre crops of ``bench/solve.py`` (18 x 24 tiles where the image is
  large enough), upright and with quarter turns, grid given, greedy and
  evolution (generations capped so the run stays in minutes);
* 10 x 12 crops of four of them with the grid inferred, holes allowed;
* pins: absolute (as ``--pin``) and relative (as anchor tiles);
* mirrored tiles (quarter turns and mirrors);
* the demo folder through :func:`stitch.pipeline.place_tiles` with default
  options (grid inferred, anchors).

    python bench/placements.py > before.txt   # seconds per puzzle go to stderr
    # ... change the code ...
    python bench/placements.py > after.txt && diff before.txt after.txt
    python bench/placements.py --quick   # a third of the puzzles
"""

import argparse
import hashlib
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from solve import TILE, _centre, _open_images, _puzzle  # noqa: E402

from stitch.layout import allowed_orientations  # noqa: E402
from stitch.search import Pins, SearchSettings, search_placement  # noqa: E402
from stitch.seams import score_seams  # noqa: E402

DEMO = Path(__file__).resolve().parents[1] / "demo_tiles"


def _digest(tiles, orientations, cost, generations, agreement):
    h = hashlib.sha256()
    h.update(np.ascontiguousarray(tiles, np.int64).tobytes())
    h.update(np.ascontiguousarray(orientations, np.int64).tobytes())
    a = hashlib.sha256(np.ascontiguousarray(agreement, np.float64).tobytes()).hexdigest()[:12]
    return f"{h.hexdigest()[:16]} cost={cost!r} gen={generations} agree={a}"


def _line(name, res, seconds):
    print(f"{name:<48} {_digest(res.tiles, res.orientations, res.cost, res.generations, res.agreement)}",
          flush=True)
    print(f"{name}: {seconds:.1f} s", file=sys.stderr, flush=True)


def _cases(quick):
    rng = np.random.default_rng(2026)
    images = _open_images()
    names = list(images)[::3] if quick else list(images)
    for name in names:
        img = images[name]
        rows, cols = min(18, img.shape[1] // TILE), min(24, img.shape[2] // TILE)
        img = _centre(img, rows, cols, TILE)
        for turns in (False, True):
            edges, _ = _puzzle(img, rows, cols, TILE, turns, rng)
            orients = allowed_orientations(90, False) if turns else (0,)
            yield f"{name} {'quarter' if turns else 'upright'}", edges, orients, (rows, cols)


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="a third of the puzzles")
    ap.add_argument("--generations", type=int, default=12, help="cap on generations (default 12)")
    args = ap.parse_args()
    gens = args.generations
    for name, edges, orients, shape in _cases(args.quick):
        table = score_seams(edges, orientations=orients)
        for strategy in ("greedy", "evolution"):
            t0 = time.perf_counter()
            res = search_placement(table, shape=shape, orientations=orients, rng=1,
                                   settings=SearchSettings(strategy=strategy, generations=gens))
            _line(f"{name} {strategy}", res, time.perf_counter() - t0)
        if name.startswith("brick"):
            n = table.n_tiles
            pins = Pins((0, 5, 9), (0, 2, 4), (1, 3, 0), absolute=True)
            t0 = time.perf_counter()
            res = search_placement(table, shape=shape, orientations=orients, rng=4, pins=pins,
                                   settings=SearchSettings(generations=gens))
            _line(f"{name} absolute pins", res, time.perf_counter() - t0)
            pins = Pins((n - 1, 3), (0, 1), (0, 2), absolute=False)
            t0 = time.perf_counter()
            res = search_placement(table, orientations=orients, rng=5, pins=pins, holes=True,
                                   settings=SearchSettings(generations=gens))
            _line(f"{name} relative pins, inferred grid", res, time.perf_counter() - t0)
    # Grid inferred (holes allowed) on 10 x 12 crops of four images.
    images = _open_images()
    for name in list(images)[:4]:
        img = _centre(images[name], 10, 12, TILE)
        for turns in (False, True):
            edges, _ = _puzzle(img, 10, 12, TILE, turns, np.random.default_rng(11))
            orients = allowed_orientations(90, False) if turns else (0,)
            table = score_seams(edges, orientations=orients)
            t0 = time.perf_counter()
            res = search_placement(table, orientations=orients, rng=3, holes=True,
                                   settings=SearchSettings(generations=gens))
            _line(f"{name} 10x12 {'quarter' if turns else 'upright'} inferred grid", res, time.perf_counter() - t0)
    # Mirrors: a small crop so the eight orientations stay quick.
    img = _centre(_open_images()["astronaut"], 10, 10, TILE)
    edges, _ = _puzzle(img, 10, 10, TILE, True, np.random.default_rng(7))
    orients = allowed_orientations(90, True)
    table = score_seams(edges, orientations=orients)
    t0 = time.perf_counter()
    res = search_placement(table, shape=(10, 10), orientations=orients, rng=6,
                           settings=SearchSettings(generations=gens))
    _line("astronaut 10x10 quarter turns + mirrors", res, time.perf_counter() - t0)
    # The demo, as `stitch solve demo_tiles` places it.
    from stitch.pipeline import SolveOptions, place_tiles
    from stitch.tiles import read_tileset

    t0 = time.perf_counter()
    placement, res, _, _ = place_tiles(read_tileset(DEMO), SolveOptions())
    _line("demo_tiles, default options", res, time.perf_counter() - t0)
    h = hashlib.sha256(np.stack([placement.rows, placement.cols, placement.orientations]).tobytes()).hexdigest()
    print(f"{'demo_tiles placement (frame chosen)':<48} {h[:16]}")


if __name__ == "__main__":
    main()
