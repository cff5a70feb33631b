"""Tiles that overlap their neighbours: find the overlap, and the strips it is measured on.

Exports cut with a buffer repeat ``k`` pixels of each neighbour on every
side: a tile starts every ``tile size - k`` pixels, so tile A's last ``k``
columns are its right neighbour's first ``k``. Then the ``k``-pixel strips of
two true neighbours hold the same ground, which is far stronger evidence
than how well two edges continue each other.

Finding ``k`` (:func:`find_overlap`): for a sample of tiles, each side's line
of pixels ``d`` steps in from its edge is compared with the edge line of
every side of every other tile (both directions, one matrix product per line
length), as grey levels smoothed along the line so that JPEG noise does not
hide a copy. If the tiles overlap by ``k``, a side's line at depth ``k - 1``
is its neighbour's edge line: the distance to the best partner dips there.
A side *votes* for the depth of a clear dip (:data:`DIP_RATIO` of the depths
either side; a 1 px overlap, which has a neighbour depth on one side only,
must also be a near-exact copy, :data:`EXACT_SHARE`, and not a mirrored
one). Copies of a tile are never its partners. The overlap is the depth most
sides vote for, by a clear lead; votes spread over many depths are chance,
and two strong depths, or a lead held by a few sides only, are refused
rather than guessed.

The seam cost of two overlapping sides (:func:`stitch.measures.overlap`) is
how badly their shared strips (:func:`overlap_strips`) disagree.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass, field, replace

import numpy as np

from .errors import TileSetError
from .seams import band_scaling
from .tiles import cut_strips, edge_strips, pad_to_cell, read_masked

__all__ = ["DIP_RATIO", "EXACT_SHARE", "OverlapFinding", "find_overlap", "overlap_strips", "with_overlap"]

log = logging.getLogger(__name__)

#: Tiles whose sides are sampled to find the overlap.
SAMPLE_TILES = 48

#: Lines are compared as their grey level smoothed over this many pixels
#: along the line (see :func:`_grey_lines`; our choice, no source).
SMOOTH_PX = 5

#: A side votes for a depth when its best partner there is at most this share
#: of its best partner at the depths either side (our choice, no source).
DIP_RATIO = 0.6

#: A 1 px overlap must also be a near-exact copy: at most this share of how
#: much the tile's own first two lines differ (our choice, no source). Tiles
#: that meet edge to edge reach 0.03-0.23 by chance on smooth ground (16
#: tiles of 20 px from scikit-image's astronaut: 8 of 64 sides under 0.25,
#: which stopped a run); a lossless copy gives 0.
EXACT_SHARE = 0.02

#: The overlap found must have at least this share of the sampled sides that
#: show structure voting for it, and this many times the votes of any other
#: depth (our choices, no source). Sides on the mosaic's border have no
#: partner, and JPEG tiles whose overlap strips sit at another phase of the
#: 8 x 8 block grid in each tile match less often, so even a true overlap
#: gets far from all the votes: a quarter of the sides, for retina in JPEG.
MIN_VOTE_SHARE = 0.15
MIN_VOTE_LEAD = 3.0

#: Below this share for every depth the votes are chance dips: no overlap.
#: Tiles that meet edge to edge gave at most 8 % in the round trips of
#: tests/test_overlap.py (our choice, no source).
CHANCE_VOTE_SHARE = 0.10

#: ...and a refusal needs at least this many votes for one depth.
MIN_FEW_VOTES = 6


@dataclass(frozen=True)
class OverlapFinding:
    """How many pixels the tiles share with each neighbour, and the evidence.

    Attributes
    ----------
    overlap : int
        Pixels shared on every side; 0 for tiles that meet edge to edge.
    source : {"found", "given", "none"}
        Found in the pixels, given (``--overlap``), or none found.
    votes : dict
        ``{depth: sides}`` of the sampled sides that matched a partner
        near-exactly at that overlap (only depths with votes).
    sides : int
        Sampled sides that show structure (could vote).
    """

    overlap: int
    source: str
    votes: dict = field(default_factory=dict)
    sides: int = 0

    @property
    def share(self):
        """Share of the sampled sides that voted for the overlap found."""
        return self.votes.get(self.overlap, 0) / self.sides if self.sides else 0.0

    def runner_up(self):
        """The depth with the most votes after the overlap found, or None."""
        others = {k: v for k, v in self.votes.items() if k != self.overlap}
        return max(others, key=lambda k: (others[k], -k)) if others else None

    def describe(self):
        """One line for the run's messages, the report page and ``inspect``."""
        if self.source == "given":
            return f"overlap {self.overlap} px (given)"
        second = self.runner_up()
        votes = f"{second} px, {self.votes[second] / self.sides:.0%}" if second is not None and self.sides else ""
        if self.overlap == 0:
            return f"no overlap found ({self.sides} sampled sides" + (f", most votes {votes})" if votes else ")")
        return (f"overlap {self.overlap} px found ({self.share:.0%} of {self.sides} sampled sides match exactly "
                "or nearly" + (f"; next {votes})" if votes else ")"))

    def facts(self):
        """As plain data, for the run summary and ``inspect --json``."""
        return {"pixels": int(self.overlap), "source": self.source, "sampled_sides": int(self.sides),
                "votes": {str(k): int(v) for k, v in sorted(self.votes.items())},
                "share": round(float(self.share), 4), "description": self.describe()}


def _deep_lines(pixels, mask, depth):
    """Per side, the lines 0..depth-1 steps in from the edge (the strips of
    :func:`stitch.tiles.edge_strips` read from the boundary in): a list of
    four ``(depth, length, bands)`` pixel arrays and four ``(depth, length)``
    validity masks (True: valid)."""
    strips, valid = edge_strips(pixels, mask, depth)
    return [s[:, ::-1].transpose(1, 0, 2) for s in strips], [v[:, ::-1].T for v in valid]


def _sample(tileset, rng):
    """Up to :data:`SAMPLE_TILES` tiles with structure, chosen by ``rng``."""
    pool = np.flatnonzero(~tileset.structureless())
    if len(pool) > SAMPLE_TILES:
        pool = np.sort(rng.choice(pool, SAMPLE_TILES, replace=False))
    return pool


def _grey_lines(x, valid):
    """Lines of scaled pixels ``(m, length, bands)`` as the grey level (band
    mean) smoothed along the line over :data:`SMOOTH_PX` pixels, and where
    that is defined: ``(m, length)`` values and float weights (1 or 0).

    Averaging bands and neighbouring pixels keeps what tells one line of
    ground from the next and damps what lossy compression adds (JPEG's
    chroma subsampling and block noise), so near-exact copies still stand out.
    """
    w = valid.astype(np.float32)
    g = x.mean(axis=-1) * w
    num, den = _box(g), _box(w)
    ok = den >= 0.5 - 1e-6
    out = np.where(ok, num / np.where(ok, den, 1.0), 0.0).astype(np.float32)
    return out, ok.astype(np.float32)


def _box(a):
    """Mean over a centred window of :data:`SMOOTH_PX` along axis 1, zeros beyond the ends."""
    half = SMOOTH_PX // 2
    c = np.cumsum(np.pad(a, ((0, 0), (half + 1, SMOOTH_PX - half - 1))), axis=1, dtype=np.float64)
    return ((c[:, SMOOTH_PX:] - c[:, :-SMOOTH_PX]) / SMOOTH_PX).astype(np.float32)


def _copies(tileset):
    """Per tile, an id shared with the tiles whose edges are identical to its
    own (:meth:`stitch.tiles.TileSet.duplicate_groups`): a copy's edge
    matches exactly, but is no overlap."""
    ids = np.arange(len(tileset))
    index = {name: i for i, name in enumerate(tileset.names)}
    for group in tileset.duplicate_groups():
        members = [index[name] for name in group]
        ids[members] = members[0]
    return ids


def _partners(tileset, mean, scale, copies):
    """Boundary lines of every side of every tile, both directions, grouped by
    line length: ``{length: (lines (m, length), weights (m, length), copy id
    of each line's tile, the lines one step inside (m, length))}`` (see
    :func:`_grey_lines`, :func:`_copies`); blank tiles left out."""
    out = {}
    keep = np.flatnonzero(~tileset.blank)
    for s in range(4):
        x = (tileset.edges.sides[s][keep].astype(np.float32) - mean) * scale
        lines, weights = _grey_lines(x[:, :, 1], tileset.edges.valid[s][keep, :, 1])
        inner, _ = _grey_lines(x[:, :, 0], tileset.edges.valid[s][keep, :, 0])
        parts = out.setdefault(lines.shape[1], ([], [], [], []))
        for a, b, c in ((lines, weights, inner), (lines[:, ::-1], weights[:, ::-1], inner[:, ::-1])):
            parts[0].append(np.ascontiguousarray(a))
            parts[1].append(np.ascontiguousarray(b))
            parts[2].append(copies[keep])
            parts[3].append(np.ascontiguousarray(c))
    return {k: tuple(np.concatenate(p) for p in parts) for k, parts in out.items()}


def _best_distances(queries, q_weights, q_tiles, partners):
    """Mean squared difference of each query line to its closest partner line
    of another tile that is not a copy of it (shared valid pixels only; inf
    with fewer than a quarter of the query's valid pixels shared), and which
    partner line that is."""
    lines, weights, tiles = partners[:3]
    masked = not (weights.all() and q_weights.all())
    q = queries * q_weights
    if masked:
        num = (q * q) @ weights.T + q_weights @ (lines * lines).T - 2.0 * (q @ lines.T)
        cnt = q_weights @ weights.T
    else:
        num = (q * q).sum(1)[:, None] + (lines * lines).sum(1)[None, :] - 2.0 * (q @ lines.T)
        cnt = np.full(num.shape, np.float32(queries.shape[1]))
    need = 0.25 * q_weights.sum(axis=1)[:, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        d = np.maximum(num, 0.0) / cnt
    d[(cnt < np.maximum(need, 1.0)) | (tiles[None, :] == q_tiles[:, None])] = np.inf
    which = d.argmin(axis=1)
    return d[np.arange(len(d)), which], which


def with_overlap(tileset, *, given=None, seed=0):
    """``tileset`` with the overlap :func:`find_overlap` finds (or ``given``)
    set, so that its cells step by the tile size less the overlap, and the
    finding."""
    found = find_overlap(tileset, given=given, seed=seed)
    return (replace(tileset, overlap=found.overlap) if found.overlap else tileset), found


def find_overlap(tileset, *, given=None, seed=0):
    """How many pixels the tiles of ``tileset`` share with each neighbour.

    Parameters
    ----------
    tileset : stitch.tiles.TileSet
    given : int, optional
        The overlap the user knows (``--overlap``; 0 for none): checked
        against the tile size, not searched.
    seed : int or numpy.random.Generator, optional
        Chooses the sampled tiles.

    Returns
    -------
    OverlapFinding

    Raises
    ------
    TileSetError
        Sides match at two overlaps, or only a few match at any: the
        candidates are named with the advice to give ``--overlap``.
    """
    limit = min(tileset.width, tileset.height) // 2
    if given is not None:
        if not 0 <= given <= limit:
            raise TileSetError(f"--overlap {given} must be between 0 and half the tile size ({limit} px)")
        return OverlapFinding(int(given), "given")
    if limit < 1 or len(tileset) < 2:
        return OverlapFinding(0, "none")
    rng = np.random.default_rng(seed)
    sample = _sample(tileset, rng)
    if len(sample) == 0:
        return OverlapFinding(0, "none")
    mean, scale = band_scaling(tileset.edges.sides, tileset.edges.valid)
    mean, scale = mean.astype(np.float32), scale.astype(np.float32)
    copies = _copies(tileset)
    partners = _partners(tileset, mean, scale, copies)
    dtype = tileset.edges.sides[0].dtype
    # Per sampled side: best-partner distance at each depth, and how much
    # the tile's own lines at that depth and the next differ.
    # One depth beyond the deepest overlap, so that a dip there has a
    # neighbour on both sides.
    probed = min(limit + 1, min(tileset.width, tileset.height) - 1)
    best, own, mirror = [], [], []
    for i in sample:
        pixels, mask = read_masked(tileset.folder / tileset.names[i], tileset.nodata, dtype)
        if pixels.shape[1:] != (tileset.height, tileset.width):
            pixels, mask = pad_to_cell(pixels, mask, tileset.width, tileset.height)
        lines, valid = _deep_lines(pixels, mask, probed + 1)
        for s in range(4):
            g, w = _grey_lines((lines[s].astype(np.float32) - mean) * scale, valid[s])
            pool = partners[g.shape[1]]
            d, which = _best_distances(g[:probed], w[:probed], np.full(probed, copies[i]), pool)
            best.append(d)
            both = w[:probed] * w[1:probed + 1]
            with np.errstate(divide="ignore", invalid="ignore"):
                step = (((g[:probed] - g[1:probed + 1]) ** 2) * both).sum(1) / both.sum(1)
            own.append(np.nan_to_num(step, nan=0.0))
            # A 1 px overlap shares the edge line, and beyond it each tile
            # holds other ground; a mirrored copy holds the same beyond it too.
            inner = pool[3][which[0]]
            mirror.append(np.mean((g[1] - inner) ** 2) <= EXACT_SHARE * max(own[-1][0], 1e-12))
    best, own = np.array(best), np.array(own)  # (sides, probed): index d is overlap d + 1
    votes, sides = _votes(best, own, limit, np.array(mirror))
    return _decide(votes, sides, tileset)


def _votes(best, own, limit, mirror):
    """Each sampled side's vote (an overlap of 1 to ``limit`` pixels), and how
    many sides could vote.

    A side votes for the depth of its closest partner when that is a clear
    dip: at most :data:`DIP_RATIO` of the depths on either side (``best``
    holds one depth beyond ``limit`` for that). An overlap of 1 px has a
    neighbour on one side only, and tiles that meet edge to edge dip there
    too (the next tile's edge continues this one's), so it also needs a
    near-exact copy: at most :data:`EXACT_SHARE` of how much the tile's own
    first two lines differ, whose next lines (``mirror``) are not a copy too.
    """
    finite = np.where(np.isfinite(best), best, np.inf)
    structured = (own > 0).any(axis=1) & np.isfinite(best).any(axis=1)
    d_star = np.argmin(finite[:, :limit], axis=1)
    rows = np.arange(len(best))
    low = finite[rows, d_star]
    before = np.where(d_star > 0, finite[rows, np.maximum(d_star - 1, 0)], np.inf)
    inside = d_star + 1 < best.shape[1]
    after = np.where(inside, finite[rows, np.minimum(d_star + 1, best.shape[1] - 1)], np.inf)
    vote = structured & np.isfinite(low) & (low <= DIP_RATIO * np.minimum(before, after))
    vote &= np.where(d_star > 0, inside, (low <= EXACT_SHARE * own[:, 0]) & ~mirror)
    depths, counts = np.unique(d_star[vote] + 1, return_counts=True)
    return {int(d): int(c) for d, c in zip(depths, counts)}, int(structured.sum())


def _decide(votes, sides, tileset):
    """The overlap the votes show, none, or a refusal naming the candidates.

    Chance dips spread over every depth; a true overlap gathers at least
    :data:`MIN_VOTE_SHARE` of the sides, :data:`MIN_VOTE_LEAD` times the next
    depth. Two depths that both gather that share are two overlaps (two
    surveys in one folder); one that leads but gathers less than that, yet
    more than :data:`CHANCE_VOTE_SHARE`, is an overlap for a few tiles only.
    Either is refused rather than guessed.
    """
    if not votes or sides == 0:
        return OverlapFinding(0, "none", votes, sides)
    ranked = sorted(votes, key=lambda k: (-votes[k], k))
    top = votes[ranked[0]]
    second = votes[ranked[1]] if len(ranked) > 1 else 0
    leads = top >= MIN_VOTE_LEAD * second
    if top >= MIN_VOTE_SHARE * sides and leads:
        found = OverlapFinding(int(ranked[0]), "found", votes, sides)
        log.info("%s", found.describe())
        return found
    named = ", ".join(f"{k} px ({votes[k]} of {sides} sampled sides)" for k in ranked[:3])
    advice = "give --overlap PX if you know it, or --overlap 0 for tiles that meet edge to edge"
    if second >= MIN_VOTE_SHARE * sides:
        raise TileSetError(f"the tiles in {str(tileset.folder)!r} match at more than one overlap: {named}; {advice}")
    if leads and top >= CHANCE_VOTE_SHARE * sides and top >= MIN_FEW_VOTES:
        raise TileSetError(f"the tiles in {str(tileset.folder)!r} match at an overlap only for a few tiles: {named}; "
                           f"{advice}")
    return OverlapFinding(0, "none", votes, sides)


def overlap_strips(tileset, overlap):
    """The ``overlap``-pixel strips of every side of every tile, as the seam
    engine takes them (:class:`stitch.tiles.EdgeStrips` of depth ``overlap``,
    marked ``shared``: index ``overlap - 1`` is the boundary pixel, index 0
    the deepest).

    Partial edge tiles are cut from their full cell at its upper left, as
    stored upright; :func:`stitch.partial.partial_edges` moves turned ones.
    """
    edges, _ = cut_strips(tileset.paths, tileset.width, tileset.height, tileset.count, tileset.nodata,
                          tileset.edges.sides[0].dtype, depth=int(overlap), shared=True)
    return edges
