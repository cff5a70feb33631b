"""How sure the seam table is of a placement: per seam, per side, per tile.

Reads a :class:`stitch.seams.SeamTable` and a :class:`stitch.layout.Placement`;
the search's agreement (the share of its best placements that hold each
seam) is the third sign.
"""

from __future__ import annotations

import numpy as np

from .layout import seam_pairs
from .orientation import FACE, STEPS

__all__ = ["side_confidence", "tile_confidence"]


def side_confidence(placement, table):
    """Seam confidence on each side of every tile as it sits in the mosaic.

    Returns
    -------
    ndarray, shape (n_tiles, 4)
        Columns: top, right, bottom, left in the mosaic; NaN at the border,
        next to a hole, or for unplaced tiles.
    """
    n = len(placement.names)
    out = np.full((n, 4), np.nan)
    grid, orient = placement.grid()
    rows, cols = placement.shape
    for i in np.flatnonzero(placement.placed):
        r, c, o = placement.rows[i], placement.cols[i], placement.orientations[i]
        for d, (dr, dc) in enumerate(STEPS):
            rr, cc = r + dr, c + dc
            if 0 <= rr < rows and 0 <= cc < cols and grid[rr, cc] >= 0:
                j, oj = grid[rr, cc], orient[rr, cc]
                sa = 4 * i + int(FACE[o, d])
                sb = 4 * j + int(FACE[oj, (d + 2) % 4])
                out[i, d] = float(table.confidence(sa, sb, int((o >= 4) != (oj >= 4))))
    return out


def tile_confidence(placement, table, agreement=None):
    """Per-tile confidence in [0, 1] from the seams each tile makes.

    A seam scores the mean of three signs of a right join: the two sides are
    best buddies (Pomeranz, Shemesh & Ben-Shahar, CVPR 2011); its normalised
    confidence ``1 - cost / second best``; and the share of the final elite
    holding it (``agreement``). A tile scores the mean over its seams; a tile
    with no placed neighbour scores 0.

    Parameters
    ----------
    placement : stitch.layout.Placement
    table : stitch.seams.SeamTable
    agreement : ndarray, shape (4 * n_tiles,), optional

    Returns
    -------
    ndarray of float, shape (n_tiles,)
    """
    n = len(placement.names)
    pairs = seam_pairs(placement)
    conf = np.zeros(n)
    if len(pairs) == 0:
        return conf
    sa, sb, flip = pairs.T
    is_bb = (table.best_buddies[sa] == 2 * sb + flip).astype(float)
    compat = table.confidence(sa, sb, flip)
    agree = np.ones(len(pairs)) if agreement is None else (agreement[sa] + agreement[sb]) / 2
    seam_conf = (is_bb + compat + agree) / 3
    tiles = np.concatenate([sa // 4, sb // 4])
    total = np.bincount(tiles, weights=np.concatenate([seam_conf, seam_conf]), minlength=n)
    count = np.bincount(tiles, minlength=n)
    np.divide(total, count, out=conf, where=count > 0)
    return conf
