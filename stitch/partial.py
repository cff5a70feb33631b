"""Partial edge tiles stored turned or mirrored: which of their sides faced the raster's edge.

A tiled export ends in a narrower last column and a shorter last row. stitch
cuts a partial tile's edge strips from a full cell with the missing part
nodata (:func:`stitch.tiles.pad_to_cell`), so that the footprint rule keeps
that part on the mosaic's border. Upright, the missing part lies right of
and below the tile's pixels. A tile that may be turned or mirrored in its
file could have faced the edge with either of its two sides across the cut
dimension, and the one that did is told by the evidence: the inner side
continues a neighbour, so its best partner stands out from the runner-up,
while the outer side faced nothing and its best partner does not (the ratio
of best to second-best cost, as the seam table normalises costs).

Once those sides are known, the tile's strips are cut with the missing part
beyond them, and :func:`stitch.layout.normalize_frame` chooses the frame in
which the outer sides face right and down, where tilers put them.
"""

from __future__ import annotations

import numpy as np

from .errors import OptionError
from .measures import get_measure, overlap
from .seams import band_scaling, seam_block, side_pairs, usable_rows
from .tiles import EdgeStrips, edge_strips, pad_to_cell, partial_sizes, read_masked

__all__ = ["outer_offsets", "partial_edges", "partial_grid", "upright_pattern"]

#: The measure that tells inner from outer sides (the default seam measure's
#: first half; fixed, so the choice does not depend on ``--measure``).
_MEASURE = "mgc"


def upright_pattern(tileset):
    """Do the tile sizes fit a partial column and row as stored upright
    (one narrow width, one short height)?"""
    if tileset.sizes is None:
        return True
    shapes = [(int(w), int(h), tileset.count, tileset.dtype) for w, h in tileset.sizes]
    return partial_sizes(shapes) is not None


def outer_offsets(outer, sizes, width, height):
    """Column and row of each tile file's first pixel in its full cell, given
    the file sides that face the raster's edge (``outer``, shape (n, 4))."""
    x = np.where(outer[:, 3], width - sizes[:, 0], 0)
    y = np.where(outer[:, 0], height - sizes[:, 1], 0)
    return np.stack([x, y], axis=1)


def _default_outer(tileset):
    outer = np.zeros((len(tileset), 4), bool)
    if tileset.sizes is not None:
        outer[:, 1] = tileset.sizes[:, 0] < tileset.width
        outer[:, 2] = tileset.sizes[:, 1] < tileset.height
    return outer


def partial_edges(tileset, orientations, *, edges=None):
    """Edge strips with partial tiles cut for the allowed orientations.

    Parameters
    ----------
    tileset : stitch.tiles.TileSet
    orientations : tuple of int
        Allowed orientation codes.
    edges : stitch.tiles.EdgeStrips, optional
        The strips to start from and to cut again, by default
        ``tileset.edges``; for tiles that overlap, their shared strips
        (:func:`stitch.overlap.overlap_strips`), as deep as the overlap,
        told apart with :func:`stitch.measures.overlap` instead of MGC.

    Returns
    -------
    edges : stitch.tiles.EdgeStrips
        ``edges``, with the strips of partial tiles whose missing part
        lies elsewhere than right and below cut again.
    outer : ndarray of bool, shape (n_tiles, 4)
        File sides (0 top, 1 right, 2 bottom, 3 left) that faced the raster's
        edge; all False for full tiles.

    Raises
    ------
    OptionError
        The partial tiles look turned a quarter but no quarter turn is allowed.
    """
    if tileset.partial.any() and not any(int(o) % 2 for o in orientations) and not upright_pattern(tileset):
        raise OptionError(
            f"the {int(tileset.partial.sum())} partial edge tiles in {str(tileset.folder)!r} come in more than one "
            "width or height, as when narrow tiles are stored turned a quarter; solve with --rotations 90"
        )
    edges = tileset.edges if edges is None else edges
    depth = edges.sides[0].shape[2]
    outer = _default_outer(tileset)
    if tileset.sizes is None or set(int(o) for o in orientations) == {0}:
        return edges, outer
    part = np.flatnonzero(tileset.partial)
    dtype = edges.sides[0].dtype
    raw = {}
    for i in part:
        pixels, mask = read_masked(tileset.folder / tileset.names[i], tileset.nodata, dtype)
        raw[int(i)] = (pixels, mask, *edge_strips(pixels, mask, depth))
    ratio = _distinctiveness(tileset, edges, raw, orientations, overlap if edges.shared else get_measure(_MEASURE))
    w, h = tileset.sizes[:, 0], tileset.sizes[:, 1]
    for i in part:
        if w[i] < tileset.width:
            left, right = ratio.get((int(i), 3), np.inf), ratio.get((int(i), 1), np.inf)
            outer[i, 1], outer[i, 3] = left <= right, left > right
        if h[i] < tileset.height:
            top, bottom = ratio.get((int(i), 0), np.inf), ratio.get((int(i), 2), np.inf)
            outer[i, 2], outer[i, 0] = top <= bottom, top > bottom
    offsets = outer_offsets(outer, tileset.sizes, tileset.width, tileset.height)
    moved = [int(i) for i in part if offsets[i].any()]
    if not moved:
        return edges, outer
    sides = [s.copy() for s in edges.sides]
    valid = [v.copy() for v in edges.valid]
    for i in moved:
        pixels, mask = pad_to_cell(raw[i][0], raw[i][1], tileset.width, tileset.height, tuple(offsets[i]))
        for s, (strip, ok) in enumerate(zip(*edge_strips(pixels, mask, depth))):
            sides[s][i] = strip
            valid[s][i] = ok
    return EdgeStrips(sides=tuple(sides), valid=tuple(valid), shared=edges.shared), outer


def _distinctiveness(tileset, edges, raw, orientations, fn):
    """Best over second-best seam cost of the sides that may face the edge.

    Returns ``{(tile, side): ratio}`` for the two sides of each partial tile
    across its cut dimension, scored against every side of the same length
    (full tiles' sides and the partial tiles' own) that the orientations can
    bring against it.
    """
    mean, scale = band_scaling(edges.sides, edges.valid)
    mean, scale = mean.astype(np.float32), scale.astype(np.float32)

    def normalized(strip, ok):
        x = (strip.astype(np.float32) - mean) * scale
        x[~ok] = 0.0
        return x

    # Partner pool: (side, length) -> (tile indices, strips, usable rows).
    pool = {}
    full = np.flatnonzero(~tileset.partial)
    for s in range(4):
        ok = edges.valid[s][full]
        strips = normalized(edges.sides[s][full], ok)
        pool.setdefault((s, strips.shape[1]), []).append((full, strips, usable_rows(ok, edges.shared)))
    for i, (_, _, strips, oks) in raw.items():
        for s in range(4):
            ok = oks[s]
            pool.setdefault((s, strips[s].shape[0]), []).append(
                (np.array([i]), normalized(strips[s], ok)[None], usable_rows(ok, edges.shared)[None]))
    pool = {key: (np.concatenate([p[0] for p in parts]), np.concatenate([p[1] for p in parts]),
                  np.concatenate([p[2] for p in parts])) for key, parts in pool.items()}

    # Queries: the two sides across each cut dimension, grouped by side and length.
    queries = {}
    for i, (pixels, _, strips, oks) in raw.items():
        cut = [3, 1] if pixels.shape[2] < tileset.width else []
        cut += [0, 2] if pixels.shape[1] < tileset.height else []
        for s in cut:
            ok = oks[s]
            queries.setdefault((s, strips[s].shape[0]), []).append(
                (i, normalized(strips[s], ok), usable_rows(ok, edges.shared)))
    pairs = side_pairs(orientations)
    out = {}
    for (a, length), group in queries.items():
        who = np.array([g[0] for g in group])
        left = np.stack([g[1] for g in group])
        left_ok = np.stack([g[2] for g in group])
        costs = []
        for b, f in {(b, f) for a2, b, f in pairs if a2 == a}:
            if (b, length) not in pool:
                continue
            tiles, right, right_ok = pool[(b, length)]
            block = seam_block(fn, left, right, left_ok, right_ok, flip=bool(f))
            block = np.where(np.isfinite(block), block, np.inf)
            block[who[:, None] == tiles[None, :]] = np.inf  # a tile never meets itself
            costs.append(block)
        if not costs:
            continue
        costs = np.sort(np.concatenate(costs, axis=1), axis=1)
        best = costs[:, 0]
        second = costs[:, 1] if costs.shape[1] > 1 else np.full(len(best), np.inf)
        with np.errstate(invalid="ignore", divide="ignore"):
            ratio = np.where(np.isfinite(best) & (second > 0), best / np.where(second > 0, second, 1), np.inf)
        # A constant side (a plain frame, one colour of ground) matches any
        # other constant side exactly: no evidence either way.
        ok = left_ok[..., None]
        top = np.where(ok, left[:, :, -1, :], -np.inf).max(axis=1)
        bottom = np.where(ok, left[:, :, -1, :], np.inf).min(axis=1)
        flat = ~(top > bottom).any(axis=1)
        ratio[flat] = 1.0
        for i, r in zip(who, ratio):
            out[(int(i), a)] = float(r)
    return out


def partial_grid(tileset, orientations):
    """The grid a complete set of partial edge tiles fixes, or None.

    An export's last column holds one narrow tile per row and its last row
    one short tile per column (the corner tile in both), so with every tile
    present their counts are the grid's rows and columns. Stored with
    quarter turns, a narrow tile may look short: the tiles are then told
    apart by the length of their cut side (the column's width and the row's
    height), and the grid found may be the true one turned, which a quarter
    turn of the whole mosaic undoes. Returns None when the counts do not
    multiply to the number of tiles (tiles skipped, or only one partial side
    whose count leaves the other open and does not divide it).
    """
    if tileset.sizes is None or not tileset.partial.any():
        return None
    n = len(tileset)
    w, h = tileset.sizes[:, 0], tileset.sizes[:, 1]
    narrow_cut, short_cut = w < tileset.width, h < tileset.height
    corner = narrow_cut & short_cut
    n_corner = int(corner.sum())
    if any(int(o) % 2 for o in orientations):
        cut = np.where(narrow_cut, w, h)[tileset.partial & ~corner]
        values = sorted({int(v) for v in cut} | {int(v) for v in tileset.sizes[corner].ravel()})
        if len(values) == 2:
            rows = int((cut == values[0]).sum()) + n_corner
            cols = int((cut == values[1]).sum()) + n_corner
        elif n_corner:  # column width and row height alike: rows + cols - 1 partial tiles
            total = int(tileset.partial.sum()) + 1
            roots = [r for r in range(1, total) if r * (total - r) == n]
            if not roots:
                return None
            rows, cols = roots[0], total - roots[0]
        else:
            rows, cols = len(cut), n // max(len(cut), 1)
    else:
        rows = int((narrow_cut & ~short_cut).sum()) + n_corner if narrow_cut.any() else None
        cols = int((short_cut & ~narrow_cut).sum()) + n_corner if short_cut.any() else None
        if rows is None:
            rows = n // cols
        if cols is None:
            cols = n // rows
    return (rows, cols) if rows * cols == n and min(rows, cols) >= 1 else None
