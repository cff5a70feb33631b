"""The seam table: every seam the search may form, scored, ranked and normalised.

For each pair of sides that the allowed orientations can bring together, a
*block* of seam costs is computed with a measure from :mod:`stitch.measures`.
Small sets keep the blocks (dense lookups); large ones keep only each side's
``k`` best partners, computed block by block in row chunks, so memory grows
linearly with the tile count. Either way the table also holds each side's
second-best cost (to normalise costs across tiles), best buddies and a
per-seam confidence.

Blank tiles (constant or all nodata) and sides with no valid pixels get a
neutral score: the median of their block, so they neither attract nor repel.
"""

from __future__ import annotations

import logging
import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np
from numba import njit, prange
from threadpoolctl import threadpool_limits

from .errors import OptionError
from .orientation import facing_side
from .measures import AUTO, DEFAULT_MEASURE, available_measures, call_measure, get_measure

__all__ = [
    "AUTO_LIMIT",
    "DEFAULT_MEASURE",
    "SeamTable",
    "auto_tries_prediction",
    "available_measures",
    "band_scaling",
    "best_buddy_share",
    "count_blocks",
    "footprint_mismatch",
    "footprint_rows",
    "keeps_dense",
    "measure_names",
    "normalize_strips",
    "score_seams",
    "seam_block",
    "side_pairs",
    "usable_rows",
]

log = logging.getLogger(__name__)

#: Per-band spread the strips are scaled to before scoring; close to that of
#: 8-bit photographs, so the unit dummy gradients of MGC regularise 16-bit and
#: float rasters as they do 8-bit ones.
_TARGET_STD = 48.0

#: Dense blocks are kept while they fit in this many bytes.
DENSE_LIMIT_BYTES = 512 * 2**20

#: Largest chunk of a block computed at once, in bytes of float32 costs.
CHUNK_BYTES = 64 * 2**20

#: Pieces a chunk is split into, one per worker thread. Fixed, not the core
#: count, so the sums and therefore the costs are the same on any machine.
PIECES_PER_CHUNK = 2


def band_scaling(sides, valid=None):
    """Per-band offset and factor that bring the whole tile set to a common spread.

    Parameters
    ----------
    sides : sequence of ndarray
        ``EdgeStrips.sides``: arrays ``(n, length, 2, bands)``.
    valid : sequence of ndarray, optional
        Masks of valid pixels.

    Returns
    -------
    mean, scale : ndarray, shape (bands,)
        Scaled values are ``(x - mean) * scale``.
    """
    bands = sides[0].shape[-1]
    total = np.zeros(bands)
    total_sq = np.zeros(bands)
    count = 0
    for s, side in enumerate(sides):
        x = side.reshape(-1, bands) if valid is None or valid[s].all() else side[valid[s]]
        total += x.sum(axis=0, dtype=np.float64)
        total_sq += np.einsum("ij,ij->j", x, x, dtype=np.float64)
        count += len(x)
    mean = total / max(count, 1)
    std = np.sqrt(np.maximum(total_sq / max(count, 1) - mean**2, 0.0))
    # A constant band carries no information; scale 1 keeps it finite.
    scale = np.where(std > 0, _TARGET_STD / np.where(std > 0, std, 1), 1.0)
    return mean, scale


def normalize_strips(sides, valid=None):
    """Scale every band to zero mean and a common spread over the whole set.

    Returns float32 copies of ``sides``; invalid pixels are set to the band
    mean (0). Scaling is per band and shared by all tiles, so 16-bit, signed
    and float rasters score like 8-bit ones without changing which seam is best.
    """
    mean, scale = band_scaling(sides, valid)
    out = []
    for s, side in enumerate(sides):
        x = side.astype(np.float32) - mean.astype(np.float32)
        x *= scale.astype(np.float32)
        if valid is not None and not valid[s].all():
            x[~valid[s]] = 0.0
        out.append(x)
    return out


def side_pairs(orientations):
    """(side_a, side_b, flip) triples the allowed orientations can make meet.

    ``side_a`` faces right (or down) and ``side_b`` left (or up); the set is
    closed under swapping the two sides.
    """
    pairs = set()
    for ox in orientations:
        for oy in orientations:
            for d in (1, 2):
                a = int(facing_side(ox % 4, ox >= 4, d))
                b = int(facing_side(oy % 4, oy >= 4, (d + 2) % 4))
                f = int((ox >= 4) != (oy >= 4))
                pairs.add((a, b, f))
                pairs.add((b, a, f))
    return sorted(pairs)


def count_blocks(orientations):
    """Cost blocks a seam table scores for these orientations: one per
    unordered pair of sides (and flip) that can meet.

    Examples
    --------
    >>> count_blocks((0,)), count_blocks((0, 1, 2, 3))
    (2, 10)
    """
    return len({(min(a, b), max(a, b), f) for a, b, f in side_pairs(orientations)})


def keeps_dense(n_tiles, blocks):
    """Whether a table of ``blocks`` cost blocks for ``n_tiles`` tiles keeps
    every cost (they fit in :data:`DENSE_LIMIT_BYTES`) or only candidates."""
    return blocks * n_tiles * n_tiles * 4 <= DENSE_LIMIT_BYTES


def usable_rows(valid, shared=False):
    """Rows of strips usable by a measure, from pixel validity ``(..., length,
    depth)``: inner and boundary pixel both valid; for the ``shared`` strips
    of overlapping tiles (:class:`stitch.tiles.EdgeStrips`), any pixel valid
    (every pixel counts as it is, nodata at the band mean, so a partner must
    have nodata there too: a nodata column at a raster's edge falls inside
    the shared strip)."""
    if shared:
        return valid.any(axis=-1)
    return valid[..., 0] & valid[..., -1]


def footprint_rows(valid, shared=False):
    """Per row, what the footprint rule compares across a seam
    (:func:`footprint_mismatch`): the boundary pixel's validity; for
    ``shared`` strips, whether the whole row is valid, which two true
    neighbours share because they hold the same pixels (their boundary
    pixels are not the same pixel)."""
    if shared:
        return valid.all(axis=-1)
    return valid[..., -1]


def seam_block(measure, left, right, left_valid=None, right_valid=None, *, flip=False):
    """One block of seam costs, a pure function of two edge arrays.

    Parameters
    ----------
    measure : callable
        A measure from :mod:`stitch.measures` (or a plugin).
    left, right : ndarray, shape (n, length, depth, bands)
        Normalised strips of the two sides, each in its own row order
        (:mod:`stitch.tiles`); ``depth`` is 2, or the overlap for
        :func:`stitch.measures.overlap`.
    left_valid, right_valid : ndarray of bool, shape (n, length), optional
        Usable rows.
    flip : bool
        Exactly one of the two tiles is mirrored: the rows already line up.
        Otherwise the right strips are read in reverse, which is how two
        unmirrored tiles meet.

    Returns
    -------
    ndarray, shape (len(left), len(right)), float32
        NaN where the measure had no rows to compare.
    """
    if not flip:
        right = right[:, ::-1]
        right_valid = None if right_valid is None else right_valid[:, ::-1]
    block = call_measure(measure, left, np.ascontiguousarray(right), left_valid,
                         None if right_valid is None else np.ascontiguousarray(right_valid))
    block = np.asarray(block, dtype=np.float32)
    if block.shape != (len(left), len(right)):
        raise OptionError(f"seam measure returned shape {block.shape}, expected {(len(left), len(right))}")
    return block


@njit(parallel=True, cache=True)
def _count_bad(block):
    """Number of entries that are not finite or are negative."""
    n, m = block.shape
    total = 0
    for i in prange(n):
        c = 0
        for j in range(m):
            v = block[i, j]
            if not (v >= 0.0 and v < np.inf):
                c += 1
        total += c
    return total


#: A side takes no best buddy when fewer than this share of its rows are
#: valid (our choice, no source).
MIN_VALID_SHARE = 0.25

#: How much a seam costs, in units of a good seam's cost (the median over the
#: block's rows of their cheapest entry), when the valid-data footprints of
#: its two sides disagree along their whole length (a side with valid pixels
#: against one that is all nodata); partial disagreement costs its share.
#: Our choice (no source): large enough that a nodata collar's edge must
#: continue across a seam.
FOOTPRINT_WEIGHT = 20.0

#: Rows of footprint disagreement a true seam may show: a nodata edge that
#: crosses the seam at a slant moves by up to about a row between the two
#: boundary columns, plus one for the pixel grid (common practice, no source).
FOOTPRINT_SLACK = 2


def footprint_mismatch(left_valid, right_valid, *, flip=False, slack=0):
    """Share of a seam's rows where one side's boundary pixel is valid data
    and the other's is nodata, beyond ``slack`` rows, for every pair of
    sides (one matrix product).

    Parameters
    ----------
    left_valid, right_valid : ndarray of bool, shape (n, length), (m, length)
        Validity of the boundary pixels (strip column 1).
    flip : bool
        As in :func:`seam_block`: without it the right sides are read in reverse.

    Returns
    -------
    ndarray, shape (n, m), float32, in [0, 1]

    Examples
    --------
    >>> a = np.array([[True, True, False, False]])
    >>> float(footprint_mismatch(a, a, flip=True)[0, 0]), float(footprint_mismatch(a, ~a, flip=True)[0, 0])
    (0.0, 1.0)
    """
    a = np.asarray(left_valid, np.float32)
    b = np.asarray(right_valid, np.float32)
    if not flip:
        b = b[:, ::-1]
    length = max(a.shape[1], 1)
    mismatch = a.sum(axis=1)[:, None] + b.sum(axis=1)[None, :] - 2.0 * (a @ np.ascontiguousarray(b).T)
    excess = np.maximum(np.rint(mismatch) - slack, 0.0)
    return np.clip(excess / length, 0.0, 1.0).astype(np.float32)


#: Valid rows two sides must share before their pixels are evidence for or
#: against the seam: fewer, and the pair costs a typical plausible seam (plus
#: its footprint term), as much as the search's reward for a seam, so that
#: two sides that are both nodata, such as water marked as nodata on either
#: side, neither attract nor repel against an empty cell. A measure scaled up
#: from one shared row is noise (our choice, no source).
MIN_SHARED_ROWS = 2

#: Side slots sampled to estimate that typical cost on large sets.
TYPICAL_SAMPLE = 512


def shared_rows(left_rows, right_rows, *, flip=False):
    """Usable rows two sides have in common, for every pair (one matrix product).

    Examples
    --------
    >>> a = np.array([[True, True, False, False]])
    >>> int(shared_rows(a, a, flip=True)[0, 0]), int(shared_rows(a, a)[0, 0])
    (2, 0)
    """
    a = np.asarray(left_rows, np.float32)
    b = np.asarray(right_rows, np.float32)
    if not flip:
        b = b[:, ::-1]
    return np.rint(a @ np.ascontiguousarray(b).T)


def _evidence(block, rows_a, rows_b, edge_a, edge_b, flip):
    """What a measured block of sides that hold nodata says: its costs, ``inf``
    where the two sides share fewer than :data:`MIN_SHARED_ROWS` valid rows
    (or the measure had nothing to compare), and their footprint mismatch."""
    none = shared_rows(rows_a, rows_b, flip=flip) < MIN_SHARED_ROWS - 0.5
    none |= ~np.isfinite(block)
    none |= block < 0
    costs = np.where(none, np.float32(np.inf), block).astype(np.float32, copy=False)
    return costs, footprint_mismatch(edge_a, edge_b, flip=flip, slack=FOOTPRINT_SLACK)


def _footprint_term(mismatch, scale):
    """Cost of a footprint mismatch, in units of ``scale`` (a good seam's cost)."""
    return np.float32(FOOTPRINT_WEIGHT) * np.float32(max(scale, 1e-6)) * mismatch


def _hole_costs(boundary_ok, scale):
    """Per side slot, the footprint term of the side against an all-nodata one."""
    share = [footprint_mismatch(v, np.zeros((1, v.shape[1]), bool), flip=True, slack=FOOTPRINT_SLACK)[:, 0]
             for v in boundary_ok]
    return _footprint_term(np.stack(share, axis=1).reshape(-1), scale).astype(np.float32)


def _typical_costs(fn, sides, rows_ok, boundary_ok, unique, dead, pool):
    """Per block, a good seam's cost (the median over its sampled rows of their
    cheapest entry, the footprint term's unit) and, over every block, the
    typical cost of a plausible seam: the median over sampled live side
    slots of their second-best cost, as the search's reward is taken from
    the finished table (:class:`stitch.search.problem.Problem`). Pairs with
    too few shared rows are left out of both.

    On sets of at most :data:`TYPICAL_SAMPLE` tiles every slot is sampled,
    and each block's :func:`_evidence` is returned too, so that the table is
    not measured twice; otherwise that list is empty.
    """
    n = sides[0].shape[0]
    sample = np.unique(np.linspace(0, n - 1, min(n, TYPICAL_SAMPLE)).astype(np.int64))
    every = len(sample) == n
    tiles = np.arange(n)
    two = np.full((4, len(sample), 2), np.inf, np.float32)  # the two cheapest costs of each sampled slot
    scales, evidence = [], []

    def priced(rows, cols, a, b, f, scale=None):
        """Sampled block with the footprint term; its scale from it unless given."""
        ev = _evidence(_rows_in_parallel(fn, sides[a][rows], sides[b][cols], rows_ok[a][rows], rows_ok[b][cols],
                                         bool(f), pool),
                       rows_ok[a][rows], rows_ok[b][cols], boundary_ok[a][rows], boundary_ok[b][cols], bool(f))
        costs = ev[0].copy()
        costs[tiles[rows][:, None] == tiles[cols][None, :]] = np.inf  # a tile never meets itself
        if scale is None:
            best = costs.min(axis=1)
            best = best[np.isfinite(best)]
            scale = np.float32(np.median(best)) if best.size else np.float32(1.0)
            if scale <= 1e-6 and costs.shape[1] > 1:
                # Good seams cost nothing (the shared strips of overlapping
                # lossless tiles, or mostly flat ground): the unit is then a
                # runner-up's cost, so a nodata edge must still continue.
                second = np.partition(costs, 1, axis=1)[:, 1]
                second = second[np.isfinite(second) & (second > 0)]
                scale = np.float32(np.median(second)) if second.size else np.float32(1.0)
        return ev, costs + _footprint_term(ev[1], scale), scale

    def fold(side, costs):  # costs: (sampled slots, partners)
        two[side] = np.partition(np.concatenate([two[side], costs], axis=1), 1, axis=1)[:, :2]

    for a, b, f in unique:
        ev, rows_priced, scale = priced(sample, slice(None), a, b, f)
        scales.append(scale)
        if every:
            evidence.append(ev)
        fold(a, rows_priced)
        if a != b:  # side b's entries: the block's columns
            fold(b, rows_priced.T if every else priced(slice(None), sample, a, b, f, scale)[1].T)
    live = two[:, :, 1][~dead[sample].T]
    live = live[np.isfinite(live) & (live > 0)]
    typical = np.float32(np.median(live) if live.size else np.median(scales))
    return scales, typical, evidence


def _neutralize(block, dead_rows, dead_cols):
    """Replace NaN, negative and dead entries by the block's median (neutral)."""
    if not dead_rows.any() and not dead_cols.any() and _count_bad(block) == 0:
        return block
    bad = ~np.isfinite(block)
    np.logical_or(bad, block < 0, out=bad)
    if dead_rows.any():
        bad[dead_rows] = True
    if dead_cols.any():
        bad[:, dead_cols] = True
    if not bad.any():
        return block
    good = block[~bad]
    neutral = np.float32(np.median(good)) if good.size else np.float32(1.0)
    block[bad] = neutral
    return block


@njit(parallel=True, cache=True)
def _topk_rows_kernel(block, k):
    """Indices and values of the k smallest entries of each row, ascending."""
    n, m = block.shape
    idx = np.full((n, k), -1, np.int64)
    val = np.full((n, k), np.inf, np.float32)
    for i in prange(n):
        for j in range(m):
            v = block[i, j]
            if v < val[i, k - 1]:
                p = k - 1
                while p > 0 and val[i, p - 1] > v:
                    val[i, p] = val[i, p - 1]
                    idx[i, p] = idx[i, p - 1]
                    p -= 1
                val[i, p] = v
                idx[i, p] = j
    return idx, val


@njit(parallel=True, cache=True)
def _topk_cols_kernel(block, k):
    """Like :func:`_topk_rows_kernel` for columns, reading the block row by row."""
    n, m = block.shape
    idx = np.full((m, k), -1, np.int64)
    val = np.full((m, k), np.inf, np.float32)
    worst = np.full(m, np.inf, np.float32)  # val[:, k - 1], kept contiguous for the hot test
    stride = 512
    for c0 in prange((m + stride - 1) // stride):
        lo = c0 * stride
        hi = min(m, lo + stride)
        for i in range(n):
            for j in range(lo, hi):
                v = block[i, j]
                if v < worst[j]:
                    p = k - 1
                    while p > 0 and val[j, p - 1] > v:
                        val[j, p] = val[j, p - 1]
                        idx[j, p] = idx[j, p - 1]
                        p -= 1
                    val[j, p] = v
                    idx[j, p] = i
                    worst[j] = val[j, k - 1]
    return idx, val


def _merge_topk(codes, costs, new_codes, new_costs, k):
    """Keep the k lowest costs per row of two candidate lists."""
    all_codes = np.concatenate([codes, new_codes], axis=1)
    all_costs = np.concatenate([costs, new_costs], axis=1)
    kk = min(k, all_costs.shape[1])
    part = np.argpartition(all_costs, kk - 1, axis=1)[:, :kk]
    pc = np.take_along_axis(all_costs, part, axis=1)
    order = np.argsort(pc, axis=1, kind="stable")
    part = np.take_along_axis(part, order, axis=1)
    out_codes = np.full((len(codes), k), -1, np.int64)
    out_costs = np.full((len(codes), k), np.inf, np.float32)
    out_codes[:, :kk] = np.take_along_axis(all_codes, part, axis=1)
    out_costs[:, :kk] = np.take_along_axis(all_costs, part, axis=1)
    return out_codes, out_costs


def _topk(block, codes, k, *, axis):
    """Top-k partner codes and costs along rows (axis 1) or columns (axis 0)."""
    kk = min(k, block.shape[axis])
    kernel = _topk_rows_kernel if axis == 1 else _topk_cols_kernel
    idx, val = kernel(block, kk)
    return codes[np.maximum(idx, 0)], val


def _rows_in_parallel(fn, left, right, left_valid, right_valid, flip, pool):
    """A block computed in fixed pieces of rows, each with one BLAS thread.

    The pieces do not depend on how many threads run them, so the costs are
    bit-identical whatever the machine's core count (multi-threaded BLAS sums
    in an order that depends on the thread count).
    """
    step = max(1, -(-len(left) // PIECES_PER_CHUNK))
    pieces = [(r0, min(len(left), r0 + step)) for r0 in range(0, len(left), step)]

    def one(piece):
        r0, r1 = piece
        return seam_block(fn, left[r0:r1], right, None if left_valid is None else left_valid[r0:r1],
                          right_valid, flip=flip)

    if len(pieces) == 1:
        return one(pieces[0])
    return np.concatenate(list(pool.map(one, pieces)), axis=0)


@dataclass(frozen=True, eq=False)
class SeamTable:
    """Seam costs for every pair of sides the search may join.

    Attributes
    ----------
    n_tiles : int
    orientations : tuple of int
        Allowed orientation codes (see :mod:`stitch.layout`).
    dense : bool
        True when ``blocks`` holds every cost; otherwise only candidates are
        kept and any other pair costs ``max(fallback[a], fallback[b])``.
    blocks : ndarray, shape (n_blocks, n_tiles, n_tiles), float32
        ``blocks[block_index[a, b, f]][i, j]`` is the cost of side ``a`` of
        tile ``i`` against side ``b`` of tile ``j`` (flip ``f``: one of them
        mirrored); when ``transposed[a, b, f]`` the block is read as ``[j, i]``.
        A tile against itself costs ``inf``. Empty when not dense.
    block_index : ndarray, shape (4, 4, 2), int64; -1 where the sides never meet.
    transposed : ndarray, shape (4, 4, 2), bool
    candidates : ndarray, shape (4 * n_tiles, k), int64
        For each side slot, partners ``2 * slot + flip`` from best to worst;
        -1 pads.
    candidate_costs : ndarray, shape (4 * n_tiles, k), float32
    fallback : ndarray, shape (4 * n_tiles,), float32
        Worst kept candidate cost of each slot (cost of unlisted pairs).
    second : ndarray, shape (4 * n_tiles,), float32
        Second-best cost of each slot (normalises costs across tiles).
    best_buddies : ndarray, shape (4 * n_tiles,), int64
        ``2 * slot + flip`` of the mutual best partner, or -1.
    dead : ndarray, shape (4 * n_tiles,), bool
        Slots scored neutrally (blank tile, or no valid pixel on that side).
    measure : str
    coverage : ndarray, shape (4 * n_tiles,), float32
        Share of each side's boundary pixels that hold valid data (1 without
        nodata); below 1 somewhere, the set has a nodata collar.
    hole_costs : ndarray, shape (4 * n_tiles,), float32, optional
        What each side slot costs facing an empty cell inside the grid: an
        empty cell is a skipped tile that held only nodata, so valid data
        facing it is a footprint mismatch (:func:`footprint_mismatch`
        against an all-nodata side, with :data:`FOOTPRINT_WEIGHT`). None
        without nodata: then an empty cell is a missing tile and costs
        nothing.
    """

    n_tiles: int
    orientations: tuple[int, ...]
    dense: bool
    blocks: np.ndarray
    block_index: np.ndarray
    transposed: np.ndarray
    candidates: np.ndarray
    candidate_costs: np.ndarray
    fallback: np.ndarray
    second: np.ndarray
    best_buddies: np.ndarray
    dead: np.ndarray
    measure: str
    coverage: np.ndarray | None = None
    hole_costs: np.ndarray | None = None

    @property
    def has_collar(self):
        """Do some sides hold nodata (a collar, as skipped empty tiles leave)?"""
        return self.coverage is not None and bool((self.coverage < 1).any())

    def cost(self, slot_a, slot_b, flip=0):
        """Cost of joining two side slots (vectorised over arrays).

        Symmetric: the pair is always read from its lower slot, as the
        compiled search reads it.
        """
        slot_a, slot_b, flip = (np.asarray(v, np.int64) for v in np.broadcast_arrays(slot_a, slot_b, flip))
        slot_a, slot_b = np.minimum(slot_a, slot_b), np.maximum(slot_a, slot_b)
        sa, sb = slot_a % 4, slot_b % 4
        idx = self.block_index[sa, sb, flip]
        if self.dense:
            tr = self.transposed[sa, sb, flip]
            ta, tb = slot_a // 4, slot_b // 4
            i, j = np.where(tr, tb, ta), np.where(tr, ta, tb)
            return np.where(idx >= 0, self.blocks[np.maximum(idx, 0), i, j], np.inf)
        out = np.maximum(self.fallback[slot_a], self.fallback[slot_b]).astype(np.float64)
        for a, b, f in ((slot_b, slot_a, flip), (slot_a, slot_b, flip)):  # the lower slot's list wins
            hit = self.candidates[a] == (2 * b + f)[..., None]
            found = hit.any(axis=-1)
            val = np.take_along_axis(self.candidate_costs[a], hit.argmax(axis=-1)[..., None], axis=-1)[..., 0]
            out = np.where(found, val, out)
        return np.where(idx >= 0, out, np.inf)

    def confidence(self, slot_a, slot_b, flip=0):
        """Seam confidence in [0, 1]: ``1 - cost / second-best`` of both sides, clipped."""
        c = self.cost(slot_a, slot_b, flip)
        sec = np.minimum(self.second[slot_a], self.second[slot_b])
        with np.errstate(divide="ignore", invalid="ignore"):
            r = np.where(sec > 0, 1.0 - c / sec, 0.0)
        r = np.where(self.dead[slot_a] | self.dead[slot_b], 0.0, r)
        return np.clip(np.nan_to_num(r, nan=0.0), 0.0, 1.0)


#: ``measure="auto"`` also tries ``prediction`` (ten to twenty times dearer
#: than MGC) while ``n_tiles**2 * blocks * side_length * bands`` stays within
#: this (``blocks``: 2 upright, 10 with quarter turns): about 5 s of
#: prediction on two cores, e.g. 1,000 upright RGB tiles of 28 px or 450
#: with quarter turns, fewer for longer sides. Larger sets get MGC alone.
AUTO_LIMIT = 2e8

#: The two measures ``auto`` chooses between, the cheaper first (it wins ties).
AUTO_CHOICES = ("mgc", "prediction")


def best_buddy_share(table):
    """Share of live side slots whose best match is mutual (a best buddy).

    Measures that rank true neighbours first more often also produce more
    best buddies (Pomeranz, Shemesh & Ben-Shahar, CVPR 2011, use them as an
    estimate of correctness), so this compares measures without knowing the
    answer.
    """
    live = ~table.dead
    return float(np.mean(table.best_buddies[live] >= 0)) if live.any() else 0.0


def auto_tries_prediction(n_tiles, blocks, side_length, bands):
    """Whether ``measure="auto"`` scores a set with prediction as well as MGC
    (see :data:`AUTO_LIMIT`); ``blocks`` is the number of cost blocks the
    allowed orientations need (2 upright, 10 with quarter turns)."""
    return float(n_tiles) * n_tiles * blocks * side_length * bands <= AUTO_LIMIT


def measure_names():
    """What ``measure`` accepts by name: ``"auto"``, then every registered measure."""
    return [AUTO, *available_measures()]


def _score_auto(edges, orientations, progress, **kw):
    n, _, _, bands = edges.sides[0].shape
    length = max(s.shape[1] for s in edges.sides)
    if not auto_tries_prediction(n, count_blocks(orientations), length, bands):
        log.info("seam measure: %s (%d tiles: too many to also try %s)", AUTO_CHOICES[0], n, AUTO_CHOICES[1])
        return score_seams(edges, orientations=orientations, measure=AUTO_CHOICES[0], progress=progress, **kw)

    def pass_progress(i):  # both passes on one bar
        if progress is None:
            return None
        return lambda stage, done, total: progress(stage, i * total + done, 2 * total)

    tables = [score_seams(edges, orientations=orientations, measure=name, progress=pass_progress(i), **kw)
              for i, name in enumerate(AUTO_CHOICES)]
    shares = [best_buddy_share(t) for t in tables]
    best = int(np.argmax(shares))  # first of equals: the cheaper measure
    log.info("seam measure: %s (best-buddy share %s)", AUTO_CHOICES[best],
             ", ".join(f"{m} {s:.3f}" for m, s in zip(AUTO_CHOICES, shares)))
    return tables[best]


def score_seams(edges, *, orientations=(0,), measure=DEFAULT_MEASURE, k=16, blank=None, dense=None, progress=None):
    """Score every seam the allowed orientations can form.

    Parameters
    ----------
    edges : stitch.tiles.EdgeStrips
    orientations : tuple of int, optional
        Allowed orientation codes, from :func:`stitch.layout.allowed_orientations`.
    measure : str or callable, optional
        A registered measure name or a measure function. ``"auto"`` (the
        default) scores with MGC and with prediction and keeps the table with
        the larger :func:`best_buddy_share`; sets above :data:`AUTO_LIMIT`
        get MGC. The table's ``measure`` names the one used.
    k : int, optional
        Candidates kept per side slot.
    blank : ndarray of bool, optional
        Tiles to score neutrally (constant or all nodata).
    dense : bool, optional
        Keep every cost (True) or only candidates (False); by default dense
        while the blocks fit in :data:`DENSE_LIMIT_BYTES`.
    progress : callable, optional
        Called as ``progress("seams", done, total)`` per computed chunk.

    Returns
    -------
    SeamTable
    """
    if measure == AUTO:
        return _score_auto(edges, orientations, progress, k=k, blank=blank, dense=dense)
    fn = get_measure(measure) if isinstance(measure, str) else measure
    name = measure if isinstance(measure, str) else getattr(measure, "__name__", "custom")
    sides = normalize_strips(edges.sides, edges.valid)
    rows_ok = [usable_rows(v, edges.shared) for v in edges.valid]
    masked = not all(r.all() for r in rows_ok)
    boundary_ok = [footprint_rows(v, edges.shared) for v in edges.valid]  # what the footprint rule compares
    n = sides[0].shape[0]
    blank = np.zeros(n, bool) if blank is None else np.asarray(blank, bool)
    dead = np.stack([blank | (r.sum(axis=1) < 2) for r in rows_ok], axis=1)  # (n, 4)
    # A side with few valid rows (mostly nodata) is scored, but too little to
    # go on for a best buddy: a few pixels left by a tilted nodata edge rank
    # impostors first.
    weak = dead | np.stack([r.sum(axis=1) < MIN_VALID_SHARE * r.shape[1] for r in rows_ok], axis=1)

    block_index = np.full((4, 4, 2), -1, np.int64)
    transposed = np.zeros((4, 4, 2), bool)
    unique = []
    for a, b, f in side_pairs(orientations):
        if block_index[a, b, f] >= 0 or sides[a].shape[1] != sides[b].shape[1]:
            continue  # done already, or sides of different length never meet
        block_index[a, b, f] = block_index[b, a, f] = len(unique)
        transposed[b, a, f] = a != b
        unique.append((a, b, f))
    if dense is None:
        dense = keeps_dense(n, len(unique))
    blocks = np.empty((len(unique) if dense else 0, n, n), np.float32)

    k = max(2, min(k, 8 * n))
    cand = np.full((4 * n, k), -1, np.int64)
    cand_cost = np.full((4 * n, k), np.inf, np.float32)
    chunk = max(1, CHUNK_BYTES // (4 * max(n, 1)))
    tiles = np.arange(n)
    n_chunks = len(unique) * ((n + chunk - 1) // chunk)
    done = 0
    pool = ThreadPoolExecutor(max_workers=os.cpu_count() or 1)
    with threadpool_limits(limits=1, user_api="blas"), pool:
        if masked:
            scales, typical, evidence = _typical_costs(fn, sides, rows_ok, boundary_ok, unique, dead, pool)
        for idx, (a, b, f) in enumerate(unique):
            col_codes = 2 * (4 * tiles + b) + f
            for r0 in range(0, n, chunk):
                r1 = min(n, r0 + chunk)
                if masked:
                    # Too few shared rows is no evidence either way (the pair
                    # costs a typical seam); the valid-data footprint is: a
                    # nodata edge that crosses a seam continues on the other side.
                    if evidence and r1 - r0 == n:
                        costs, mismatch = evidence[idx]
                    else:
                        ra, rb = rows_ok[a][r0:r1], rows_ok[b]
                        costs, mismatch = _evidence(_rows_in_parallel(fn, sides[a][r0:r1], sides[b], ra, rb, bool(f),
                                                                      pool),
                                                    ra, rb, boundary_ok[a][r0:r1], boundary_ok[b], bool(f))
                    blk = np.where(np.isfinite(costs), costs, typical) + _footprint_term(mismatch, scales[idx])
                    blk = _neutralize(blk.astype(np.float32, copy=False), blank[r0:r1], blank)
                else:
                    blk = _rows_in_parallel(fn, sides[a][r0:r1], sides[b], None, None, bool(f), pool)
                    blk = _neutralize(blk, dead[r0:r1, a], dead[:, b])
                blk[np.arange(r1 - r0), np.arange(r0, r1)] = np.inf  # a tile never meets itself
                if dense:
                    blocks[idx, r0:r1] = blk
                slots = 4 * tiles[r0:r1] + a
                new = _topk(blk, col_codes, k, axis=1)
                cand[slots], cand_cost[slots] = _merge_topk(cand[slots], cand_cost[slots], *new, k)
                if a != b:
                    row_codes = 2 * (4 * tiles[r0:r1] + a) + f
                    new = _topk(blk, row_codes, k, axis=0)
                    cslots = 4 * tiles + b
                    cand[cslots], cand_cost[cslots] = _merge_topk(cand[cslots], cand_cost[cslots], *new, k)
                done += 1
                if progress is not None:
                    progress("seams", done, n_chunks)
    cand[~np.isfinite(cand_cost)] = -1
    second = np.where(np.isfinite(cand_cost[:, 1]), cand_cost[:, 1], 0).astype(np.float32)
    finite = np.where(np.isfinite(cand_cost), cand_cost, -np.inf)
    fallback = np.maximum(finite.max(axis=1), 0).astype(np.float32)

    dead_slots = dead.reshape(-1)
    weak_slots = weak.reshape(-1)
    best = cand[:, 0]
    buddies = np.full(4 * n, -1, np.int64)
    ok = (best >= 0) & ~weak_slots
    partner = np.where(ok, best // 2, 0)
    mutual = ok & (cand[partner, 0] == 2 * np.arange(4 * n) + best % 2) & ~weak_slots[partner]
    buddies[mutual] = best[mutual]
    log.debug("scored %d blocks of %d tiles with %s (%s); %d best-buddy sides",
              len(unique), n, name, "dense" if dense else "candidates only", mutual.sum())
    return SeamTable(
        n_tiles=n, orientations=tuple(orientations), dense=bool(dense), blocks=blocks, block_index=block_index,
        transposed=transposed, candidates=cand, candidate_costs=cand_cost, fallback=fallback, second=second,
        best_buddies=buddies, dead=dead_slots, measure=name,
        coverage=np.stack([v.mean(axis=1) for v in boundary_ok], axis=1).reshape(-1).astype(np.float32),
        hole_costs=_hole_costs(boundary_ok, np.median(scales)) if masked else None,
    )
