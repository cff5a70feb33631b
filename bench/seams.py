"""Seam table speed, memory and accuracy per measure.

Speed: seconds and peak traced memory of ``score_seams`` for N tiles of
28 px RGB (and 256 px), upright and with quarter turns, beside the time of a
plain float32 ``A @ B.T`` doing the same number of products of the same shapes
as the measure's blocks (N x F by F x N; F = L B + 2 for SSD and
2 B^2 + 2 L B + 2 for MGC), measured in the same run. The prediction-based
measure does not expand into products; it is timed where it takes under a
minute, and otherwise its time is extrapolated from the measured rate.

Accuracy: share of true neighbours ranked first among a side's candidates, on
open images bundled with scikit-image (camera, coffee, astronaut: CC0/public
domain; grass, gravel, brick: repetitive textures) and matplotlib's sample DEM.

    python bench/seams.py              # everything (several minutes)
    python bench/seams.py --quick      # N = 400 and accuracy only
"""

import argparse
import time
import tracemalloc

import numpy as np

from stitch.layout import allowed_orientations
from stitch.seams import count_blocks, score_seams
from stitch.tiles import EdgeStrips

MEASURES = ("ssd", "mgc", "prediction", "mgc+prediction")


def _edges_from_tiles(tiles):
    return EdgeStrips.from_pixels(tiles)


def _random_edges(n, size, rng):
    sides = tuple(rng.normal(120, 40, (n, size, 2, 3)).astype(np.float32) for _ in range(4))
    return EdgeStrips(sides, tuple(np.ones(x.shape[:-1], bool) for x in sides))


def _plain_matmul(n, width, blocks, rng):
    a = rng.normal(size=(n, width)).astype(np.float32)
    b = rng.normal(size=(n, width)).astype(np.float32)
    t0 = time.perf_counter()
    for _ in range(blocks):
        a @ b.T
    return time.perf_counter() - t0


_WIDTH = {"ssd": lambda size, b: size * b + 2, "mgc": lambda size, b: 2 * b * b + 2 * size * b + 2}


def speed(configs, measures):
    rng = np.random.default_rng(0)
    score_seams(_random_edges(20, 28, rng), measure="prediction")  # compile the kernel first
    print("| tiles | px | turns | measure | seconds | peak MB | A@B.T s | ratio |")
    print("|---:|---:|---|---|---:|---:|---:|---:|")
    rate = None  # seconds per (pair x row) of the prediction measure, once measured
    for n, size in configs:
        edges = _random_edges(n, size, rng)
        for turns, orients in (("upright", (0,)), ("quarter", allowed_orientations(90, False))):
            nb = count_blocks(orients)
            work = n * n * nb * size
            for m in measures:
                if m in ("prediction", "mgc+prediction") and rate is not None and rate * work > 60:
                    print(f"| {n} | {size} | {turns} | {m} | ~{rate * work:.0f} (extrapolated) | | | |")
                    continue
                tracemalloc.start()
                t0 = time.perf_counter()
                score_seams(edges, orientations=orients, measure=m)
                dt = time.perf_counter() - t0
                peak = tracemalloc.get_traced_memory()[1] / 2**20
                tracemalloc.stop()
                if m == "prediction":
                    rate = dt / work
                if m in _WIDTH:
                    ref = _plain_matmul(n, _WIDTH[m](size, 3), nb, rng)
                    print(f"| {n} | {size} | {turns} | {m} | {dt:.2f} | {peak:.0f} | {ref:.3f} | {dt / ref:.1f}x |",
                          flush=True)
                else:
                    print(f"| {n} | {size} | {turns} | {m} | {dt:.2f} | {peak:.0f} | | |", flush=True)


def _images():
    from matplotlib import cbook
    from skimage import data

    out = {}
    for name in ("camera", "coffee", "astronaut", "grass", "gravel", "brick"):
        img = getattr(data, name)()
        out[name] = img[None] if img.ndim == 2 else np.moveaxis(img, -1, 0)
    with cbook.get_sample_data("jacksboro_fault_dem.npz") as dem:
        out["jacksboro DEM"] = np.asarray(dem["elevation"])[None]
    return out


def accuracy(measures, tile=28):
    print()
    print("share of true neighbours ranked first (both directions of every true seam)")
    print("| image | turns | " + " | ".join(measures) + " |")
    print("|---|---|" + "---:|" * len(measures))
    totals = {}
    for name, img in _images().items():
        rows, cols = img.shape[1] // tile, img.shape[2] // tile
        tiles = [img[:, r * tile:(r + 1) * tile, c * tile:(c + 1) * tile].astype(np.float32)
                 for r in range(rows) for c in range(cols)]
        edges = _edges_from_tiles(tiles)
        idx = np.arange(rows * cols).reshape(rows, cols)
        # True seams: right side (1) of a with left side (3) of b; bottom (2) with top (0).
        pairs = [(4 * idx[:, :-1].ravel() + 1, 4 * idx[:, 1:].ravel() + 3),
                 (4 * idx[:-1, :].ravel() + 2, 4 * idx[1:, :].ravel() + 0)]
        for turns, orients in (("upright", (0,)), ("quarter", allowed_orientations(90, False))):
            cells = []
            for m in measures:
                t = score_seams(edges, orientations=orients, measure=m)
                hits = total = 0
                for a, b in pairs:
                    hits += int(np.sum(t.candidates[a, 0] == 2 * b)) + int(np.sum(t.candidates[b, 0] == 2 * a))
                    total += 2 * len(a)
                acc = hits / total
                totals.setdefault((turns, m), []).append(acc)
                cells.append(f"{acc:.3f}")
            print(f"| {name} | {turns} | " + " | ".join(cells) + " |", flush=True)
    for turns in ("upright", "quarter"):
        print(f"| **mean** | {turns} | " + " | ".join(f"**{np.mean(totals[(turns, m)]):.3f}**" for m in measures) + " |")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="N = 400 and accuracy only")
    ap.add_argument("--skip-speed", action="store_true")
    ap.add_argument("--skip-accuracy", action="store_true")
    args = ap.parse_args()
    configs = [(400, 28)] if args.quick else [(400, 28), (2500, 28), (10000, 28), (1000, 256)]
    if not args.skip_speed:
        speed(configs, MEASURES)
    if not args.skip_accuracy:
        accuracy(MEASURES)


if __name__ == "__main__":
    main()
