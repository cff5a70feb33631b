"""Compiled local search (numba): swaps and turns, and window permutations.

Both work in place on a ``(tiles, orientations)`` grid and only accept a
change that lowers the total seam cost; ``fixed[t]`` tiles never move.
"""

import numpy as np
from numba import njit

from ..orientation import FACE
from ._lookup import DCOL, DROW, facing_back, seam_cost, side_hole

__all__ = ["improve", "permute_windows"]


@njit(cache=True, nogil=True)
def _cell_cost(gt, go, i, j, lookup):
    """Cost of the seams around cell (i, j)."""
    nrows, ncols = gt.shape
    x = gt[i, j]
    if x < 0:
        return 0.0
    total = 0.0
    for d in range(4):
        ni = i + DROW[d]
        nj = j + DCOL[d]
        if ni < 0 or nj < 0 or ni >= nrows or nj >= ncols:
            continue
        y = gt[ni, nj]
        if y >= 0:
            total += seam_cost(lookup, x, go[i, j], d, y, go[ni, nj])
        else:
            total += side_hole(lookup, x, go[i, j], d)
    return total


@njit(cache=True, nogil=True)
def _pair_cost(gt, go, i1, j1, i2, j2, lookup):
    """Cost of the seams around two cells, a shared seam counted once."""
    total = _cell_cost(gt, go, i1, j1, lookup) + _cell_cost(gt, go, i2, j2, lookup)
    if abs(i1 - i2) + abs(j1 - j2) == 1 and gt[i1, j1] >= 0 and gt[i2, j2] >= 0:
        for d in range(4):
            if i1 + DROW[d] == i2 and j1 + DCOL[d] == j2:
                total -= seam_cost(lookup, gt[i1, j1], go[i1, j1], d, gt[i2, j2], go[i2, j2])
    return total


@njit(cache=True, nogil=True)
def improve(gt, go, lookup, allowed, fixed, max_passes, per_side):
    """Local search: swap tiles and turn them while the total cost drops.

    Only swaps that bring in a top candidate of a neighbour's facing side are
    tried, so one pass costs O(n) and not O(n^2). ``fixed[t]`` tiles never
    move. Works in place; returns the number of accepted moves.
    """
    nrows, ncols = gt.shape
    n = lookup.fallback.shape[0] // 4
    cand = lookup.candidates
    pos = np.full(n, -1, np.int64)
    for i in range(nrows):
        for j in range(ncols):
            if gt[i, j] >= 0:
                pos[gt[i, j]] = i * ncols + j
    moves = 0
    for _ in range(max_passes):
        changed = 0
        for i in range(nrows):
            for j in range(ncols):
                x = gt[i, j]
                if x < 0 or fixed[x]:
                    continue
                # Turns in place.
                before = _cell_cost(gt, go, i, j, lookup)
                ox = go[i, j]
                best_o = ox
                for o in range(8):
                    if not allowed[o] or o == ox:
                        continue
                    go[i, j] = o
                    c = _cell_cost(gt, go, i, j, lookup)
                    if c < before - 1e-6 * (1.0 + before):
                        before = c
                        best_o = o
                go[i, j] = best_o
                if best_o != ox:
                    changed += 1
                here = before  # cost of cell (i, j) as it now stands
                # Swaps with candidates of the neighbours' facing sides.
                for d in range(4):
                    ni = i + DROW[d]
                    nj = j + DCOL[d]
                    if ni < 0 or nj < 0 or ni >= nrows or nj >= ncols:
                        continue
                    z = gt[ni, nj]
                    if z < 0:
                        continue
                    dz = (d + 2) % 4
                    kz = 4 * z + FACE[go[ni, nj], dz]
                    for q in range(min(per_side, cand.shape[1])):
                        code = cand[kz, q]
                        if code < 0:
                            break
                        y = (code // 2) // 4
                        x = gt[i, j]
                        if y == x or fixed[y] or pos[y] < 0:
                            continue
                        oy = facing_back(go[ni, nj], dz, (code // 2) % 4, code % 2)
                        if not allowed[oy]:
                            continue
                        i2 = pos[y] // ncols
                        j2 = pos[y] % ncols
                        ox = go[i, j]
                        oy_old = go[i2, j2]
                        adjacent = abs(i - i2) + abs(j - j2) == 1
                        if adjacent:
                            before = _pair_cost(gt, go, i, j, i2, j2, lookup)
                        else:
                            before = here + _cell_cost(gt, go, i2, j2, lookup)
                        bar = before - 1e-6 * (1.0 + before)
                        gt[i, j] = y
                        go[i, j] = oy
                        gt[i2, j2] = x
                        best = np.inf
                        best_ox = ox
                        # Apart, the two cells' seams are independent: y's side
                        # alone can rule the swap out (seam costs are >= 0), and
                        # x's turns only change x's side.
                        cy = 0.0 if adjacent else _cell_cost(gt, go, i, j, lookup)
                        if adjacent or cy < bar:
                            for o in range(8):
                                if not allowed[o]:
                                    continue
                                go[i2, j2] = o
                                if adjacent:
                                    c = _pair_cost(gt, go, i, j, i2, j2, lookup)
                                else:
                                    c = cy + _cell_cost(gt, go, i2, j2, lookup)
                                if c < best:
                                    best = c
                                    best_ox = o
                        if best < bar:
                            go[i2, j2] = best_ox
                            pos[y] = i * ncols + j
                            pos[x] = i2 * ncols + j2
                            changed += 1
                            here = _cell_cost(gt, go, i, j, lookup)
                        else:
                            gt[i, j] = x
                            go[i, j] = ox
                            gt[i2, j2] = y
                            go[i2, j2] = oy_old
        moves += changed
        if changed == 0:
            break
    return moves


@njit(cache=True, nogil=True)
def _window_settled(gt, go, r0, c0, h, w, bb):
    """True when every seam inside the window joins mutual best buddies."""
    for i in range(r0, r0 + h):
        for j in range(c0, c0 + w):
            x = gt[i, j]
            if x < 0:
                return False
            ox = go[i, j]
            for d in (1, 2):
                ni = i + DROW[d]
                nj = j + DCOL[d]
                if ni >= r0 + h or nj >= c0 + w:
                    continue
                y = gt[ni, nj]
                if y < 0:
                    return False
                oy = go[ni, nj]
                flip = 1 if (ox >= 4) != (oy >= 4) else 0
                if bb[4 * x + FACE[ox, d]] != 2 * (4 * y + FACE[oy, (d + 2) % 4]) + flip:
                    return False
    return True


@njit(cache=True, nogil=True)
def _window_tables(gt, go, r0, c0, h, w, cells_t, cells_o, lookup, edge, right, below):
    """Seam costs a window's tiles can make, for trying its arrangements.

    ``edge[t, q]``: tile ``t`` of the window (``cells_t[t]`` turned
    ``cells_o[t]``) at window cell ``q`` against the tiles around the window;
    ``right[t, u]`` / ``below[t, u]``: tile ``u`` right of / below tile ``t``.
    An empty cell costs what the sides facing it cost (``lookup.hole``).
    """
    nrows, ncols = gt.shape
    k = h * w
    for t in range(k):
        x = cells_t[t]
        for q in range(k):
            total = 0.0
            if x >= 0:
                i = r0 + q // w
                j = c0 + q % w
                for d in range(4):
                    ni = i + DROW[d]
                    nj = j + DCOL[d]
                    if ni < 0 or nj < 0 or ni >= nrows or nj >= ncols:
                        continue
                    if r0 <= ni < r0 + h and c0 <= nj < c0 + w:
                        continue
                    y = gt[ni, nj]
                    if y >= 0:
                        total += seam_cost(lookup, x, cells_o[t], d, y, go[ni, nj])
                    else:
                        total += side_hole(lookup, x, cells_o[t], d)
            edge[t, q] = total
        for u in range(k):
            y = cells_t[u]
            if u == t or (x < 0 and y < 0):
                right[t, u] = 0.0
                below[t, u] = 0.0
            elif y < 0:  # a tile beside an empty cell of the window
                right[t, u] = side_hole(lookup, x, cells_o[t], 1)
                below[t, u] = side_hole(lookup, x, cells_o[t], 2)
            elif x < 0:
                right[t, u] = side_hole(lookup, y, cells_o[u], 3)
                below[t, u] = side_hole(lookup, y, cells_o[u], 0)
            else:
                right[t, u] = seam_cost(lookup, x, cells_o[t], 1, y, cells_o[u])
                below[t, u] = seam_cost(lookup, x, cells_o[t], 2, y, cells_o[u])


@njit(cache=True, nogil=True)
def _arrangement_cost(p, perms, h, w, edge, right, below):
    k = h * w
    total = 0.0
    for q in range(k):
        t = perms[p, q]
        total += edge[t, q]
        if q % w + 1 < w:
            total += right[t, perms[p, q + 1]]
        if q + w < k:
            total += below[t, perms[p, q + w]]
    return total


@njit(cache=True, nogil=True)
def permute_windows(gt, go, h, w, perms, lookup, fixed, best_buddies):
    """Try every arrangement of the tiles inside each ``h x w`` window.

    Fixes small scrambled blocks that no single swap improves (each swap on
    the way costs more). ``perms`` lists the permutations of ``h * w`` cells
    (the first is the identity). Tiles keep their orientation; windows
    holding fixed tiles, and windows whose inner seams all join best buddies,
    are skipped. Each window's possible seams are looked up once
    (:func:`_window_tables`), so an arrangement costs a few additions. Works
    in place; returns the number of windows rearranged.
    """
    nrows, ncols = gt.shape
    k = h * w
    cells_t = np.empty(k, np.int64)
    cells_o = np.empty(k, np.int64)
    edge = np.empty((k, k))
    right = np.empty((k, k))
    below = np.empty((k, k))
    changed = 0
    for r0 in range(0, nrows - h + 1):
        for c0 in range(0, ncols - w + 1):
            skip = False
            for q in range(k):
                x = gt[r0 + q // w, c0 + q % w]
                cells_t[q] = x
                cells_o[q] = go[r0 + q // w, c0 + q % w]
                if x >= 0 and fixed[x]:
                    skip = True
            if skip or _window_settled(gt, go, r0, c0, h, w, best_buddies):
                continue
            _window_tables(gt, go, r0, c0, h, w, cells_t, cells_o, lookup, edge, right, below)
            best = _arrangement_cost(0, perms, h, w, edge, right, below)
            best_p = -1
            for p in range(1, perms.shape[0]):
                c = _arrangement_cost(p, perms, h, w, edge, right, below)
                if c < best - 1e-6 * (1.0 + abs(best)):
                    best = c
                    best_p = p
            if best_p >= 0:
                for q in range(k):
                    gt[r0 + q // w, c0 + q % w] = cells_t[perms[best_p, q]]
                    go[r0 + q // w, c0 + q % w] = cells_o[perms[best_p, q]]
                changed += 1
    return changed
