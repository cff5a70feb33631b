"""How sure the seam table is of a placement: per seam, per side, per tile, per run.

One scale, [0, 1], throughout. A seam's confidence is the mean of three signs
of a right join: the two sides are best buddies (Pomeranz, Shemesh &
Ben-Shahar, CVPR 2011); its normalised margin ``1 - cost / second best``;
and the share of the search's best placements that hold it (its
agreement). A side's value is the confidence of the seam it makes, a tile's
the mean over its seams, and the run's verdict rests on how many tiles and
seams are confident.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .layout import seam_pairs
from .orientation import FACE, STEPS

__all__ = ["Verdict", "grid_source", "look_alikes", "review_labels", "run_verdict", "seam_confidence", "side_confidence",
           "tile_confidence"]

#: Two tiles look alike when the distance between their edge strips (all four
#: sides, bands scaled as the seam measures see them) is below this share of
#: the set's median distance between tiles (our choice, no source): one
#: stretch of water, snow or crop field against another.
LOOK_ALIKE_TOLERANCE = 0.25

#: Verdict thresholds (our choice, no source): a run is ``"good"`` when at
#: least this share of its placed tiles is confident and the grid is sure...
GOOD_SHARE = 0.9
#: ...and ``"doubtful"`` when fewer than this share of its tiles are
#: confident, or fewer than DOUBTFUL_BUDDIES of its seams join best buddies;
#: anything between needs the flagged tiles checked.
DOUBTFUL_SHARE = 0.5
DOUBTFUL_BUDDIES = 0.25


def seam_confidence(table, slot_a, slot_b, flip, agreement=None):
    """Confidence of seams given as side slots (vectorised), in [0, 1].

    Parameters
    ----------
    table : stitch.seams.SeamTable
    slot_a, slot_b, flip : array_like of int
    agreement : ndarray, shape (4 * n_tiles,), optional
        Share of the search's best placements holding each side's seam; 1
        when not given.
    """
    slot_a, slot_b, flip = (np.asarray(v, np.int64) for v in (slot_a, slot_b, flip))
    is_bb = (table.best_buddies[slot_a] == 2 * slot_b + flip).astype(float)
    compat = table.confidence(slot_a, slot_b, flip)
    agree = np.ones(slot_a.shape) if agreement is None else (agreement[slot_a] + agreement[slot_b]) / 2
    return (is_bb + compat + agree) / 3


def side_confidence(placement, table, agreement=None):
    """Seam confidence on each side of every tile as it sits in the mosaic.

    Returns
    -------
    ndarray, shape (n_tiles, 4)
        Columns: top, right, bottom, left in the mosaic, on the scale of
        :func:`seam_confidence`; NaN at the border, next to a hole, or for
        unplaced tiles.
    """
    n = len(placement.names)
    out = np.full((n, 4), np.nan)
    grid, orient = placement.grid()
    rows, cols = placement.shape
    idx = np.flatnonzero(placement.placed)
    if idx.size == 0:
        return out
    r, c, o = placement.rows[idx], placement.cols[idx], placement.orientations[idx]
    for d, (dr, dc) in enumerate(STEPS):
        rr, cc = r + dr, c + dc
        inside = (rr >= 0) & (rr < rows) & (cc >= 0) & (cc < cols)
        j = np.full(idx.shape, -1)
        j[inside] = grid[rr[inside], cc[inside]]
        ok = j >= 0
        if not ok.any():
            continue
        oj = orient[rr[ok], cc[ok]]
        sa = 4 * idx[ok] + FACE[o[ok], d]
        sb = 4 * j[ok] + FACE[oj, (d + 2) % 4]
        flip = ((o[ok] >= 4) != (oj >= 4)).astype(np.int64)
        out[idx[ok], d] = seam_confidence(table, sa, sb, flip, agreement)
    return out


def tile_confidence(placement, table, agreement=None):
    """Per-tile confidence in [0, 1]: the mean of its sides'
    :func:`side_confidence`, i.e. of its seams; a tile with no placed
    neighbour scores 0.

    Parameters
    ----------
    placement : stitch.layout.Placement
    table : stitch.seams.SeamTable
    agreement : ndarray, shape (4 * n_tiles,), optional

    Returns
    -------
    ndarray of float, shape (n_tiles,)
    """
    sides = side_confidence(placement, table, agreement)
    count = np.isfinite(sides).sum(axis=1)
    conf = np.zeros(len(placement.names))
    np.divide(np.nansum(sides, axis=1), count, out=conf, where=count > 0)
    return conf


def look_alikes(edges, among):
    """How many other tiles of ``among`` look like each one (near-identical
    edges, see :data:`LOOK_ALIKE_TOLERANCE`).

    Parameters
    ----------
    edges : stitch.tiles.EdgeStrips
    among : ndarray of bool, shape (n_tiles,)
        Tiles to compare (e.g. the flagged ones).

    Returns
    -------
    ndarray of int, shape (n_tiles,)
        0 outside ``among``.
    """
    from .seams import normalize_strips

    among = np.asarray(among, bool)
    out = np.zeros(len(among), np.int64)
    idx = np.flatnonzero(among)
    if len(idx) < 2:
        return out
    sides = normalize_strips(edges.sides, edges.valid)
    x = np.concatenate([s.reshape(len(s), -1) for s in sides], axis=1)
    sq = np.einsum("ij,ij->i", x, x, dtype=np.float64)
    # The set's typical distance, from a fixed sample of pairs (deterministic).
    sample = np.linspace(0, len(x) - 1, min(len(x), 256)).astype(np.int64)
    d_s = sq[sample, None] + sq[None, sample] - 2.0 * (x[sample] @ x[sample].T)
    off = ~np.eye(len(sample), dtype=bool)
    typical = float(np.sqrt(np.median(np.maximum(d_s[off], 0.0)))) if off.any() else 0.0
    limit = (LOOK_ALIKE_TOLERANCE * typical) ** 2
    xa = x[idx]
    for r0 in range(0, len(idx), 2048):
        r1 = min(len(idx), r0 + 2048)
        d = sq[idx[r0:r1], None] + sq[None, idx] - 2.0 * (xa[r0:r1] @ xa.T)
        near = d < limit
        near[np.arange(r1 - r0), np.arange(r0, r1)] = False
        out[idx[r0:r1]] = near.sum(axis=1)
    return out


def review_labels(placement, edges, threshold):
    """Per tile: ``""`` when confident; for a placed tile below ``threshold``,
    ``"interchangeable"`` when other such tiles look just like it
    (:func:`look_alikes`: any of them would do in its cell), else
    ``"doubtful"``."""
    low = placement.placed & (np.nan_to_num(placement.confidence, nan=0.0) < threshold)
    labels = np.full(len(low), "", dtype=object)
    labels[low] = "doubtful"
    labels[low & (look_alikes(edges, low) > 0)] = "interchangeable"
    return labels


@dataclass(frozen=True)
class Verdict:
    """What a run as a whole is worth.

    Attributes
    ----------
    level : {"good", "check", "doubtful"}
        ``good``: nearly every tile rests on confident seams and the grid is
        sure; ``doubtful``: most of the mosaic does not (do not use it
        without a human going over it); ``check``: look at the flagged tiles.
    confident_tiles : float
        Share of placed tiles at or above the confidence threshold.
    buddy_seams : float
        Share of the mosaic's seams that join best buddies.
    grid : str
        :func:`grid_source`, with ``", thin margin"`` when the inferred grid
        barely beat the runner-up.
    reasons : tuple of str
    """

    level: str
    confident_tiles: float
    buddy_seams: float
    grid: str
    reasons: tuple = ()

    def as_dict(self):
        return {"level": self.level, "confident_tiles": round(self.confident_tiles, 4),
                "buddy_seams": round(self.buddy_seams, 4), "grid": self.grid, "reasons": list(self.reasons)}

    def __str__(self):
        text = (f"{self.level}: {self.confident_tiles:.0%} of the tiles rest on confident seams, "
                f"{self.buddy_seams:.0%} of the seams join best buddies; grid {self.grid}")
        return text + (f" ({'; '.join(self.reasons)})" if self.reasons else "")


def grid_source(grid_given, shape_evidence):
    """Where the grid came from: ``"given"``, ``"partial edge tiles"`` (their
    counts fixed it) or ``"inferred"`` (from the seams)."""
    if grid_given:
        return "given"
    if shape_evidence and shape_evidence.get("source") == "partial edge tiles":
        return "partial edge tiles"
    return "inferred"


def run_verdict(placement, table, *, threshold=0.5, grid_given=False, shape_evidence=None):
    """The run's :class:`Verdict` from its tile confidences and seams.

    Parameters
    ----------
    placement : stitch.layout.Placement
        With confidence.
    table : stitch.seams.SeamTable
    threshold : float
        Tiles below it need a look.
    grid_given : bool
    shape_evidence : dict, optional
        :attr:`stitch.search.SearchResult.shape_evidence`.
    """
    placed = placement.placed
    conf = np.nan_to_num(placement.confidence[placed], nan=0.0)
    confident = float(np.mean(conf >= threshold)) if conf.size else 0.0
    pairs = seam_pairs(placement)
    if len(pairs):
        sa, sb, flip = pairs.T
        buddies = float(np.mean(table.best_buddies[sa] == 2 * sb + flip))
    else:
        buddies = 0.0
    thin = bool(shape_evidence and shape_evidence.get("thin"))
    grid = grid_source(grid_given, shape_evidence) + (", thin margin" if thin else "")
    reasons = []
    if confident < DOUBTFUL_SHARE or buddies < DOUBTFUL_BUDDIES:
        level = "doubtful"
        reasons.append("most of the mosaic rests on weak evidence: do not use it without checking it tile by "
                       "tile; --grid, --pin or control points may help")
    elif confident >= GOOD_SHARE and not thin:
        level = "good"
    else:
        level = "check"
        if thin:
            reasons.append("the inferred grid barely beats another; give --grid if you know it")
        if confident < GOOD_SHARE:
            reasons.append(f"{int((conf < threshold).sum())} tile(s) below the threshold")
    return Verdict(level, confident, buddies, grid, tuple(reasons))
