"""Compiled placement growth (numba): greedy best-buddy placement and crossover.

Both grow a placement on a canvas of ``(2 R + 1) x (2 C + 1)`` cells around a
seed tile at ``(R, C)`` and never let the placed block grow beyond ``R`` rows
or ``C`` columns; :func:`canvas_to_grid` crops it to ``R x C``. Pinned tiles
arrive as a :class:`PinnedLayout` and are placed before anything else.
"""

from collections import namedtuple

import numpy as np
from numba import njit

from ..orientation import FACE
from ._lookup import DCOL, DROW, facing_back, seam_cost

__all__ = ["PinnedLayout", "canvas_to_grid", "crossover", "greedy"]

PinnedLayout = namedtuple("PinnedLayout", [
    "tiles",         # (p,) int64 pinned tile indices
    "rows",          # (p,) int64 canvas rows
    "cols",          # (p,) int64 canvas columns
    "box",           # (2,) int64: canvas (row, col) of the grid's cell (0, 0) when the frame is fixed, else -1
    "orientations",  # (p,) int64 orientation codes of the pinned tiles
])
PinnedLayout.__doc__ = """Pinned tiles on the growth canvas (see :meth:`stitch.search.Pins.on_canvas`)."""


@njit(cache=True, nogil=True)
def _in_extent(r, c, ext, nrows, ncols, box):
    """May a tile go to canvas cell (r, c)? The placed block must stay within
    ``nrows x ncols``, and inside the fixed box when ``box[0] >= 0``."""
    if box[0] >= 0:
        if r < box[0] or c < box[1] or r >= box[0] + nrows or c >= box[1] + ncols:
            return False
    r0 = min(ext[0], r)
    r1 = max(ext[1], r)
    c0 = min(ext[2], c)
    c1 = max(ext[3], c)
    return (r1 - r0) < nrows and (c1 - c0) < ncols


@njit(cache=True, nogil=True)
def _set(ct, co, ext, cw, cell, tile, o, used):
    ct[cell] = tile
    co[cell] = o
    used[tile] = True
    r = cell // cw
    c = cell % cw
    ext[0] = min(ext[0], r)
    ext[1] = max(ext[1], r)
    ext[2] = min(ext[2], c)
    ext[3] = max(ext[3], c)


@njit(cache=True, nogil=True)
def canvas_to_grid(ct, co, ext, nrows, ncols, cw, box):
    """Crop a canvas to an ``nrows x ncols`` grid of tiles and orientations,
    from the fixed box when there is one, else from the placed block."""
    r0 = box[0] if box[0] >= 0 else ext[0]
    c0 = box[1] if box[0] >= 0 else ext[2]
    ch = ct.shape[0] // cw
    gt = np.full((nrows, ncols), -1, np.int64)
    go = np.zeros((nrows, ncols), np.int64)
    for i in range(nrows):
        for j in range(ncols):
            if r0 + i < ch and c0 + j < cw:
                gt[i, j] = ct[(r0 + i) * cw + c0 + j]
                go[i, j] = co[(r0 + i) * cw + c0 + j]
    return gt, go


@njit(cache=True, nogil=True)
def _start(ct, co, ext, cw, used, nrows, ncols, seed_tile, seed_o, pins):
    """Place the pinned tiles, or else the seed at the canvas centre.

    Returns the number of tiles placed.
    """
    if len(pins.tiles) == 0:
        _set(ct, co, ext, cw, nrows * cw + ncols, seed_tile, seed_o, used)
        return 1
    for q in range(len(pins.tiles)):
        _set(ct, co, ext, cw, pins.rows[q] * cw + pins.cols[q], pins.tiles[q], pins.orientations[q], used)
    return len(pins.tiles)


@njit(cache=True, nogil=True)
def _step(cell, d, cw, ch):
    """Canvas index of the cell next to ``cell`` in direction d, or -1 off the canvas."""
    nr = cell // cw + DROW[d]
    nc = cell % cw + DCOL[d]
    if nr < 0 or nc < 0 or nr >= ch or nc >= cw:
        return -1
    return nr * cw + nc


@njit(cache=True, nogil=True)
def _score_at(ct, co, cw, ch, cell, y, oy, lookup, ranking):
    """Greedy score of tile y (oy) at a free cell: mean confidence of its seams,
    plus 2 when it is the best buddy of every placed neighbour."""
    total = 0.0
    count = 0
    all_bb = True
    for d in range(4):
        nb = _step(cell, d, cw, ch)
        if nb < 0 or ct[nb] < 0:
            continue
        x = ct[nb]
        ox = co[nb]
        dx = (d + 2) % 4
        cost = seam_cost(lookup, x, ox, dx, y, oy)
        kx = 4 * x + FACE[ox, dx]
        sec = ranking.second[kx]
        total += (1.0 - cost / sec) if sec > 0 else (0.0 if cost == 0 else -1.0)
        count += 1
        flip = 1 if (ox >= 4) != (oy >= 4) else 0
        if ranking.best_buddies[kx] != 2 * (4 * y + FACE[oy, d]) + flip:
            all_bb = False
    if count == 0:
        return -np.inf
    s = total / count
    if all_bb:
        s += 2.0
    return s


@njit(cache=True, nogil=True)
def _best_for_cell(ct, co, cw, ch, cell, used, lookup, ranking, allowed, kfree):
    n = used.shape[0]
    cand = lookup.candidates
    best_s = -np.inf
    best_y = -1
    best_o = 0
    seen_any = False
    for d in range(4):
        nb = _step(cell, d, cw, ch)
        if nb < 0 or ct[nb] < 0:
            continue
        x = ct[nb]
        ox = co[nb]
        dx = (d + 2) % 4
        kx = 4 * x + FACE[ox, dx]
        free = 0
        for q in range(cand.shape[1]):
            code = cand[kx, q]
            if code < 0:
                break
            l = code // 2
            y = l // 4
            if used[y]:
                continue
            oy = facing_back(ox, dx, l % 4, code % 2)
            if not allowed[oy]:
                continue
            seen_any = True
            s = _score_at(ct, co, cw, ch, cell, y, oy, lookup, ranking)
            if s > best_s:
                best_s = s
                best_y = y
                best_o = oy
            free += 1
            if free >= kfree:
                break
    if not seen_any:
        # Candidate lists exhausted: look at every free tile.
        for y in range(n):
            if used[y]:
                continue
            for oy in range(8):
                if not allowed[oy]:
                    continue
                s = _score_at(ct, co, cw, ch, cell, y, oy, lookup, ranking)
                if s > best_s or best_y < 0:
                    best_s = s
                    best_y = y
                    best_o = oy
    return best_y, best_o, best_s


@njit(cache=True, nogil=True)
def greedy(seed_tile, seed_o, nrows, ncols, lookup, ranking, allowed, kfree, pins):
    """Greedy best-buddy placement (after Paikin & Tal, CVPR 2015).

    Repeatedly fills the free cell, next to placed tiles, whose best tile
    scores highest: best buddies of all placed neighbours first, then by the
    mean normalised seam confidence. Starts from the pinned tiles, or from the
    seed. Returns ``(tiles, orientations)`` grids.
    """
    n = ranking.second.shape[0] // 4
    ch = 2 * nrows + 1
    cw = 2 * ncols + 1
    ct = np.full(ch * cw, -1, np.int64)
    co = np.zeros(ch * cw, np.int64)
    used = np.zeros(n, np.bool_)
    ext = np.array([ch, -1, cw, -1], np.int64)
    in_fr = np.zeros(ch * cw, np.bool_)
    fr = np.empty(ch * cw, np.int64)
    nfr = 0
    c_t = np.full(ch * cw, -1, np.int64)
    c_o = np.zeros(ch * cw, np.int64)
    c_s = np.full(ch * cw, -np.inf)
    c_ok = np.zeros(ch * cw, np.bool_)
    placed = _start(ct, co, ext, cw, used, nrows, ncols, seed_tile, seed_o, pins)
    new_cells = np.empty(max(placed, 1), np.int64)
    k = 0
    for cell in range(ch * cw):
        if ct[cell] >= 0:
            new_cells[k] = cell
            k += 1
    while True:
        for q in range(k):
            for d in range(4):
                nb = _step(new_cells[q], d, cw, ch)
                if nb < 0 or ct[nb] >= 0:
                    continue
                c_ok[nb] = False
                if not in_fr[nb]:
                    in_fr[nb] = True
                    fr[nfr] = nb
                    nfr += 1
        if placed >= n:
            break
        best_s = -np.inf
        best_cell = -1
        i = 0
        while i < nfr:
            f = fr[i]
            if ct[f] >= 0 or not _in_extent(f // cw, f % cw, ext, nrows, ncols, pins.box):
                in_fr[f] = False
                fr[i] = fr[nfr - 1]
                nfr -= 1
                continue
            if not c_ok[f] or (c_t[f] >= 0 and used[c_t[f]]):
                y, o, sc = _best_for_cell(ct, co, cw, ch, f, used, lookup, ranking, allowed, kfree)
                c_t[f] = y
                c_o[f] = o
                c_s[f] = sc
                c_ok[f] = True
            if c_t[f] >= 0 and (best_cell < 0 or c_s[f] > best_s):
                best_s = c_s[f]
                best_cell = f
            i += 1
        if best_cell < 0:
            break
        _set(ct, co, ext, cw, best_cell, c_t[best_cell], c_o[best_cell], used)
        placed += 1
        new_cells[0] = best_cell
        k = 1
    return canvas_to_grid(ct, co, ext, nrows, ncols, cw, pins.box)


@njit(cache=True, nogil=True)
def _push(ct, co, cw, ch, cell, pa, pb, bb, s1, n1, s2, n2, s3, n3):
    x = ct[cell]
    ox = co[cell]
    for d in range(4):
        nb = _step(cell, d, cw, ch)
        if nb < 0 or ct[nb] >= 0:
            continue
        k = 4 * x + FACE[ox, d]
        s3[n3, 0] = cell
        s3[n3, 1] = d
        n3 += 1
        a = pa[k]
        b = pb[k]
        if a >= 0 and a == b:
            s1[n1, 0] = cell
            s1[n1, 1] = d
            s1[n1, 2] = a
            n1 += 1
        elif bb[k] >= 0 and (bb[k] == a or bb[k] == b):
            s2[n2, 0] = cell
            s2[n2, 1] = d
            s2[n2, 2] = bb[k]
            n2 += 1
    return n1, n2, n3


@njit(cache=True, nogil=True)
def crossover(pa, pb, seed_tile, seed_o, nrows, ncols, lookup, ranking, allowed, mutation, rseed, pins):
    """Grow a child from two parents (Sholomon, David & Netanyahu, CVPR 2013).

    From a seed tile the child grows one seam at a time: first seams both
    parents agree on, then best-buddy seams that either parent holds, then,
    at a random boundary, the most compatible free tile (a random one with
    probability ``mutation``). Correctly assembled segments present in both
    parents therefore survive whole.

    Parameters
    ----------
    pa, pb : ndarray of int64
        Partner codes of the parents (:func:`stitch.search._lookup.partners`).
    rseed : int
        Seeds numba's generator, so a child depends only on its inputs.
    pins : PinnedLayout
        Pinned tiles and fixed box; they never move.

    With empty parents (all -1) and ``mutation`` 1 it makes a random
    placement that respects the pins and the grid size.
    """
    np.random.seed(rseed)
    n = ranking.second.shape[0] // 4
    cand = lookup.candidates
    bb = ranking.best_buddies
    ch = 2 * nrows + 1
    cw = 2 * ncols + 1
    ct = np.full(ch * cw, -1, np.int64)
    co = np.zeros(ch * cw, np.int64)
    used = np.zeros(n, np.bool_)
    ext = np.array([ch, -1, cw, -1], np.int64)
    s1 = np.empty((4 * n + 4, 3), np.int64)
    s2 = np.empty((4 * n + 4, 3), np.int64)
    s3 = np.empty((4 * n + 4, 2), np.int64)
    n1 = 0
    n2 = 0
    n3 = 0
    n_allowed = 0
    allowed_list = np.empty(8, np.int64)
    for o in range(8):
        if allowed[o]:
            allowed_list[n_allowed] = o
            n_allowed += 1
    placed = _start(ct, co, ext, cw, used, nrows, ncols, seed_tile, seed_o, pins)
    for cell in range(ch * cw):
        if ct[cell] >= 0:
            n1, n2, n3 = _push(ct, co, cw, ch, cell, pa, pb, bb, s1, n1, s2, n2, s3, n3)
    while placed < n:
        tgt = -1
        ty = -1
        to = 0
        # Phases 1 and 2: seams both parents share, then best buddies one holds.
        for phase in range(2):
            while tgt < 0:
                if phase == 0:
                    if n1 == 0:
                        break
                    n1 -= 1
                    src, d, code = s1[n1, 0], s1[n1, 1], s1[n1, 2]
                else:
                    if n2 == 0:
                        break
                    n2 -= 1
                    src, d, code = s2[n2, 0], s2[n2, 1], s2[n2, 2]
                cell2 = src + DROW[d] * cw + DCOL[d]
                if ct[cell2] >= 0 or not _in_extent(cell2 // cw, cell2 % cw, ext, nrows, ncols, pins.box):
                    continue
                y = (code // 2) // 4
                if used[y]:
                    continue
                oy = facing_back(co[src], d, (code // 2) % 4, code % 2)
                if not allowed[oy]:
                    continue
                tgt = cell2
                ty = y
                to = oy
            if tgt >= 0:
                break
        # Phase 3: a random boundary gets its most compatible free tile.
        while tgt < 0 and n3 > 0:
            q = np.random.randint(n3)
            src, d = s3[q, 0], s3[q, 1]
            s3[q, 0] = s3[n3 - 1, 0]
            s3[q, 1] = s3[n3 - 1, 1]
            n3 -= 1
            cell2 = src + DROW[d] * cw + DCOL[d]
            if ct[cell2] >= 0 or not _in_extent(cell2 // cw, cell2 % cw, ext, nrows, ncols, pins.box):
                continue
            x = ct[src]
            ox = co[src]
            if np.random.random() < mutation:
                k = np.random.randint(n - placed)
                for y in range(n):
                    if not used[y]:
                        if k == 0:
                            ty = y
                            break
                        k -= 1
                to = allowed_list[np.random.randint(n_allowed)]
            else:
                kx = 4 * x + FACE[ox, d]
                for qq in range(cand.shape[1]):
                    code = cand[kx, qq]
                    if code < 0:
                        break
                    y = (code // 2) // 4
                    if used[y]:
                        continue
                    oy = facing_back(ox, d, (code // 2) % 4, code % 2)
                    if allowed[oy]:
                        ty = y
                        to = oy
                        break
                if ty < 0:
                    best = np.inf
                    for y in range(n):
                        if used[y]:
                            continue
                        for oi in range(n_allowed):
                            oy = allowed_list[oi]
                            cst = seam_cost(lookup, x, ox, d, y, oy)
                            if ty < 0 or cst < best:
                                best = cst
                                ty = y
                                to = oy
            tgt = cell2
        if tgt < 0:
            break
        _set(ct, co, ext, cw, tgt, ty, to, used)
        placed += 1
        n1, n2, n3 = _push(ct, co, cw, ch, tgt, pa, pb, bb, s1, n1, s2, n2, s3, n3)
    return canvas_to_grid(ct, co, ext, nrows, ncols, cw, pins.box)
