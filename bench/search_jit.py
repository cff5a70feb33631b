"""What compiling the search loops buys: numba against the same code run as Python.

Runs the greedy placement, one crossover and one local-search pass on the same
puzzle twice, in this process (compiled, after a warm-up call) and in a child
process with ``NUMBA_DISABLE_JIT=1`` (the identical source as plain Python),
and prints the seconds of each and their ratio.

    python bench/search_jit.py            # 18 x 18 tiles of 28 px from skimage's astronaut
    python bench/search_jit.py --tiles 10
    python bench/search_jit.py --quarter  # tiles turned at random, quarter turns allowed
"""

import argparse
import json
import os
import subprocess
import sys
import time

import numpy as np


QUARTER = (0, 1, 2, 3)


def _puzzle(side, quarter=False):
    from skimage import data

    from stitch.seams import score_seams
    from stitch.tiles import EdgeStrips

    img = np.moveaxis(data.astronaut(), -1, 0).astype(np.float32)
    tiles = [img[:, 28 * r:28 * (r + 1), 28 * c:28 * (c + 1)] for r in range(side) for c in range(side)]
    order = np.random.default_rng(0).permutation(len(tiles))
    tiles = [tiles[i] for i in order]
    if quarter:
        turns = np.random.default_rng(1).integers(4, size=len(tiles))
        tiles = [np.ascontiguousarray(np.rot90(t, k, axes=(1, 2))) for t, k in zip(tiles, turns)]
    edges = EdgeStrips.from_pixels(tiles)
    return score_seams(edges, orientations=QUARTER if quarter else (0,))


def _time_kernels(side, repeats, quarter=False):
    from stitch.search import _polish
    from stitch.search.problem import PERMS6, Problem

    p = Problem(_puzzle(side, quarter), QUARTER if quarter else (0,))
    shape = (side, side)
    timings = {}

    def timed(name, fn):
        fn()  # warm-up (compiles when numba is on)
        t0 = time.perf_counter()
        for _ in range(repeats):
            fn()
        timings[name] = (time.perf_counter() - t0) / repeats

    grid = p.greedy(0, shape, 3)
    parts = p.partners(grid)
    timed("greedy", lambda: p.greedy(0, shape, 3))
    timed("crossover", lambda: p.crossover(parts, parts, 1, 0, shape, 0.005, 1))
    timed("swap pass", lambda: p.swap_pass(grid.copy(), 1))
    # 2 x 3 windows with no best buddies, so no window is skipped as settled.
    no_buddies = np.full_like(p.ranking.best_buddies, -1)
    timed("window pass", lambda: _polish.permute_windows(grid.tiles.copy(), grid.orientations.copy(), 2, 3, PERMS6,
                                                         p.lookup, p.fixed, no_buddies))
    return timings


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--tiles", type=int, default=18, help="puzzle side in tiles (default 18)")
    ap.add_argument("--quarter", action="store_true", help="tiles turned at random, quarter turns allowed")
    ap.add_argument("--child", action="store_true", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child:
        print(json.dumps(_time_kernels(args.tiles, 1, args.quarter)))
        return
    compiled = _time_kernels(args.tiles, 5, args.quarter)
    env = dict(os.environ, NUMBA_DISABLE_JIT="1")
    child = [sys.executable, __file__, "--child", "--tiles", str(args.tiles)] + (["--quarter"] if args.quarter else [])
    out = subprocess.run(child, env=env,
                         capture_output=True, text=True, check=True)
    python = json.loads(out.stdout.strip().splitlines()[-1])
    print(f"{args.tiles * args.tiles} tiles, {'quarter turns' if args.quarter else 'upright'}; seconds per call")
    print(f"{'kernel':<12} {'numba':>10} {'python':>10} {'ratio':>8}")
    for k in compiled:
        print(f"{k:<12} {compiled[k]:>10.5f} {python[k]:>10.4f} {python[k] / compiled[k]:>7.0f}x")


if __name__ == "__main__":
    main()
