"""Compiled seam lookups and grid costs (numba), shared by every search kernel.

The seam table travels into the kernels as one :class:`SeamLookup` (numba
compiles named tuples, so each kernel reads ``lookup.candidates`` rather than
``tab[3]``). Orientation codes, side slots and partner codes are those of
:mod:`stitch.orientation`; a partner *code* is ``2 * slot + flip`` (flip:
exactly one of the two tiles mirrored).
"""

from collections import namedtuple

import numpy as np
from numba import njit

from ..orientation import FACE, STEPS, TURN_TO_FACE

__all__ = ["DCOL", "DROW", "SeamLookup", "SideRanking", "facing_back", "fitness", "partners", "seam_cost",
           "side_hole"]

#: Row and column steps for directions 0 up, 1 right, 2 down, 3 left.
DROW = np.array([s[0] for s in STEPS], dtype=np.int64)
DCOL = np.array([s[1] for s in STEPS], dtype=np.int64)

# Numba passes a named tuple of arrays as all their fields (pointers, shapes,
# strides) on every call that is not inlined, and seam_cost is called in the
# innermost loops: the per-slot ranking travels in a tuple of its own, only
# to the kernels that read it (two more arrays in SeamLookup made the swap
# pass about a fifth slower).
SeamLookup = namedtuple("SeamLookup", [
    "blocks",           # (n_blocks, n, n) float32 dense costs, or (1, 1, 1) when not dense
    "block_index",      # (4, 4, 2) int64: block of (side_a, side_b, flip), -1 where they never meet
    "transposed",       # (4, 4, 2) bool: read that block as [j, i]
    "candidates",       # (4 n, k) int64 partner codes per side slot, best first, -1 pads
    "candidate_costs",  # (4 n, k) float32
    "fallback",         # (4 n,) float32: cost of a pair neither side lists
    "dense",            # bool: blocks hold every cost
    "hole",             # (4 n,) float32: cost of a side slot facing an empty cell inside the grid
])
SeamLookup.__doc__ = """Seam costs of a :class:`stitch.seams.SeamTable` laid out for the kernels."""

SideRanking = namedtuple("SideRanking", [
    "second",           # (4 n,) float64: second-best cost per side slot
    "best_buddies",     # (4 n,) int64: partner code of the mutual best match, or -1
])
SideRanking.__doc__ = """Per side slot: second-best cost and best buddy, for the kernels."""


@njit(cache=True, nogil=True)
def seam_cost(lookup, x, ox, d, y, oy):
    """Cost of tile y (orientation oy) lying in direction d of tile x (ox)."""
    a = FACE[ox, d]
    b = FACE[oy, (d + 2) % 4]
    f = 1 if (ox >= 4) != (oy >= 4) else 0
    idx = lookup.block_index[a, b, f]
    if idx < 0:
        return np.inf
    ka = 4 * x + a
    kb = 4 * y + b
    # Read every seam the same way whichever tile asks: a block of a side
    # against the same side holds [i, j] and [j, i] computed apart, and their
    # float32 rounding differs; local searches must see one value or they can
    # cycle.
    if ka > kb:
        x, y, a, b, ka, kb = y, x, b, a, kb, ka
    if lookup.dense:
        if lookup.transposed[a, b, f]:
            return lookup.blocks[idx, y, x]
        return lookup.blocks[idx, x, y]
    cand = lookup.candidates
    for q in range(cand.shape[1]):
        c = cand[ka, q]
        if c == 2 * kb + f:
            return lookup.candidate_costs[ka, q]
        if c < 0:
            break
    for q in range(cand.shape[1]):
        c = cand[kb, q]
        if c == 2 * ka + f:
            return lookup.candidate_costs[kb, q]
        if c < 0:
            break
    return max(lookup.fallback[ka], lookup.fallback[kb])


@njit(cache=True, nogil=True)
def facing_back(ox, d, side, flip):
    """Orientation that makes ``side`` of a new tile face back at tile x
    (x at orientation ``ox``, looking in direction ``d``; ``flip``: exactly
    one of the two mirrored)."""
    return TURN_TO_FACE[(1 if ox >= 4 else 0) ^ flip, side, (d + 2) % 4]


@njit(cache=True, nogil=True)
def partners(gt, go, n):
    """Partner code of every side slot in a grid (-1 on the border or by holes)."""
    p = np.full(4 * n, -1, np.int64)
    nrows, ncols = gt.shape
    for i in range(nrows):
        for j in range(ncols):
            x = gt[i, j]
            if x < 0:
                continue
            ox = go[i, j]
            for d in range(4):
                ni = i + DROW[d]
                nj = j + DCOL[d]
                if ni < 0 or nj < 0 or ni >= nrows or nj >= ncols:
                    continue
                y = gt[ni, nj]
                if y < 0:
                    continue
                oy = go[ni, nj]
                flip = 1 if (ox >= 4) != (oy >= 4) else 0
                p[4 * x + FACE[ox, d]] = 2 * (4 * y + FACE[oy, (d + 2) % 4]) + flip
    return p


@njit(cache=True, nogil=True)
def fitness(gt, go, lookup, bonus):
    """What the search minimises, the sum over seams of ``cost - bonus``, and
    the plain total seam cost, in one pass.

    With every cell filled the seam count is fixed and the first is the total
    seam cost shifted by a constant. With holes, ``bonus`` (a typical cost of
    a plausible seam) keeps the search from scattering holes to drop seams,
    and each side facing an empty cell adds what it costs there
    (:func:`side_hole`).
    """
    nrows, ncols = gt.shape
    objective = 0.0
    total = 0.0
    for i in range(nrows):
        for j in range(ncols):
            x = gt[i, j]
            for d in (1, 2):  # each pair of cells once: to the right, below
                ni = i + DROW[d]
                nj = j + DCOL[d]
                if ni >= nrows or nj >= ncols:
                    continue
                y = gt[ni, nj]
                if x >= 0 and y >= 0:
                    c = seam_cost(lookup, x, go[i, j], d, y, go[ni, nj])
                    objective += c - bonus
                    total += c
                elif x >= 0:
                    objective += side_hole(lookup, x, go[i, j], d)
                elif y >= 0:
                    objective += side_hole(lookup, y, go[ni, nj], (d + 2) % 4)
    return objective, total


@njit(cache=True, nogil=True)
def side_hole(lookup, x, ox, d):
    """Cost of tile x (orientation ox) facing an empty cell in direction d
    (``lookup.hole``; zero without nodata)."""
    return lookup.hole[4 * x + FACE[ox, d]]
