"""Compiled inner loops of the placement search (numba).

Kept apart from :mod:`stitch.search` so the Python driver stays readable and
so ``bench/search_jit.py`` can time each kernel with and without compilation
(``kernel.py_func``).

All kernels grow a placement on a canvas of ``(2 R + 1) x (2 C + 1)`` cells
around a seed tile at ``(R, C)`` and never let the placed block grow beyond
``R`` rows or ``C`` columns; :func:`canvas_to_grid` crops it to ``R x C``.
Orientation codes and side slots are those of :mod:`stitch.layout`; a partner
*code* is ``2 * slot + flip``.
"""

import numpy as np
from numba import njit

# face[o, d]: side of the tile file facing direction d under orientation o.
FACE = np.array(
    [[(d - r) % 4 if m == 0 else (r - d) % 4 for d in range(4)] for m in range(2) for r in range(4)],
    dtype=np.int64,
)
DROW = np.array([-1, 0, 1, 0], dtype=np.int64)
DCOL = np.array([0, 1, 0, -1], dtype=np.int64)


@njit(cache=True, nogil=True)
def seam_cost(tab, x, ox, d, y, oy):
    """Cost of tile y (orientation oy) lying in direction d of tile x (ox).

    ``tab`` is :attr:`stitch.search._Problem.tab`: ``(blocks, block_index,
    transposed, candidates, candidate_costs, fallback, dense)``.
    """
    blocks, bidx, btr, cand, ccost, fallback, dense = tab
    a = FACE[ox, d]
    b = FACE[oy, (d + 2) % 4]
    f = 1 if (ox >= 4) != (oy >= 4) else 0
    idx = bidx[a, b, f]
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
    if dense:
        if btr[a, b, f]:
            return blocks[idx, y, x]
        return blocks[idx, x, y]
    for q in range(cand.shape[1]):
        c = cand[ka, q]
        if c == 2 * kb + f:
            return ccost[ka, q]
        if c < 0:
            break
    for q in range(cand.shape[1]):
        c = cand[kb, q]
        if c == 2 * ka + f:
            return ccost[kb, q]
        if c < 0:
            break
    return max(fallback[ka], fallback[kb])


@njit(cache=True, nogil=True)
def orientation_for(ox, d, t, f):
    """Orientation that makes side t of a tile face back at x (x at ox, looking in d)."""
    my = (1 if ox >= 4 else 0) ^ f
    dd = (d + 2) % 4
    if my == 0:
        r = (dd - t + 4) % 4
    else:
        r = (t + dd) % 4
    return my * 4 + r


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

    ``pins`` is ``(tiles, canvas_rows, canvas_cols, box, orientations)``.
    Returns the number of tiles placed.
    """
    pin_t, pin_r, pin_c, box, pin_o = pins
    if len(pin_t) == 0:
        _set(ct, co, ext, cw, nrows * cw + ncols, seed_tile, seed_o, used)
        return 1
    for q in range(len(pin_t)):
        _set(ct, co, ext, cw, pin_r[q] * cw + pin_c[q], pin_t[q], pin_o[q], used)
    return len(pin_t)


@njit(cache=True, nogil=True)
def _step(cell, d, cw, ch):
    """Canvas index of the cell next to ``cell`` in direction d, or -1 off the canvas."""
    nr = cell // cw + DROW[d]
    nc = cell % cw + DCOL[d]
    if nr < 0 or nc < 0 or nr >= ch or nc >= cw:
        return -1
    return nr * cw + nc


@njit(cache=True, nogil=True)
def _score_at(ct, co, cw, ch, cell, y, oy, tab, second, bb):
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
        cost = seam_cost(tab, x, ox, dx, y, oy)
        kx = 4 * x + FACE[ox, dx]
        sec = second[kx]
        total += (1.0 - cost / sec) if sec > 0 else (0.0 if cost == 0 else -1.0)
        count += 1
        flip = 1 if (ox >= 4) != (oy >= 4) else 0
        if bb[kx] != 2 * (4 * y + FACE[oy, d]) + flip:
            all_bb = False
    if count == 0:
        return -np.inf
    s = total / count
    if all_bb:
        s += 2.0
    return s


@njit(cache=True, nogil=True)
def _best_for_cell(ct, co, cw, ch, cell, used, n, tab, cand, second, bb, allowed, kfree):
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
            oy = orientation_for(ox, dx, l % 4, code % 2)
            if not allowed[oy]:
                continue
            seen_any = True
            s = _score_at(ct, co, cw, ch, cell, y, oy, tab, second, bb)
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
                s = _score_at(ct, co, cw, ch, cell, y, oy, tab, second, bb)
                if s > best_s or best_y < 0:
                    best_s = s
                    best_y = y
                    best_o = oy
    return best_y, best_o, best_s


@njit(cache=True, nogil=True)
def greedy(seed_tile, seed_o, nrows, ncols, n, tab, cand, second, bb, allowed, kfree, pins):
    """Greedy best-buddy placement (after Paikin & Tal, CVPR 2015).

    Repeatedly fills the free cell, next to placed tiles, whose best tile
    scores highest: best buddies of all placed neighbours first, then by the
    mean normalised seam confidence. Starts from the pinned tiles, or from the
    seed. Returns ``(tiles, orientations)`` grids.
    """
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
            if ct[f] >= 0 or not _in_extent(f // cw, f % cw, ext, nrows, ncols, pins[3]):
                in_fr[f] = False
                fr[i] = fr[nfr - 1]
                nfr -= 1
                continue
            if not c_ok[f] or (c_t[f] >= 0 and used[c_t[f]]):
                y, o, sc = _best_for_cell(ct, co, cw, ch, f, used, n, tab, cand, second, bb, allowed, kfree)
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
    return canvas_to_grid(ct, co, ext, nrows, ncols, cw, pins[3])


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
def fitness(gt, go, tab, bonus):
    """What the search minimises, the sum over seams of ``cost - bonus``, and
    the plain total seam cost, in one pass.

    With every cell filled the seam count is fixed and the first is the total
    seam cost shifted by a constant. With holes, ``bonus`` (a typical cost of
    a plausible seam) keeps the search from scattering holes to drop seams.
    """
    nrows, ncols = gt.shape
    objective = 0.0
    total = 0.0
    for i in range(nrows):
        for j in range(ncols):
            x = gt[i, j]
            if x < 0:
                continue
            if j + 1 < ncols and gt[i, j + 1] >= 0:
                c = seam_cost(tab, x, go[i, j], 1, gt[i, j + 1], go[i, j + 1])
                objective += c - bonus
                total += c
            if i + 1 < nrows and gt[i + 1, j] >= 0:
                c = seam_cost(tab, x, go[i, j], 2, gt[i + 1, j], go[i + 1, j])
                objective += c - bonus
                total += c
    return objective, total


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
def crossover(pa, pb, seed_tile, seed_o, nrows, ncols, n, tab, cand, bb, allowed,
              mutation, rseed, pins):
    """Grow a child from two parents (Sholomon, David & Netanyahu, CVPR 2013).

    From a seed tile the child grows one seam at a time: first seams both
    parents agree on, then best-buddy seams that either parent holds, then,
    at a random boundary, the most compatible free tile (a random one with
    probability ``mutation``). Correctly assembled segments present in both
    parents therefore survive whole.

    Parameters
    ----------
    pa, pb : ndarray of int64
        Partner codes of the parents (:func:`partners`).
    rseed : int
        Seeds numba's generator, so a child depends only on its inputs.
    pins : tuple
        Pinned tiles and fixed box (see :func:`_start`); they never move.

    With empty parents (all -1) and ``mutation`` 1 it makes a random
    placement that respects the pins and the grid size.
    """
    np.random.seed(rseed)
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
                if ct[cell2] >= 0 or not _in_extent(cell2 // cw, cell2 % cw, ext, nrows, ncols, pins[3]):
                    continue
                y = (code // 2) // 4
                if used[y]:
                    continue
                oy = orientation_for(co[src], d, (code // 2) % 4, code % 2)
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
            if ct[cell2] >= 0 or not _in_extent(cell2 // cw, cell2 % cw, ext, nrows, ncols, pins[3]):
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
                    oy = orientation_for(ox, d, (code // 2) % 4, code % 2)
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
                            cst = seam_cost(tab, x, ox, d, y, oy)
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
    return canvas_to_grid(ct, co, ext, nrows, ncols, cw, pins[3])


@njit(cache=True, nogil=True)
def _cell_cost(gt, go, i, j, tab):
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
            total += seam_cost(tab, x, go[i, j], d, y, go[ni, nj])
    return total


@njit(cache=True, nogil=True)
def _pair_cost(gt, go, i1, j1, i2, j2, tab):
    """Cost of the seams around two cells, a shared seam counted once."""
    total = _cell_cost(gt, go, i1, j1, tab) + _cell_cost(gt, go, i2, j2, tab)
    if abs(i1 - i2) + abs(j1 - j2) == 1 and gt[i1, j1] >= 0 and gt[i2, j2] >= 0:
        for d in range(4):
            if i1 + DROW[d] == i2 and j1 + DCOL[d] == j2:
                total -= seam_cost(tab, gt[i1, j1], go[i1, j1], d, gt[i2, j2], go[i2, j2])
    return total


@njit(cache=True, nogil=True)
def improve(gt, go, n, tab, cand, allowed, fixed, max_passes, per_side):
    """Local search: swap tiles and turn them while the total cost drops.

    Only swaps that bring in a top candidate of a neighbour's facing side are
    tried, so one pass costs O(n) and not O(n^2). ``fixed[t]`` tiles never
    move. Works in place; returns the number of accepted moves.
    """
    nrows, ncols = gt.shape
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
                before = _cell_cost(gt, go, i, j, tab)
                ox = go[i, j]
                best_o = ox
                for o in range(8):
                    if not allowed[o] or o == ox:
                        continue
                    go[i, j] = o
                    c = _cell_cost(gt, go, i, j, tab)
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
                        oy = orientation_for(go[ni, nj], dz, (code // 2) % 4, code % 2)
                        if not allowed[oy]:
                            continue
                        i2 = pos[y] // ncols
                        j2 = pos[y] % ncols
                        ox = go[i, j]
                        oy_old = go[i2, j2]
                        adjacent = abs(i - i2) + abs(j - j2) == 1
                        if adjacent:
                            before = _pair_cost(gt, go, i, j, i2, j2, tab)
                        else:
                            before = here + _cell_cost(gt, go, i2, j2, tab)
                        bar = before - 1e-6 * (1.0 + before)
                        gt[i, j] = y
                        go[i, j] = oy
                        gt[i2, j2] = x
                        best = np.inf
                        best_ox = ox
                        # Apart, the two cells' seams are independent: y's side
                        # alone can rule the swap out (seam costs are >= 0), and
                        # x's turns only change x's side.
                        cy = 0.0 if adjacent else _cell_cost(gt, go, i, j, tab)
                        if adjacent or cy < bar:
                            for o in range(8):
                                if not allowed[o]:
                                    continue
                                go[i2, j2] = o
                                if adjacent:
                                    c = _pair_cost(gt, go, i, j, i2, j2, tab)
                                else:
                                    c = cy + _cell_cost(gt, go, i2, j2, tab)
                                if c < best:
                                    best = c
                                    best_ox = o
                        if best < bar:
                            go[i2, j2] = best_ox
                            pos[y] = i * ncols + j
                            pos[x] = i2 * ncols + j2
                            changed += 1
                            here = _cell_cost(gt, go, i, j, tab)
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
def _window_tables(gt, go, r0, c0, h, w, cells_t, cells_o, tab, edge, right, below):
    """Seam costs a window's tiles can make, for trying its arrangements.

    ``edge[t, q]``: tile ``t`` of the window (``cells_t[t]`` turned
    ``cells_o[t]``) at window cell ``q`` against the tiles around the window;
    ``right[t, u]`` / ``below[t, u]``: tile ``u`` right of / below tile ``t``.
    Holes cost nothing.
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
                        total += seam_cost(tab, x, cells_o[t], d, y, go[ni, nj])
            edge[t, q] = total
        for u in range(k):
            y = cells_t[u]
            if x < 0 or y < 0 or u == t:
                right[t, u] = 0.0
                below[t, u] = 0.0
            else:
                right[t, u] = seam_cost(tab, x, cells_o[t], 1, y, cells_o[u])
                below[t, u] = seam_cost(tab, x, cells_o[t], 2, y, cells_o[u])


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
def permute_windows(gt, go, h, w, perms, tab, fixed, bb):
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
            if skip or _window_settled(gt, go, r0, c0, h, w, bb):
                continue
            _window_tables(gt, go, r0, c0, h, w, cells_t, cells_o, tab, edge, right, below)
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
