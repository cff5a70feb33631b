"""Seam dissimilarity: how badly two tile sides continue each other.

A *measure* is a pure function of two stacks of edge strips::

    measure(left, right) -> ndarray, shape (len(left), len(right))

``left[i]`` and ``right[j]`` are ``(length, 2, bands)`` float32 strips (see
:mod:`stitch.tiles`): column 1 holds the boundary pixels, column 0 the pixels
one step inside, and row ``p`` of ``right[j]`` lies across the seam from row
``p`` of ``left[i]``. Lower is better. Because a measure sees only the arrays
it needs, any block of the table can be computed anywhere.

The :class:`SeamTable` holds one such block for every pair of sides that the
allowed orientations can bring together, plus each side's ranked candidates,
the second-best score used for normalisation, and best buddies.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass
from importlib.metadata import entry_points

import numpy as np

from .errors import OptionError
from .layout import facing_side

__all__ = [
    "DEFAULT_MEASURE",
    "SeamTable",
    "available_measures",
    "band_scaling",
    "get_measure",
    "mgc",
    "normalize_strips",
    "score_seams",
    "ssd",
]

log = logging.getLogger(__name__)

#: Entry-point group under which other packages register measures.
ENTRY_POINT_GROUP = "stitch.seams"

#: Per-band spread the strips are scaled to before scoring; close to that of
#: 8-bit photographs, so the unit dummy gradients of MGC regularise 16-bit and
#: float rasters as they do 8-bit ones.
_TARGET_STD = 48.0


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
        v = np.ones(side.shape[:-1], bool) if valid is None else valid[s]
        x = side[v].astype(np.float64)
        total += x.sum(axis=0)
        total_sq += (x * x).sum(axis=0)
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
        x = ((side.astype(np.float64) - mean) * scale).astype(np.float32)
        if valid is not None:
            x[~valid[s]] = 0.0
        out.append(x)
    return out


def ssd(left, right):
    """Sum of squared differences between the two boundary pixel columns.

    The plain reference measure: ``sum_p ||x_p - y_p||^2`` over the boundary
    pixels ``x`` of the left strip and ``y`` of the right one, expanded into a
    matrix product ``|x|^2 + |y|^2 - 2 x.y`` so it runs at BLAS speed.

    Examples
    --------
    >>> a = np.zeros((1, 2, 2, 1), np.float32); b = np.ones((1, 2, 2, 1), np.float32)
    >>> float(ssd(a, b)[0, 0])
    2.0
    """
    x = left[:, :, 1, :].reshape(len(left), -1).astype(np.float32)
    y = right[:, :, 1, :].reshape(len(right), -1).astype(np.float32)
    d = (x * x).sum(1)[:, None] + (y * y).sum(1)[None, :] - 2.0 * (x @ y.T)
    return np.maximum(d, 0.0)


def _mgc_stats(strips):
    """Gradient statistics of one side of each tile (Gallagher 2012)."""
    s = strips.astype(np.float64)
    n, length, _, bands = s.shape
    edge = s[:, :, 1, :]
    grad = edge - s[:, :, 0, :]
    mu = grad.mean(axis=1)
    # Dummy gradients (zero, +-1 on all bands, +-1 on each band) keep the
    # covariance invertible on flat or single-valued edges, as in the paper.
    eye = np.eye(bands)
    dummies = np.concatenate([np.zeros((1, bands)), np.ones((1, bands)), -np.ones((1, bands)), eye, -eye])
    g = np.concatenate([grad, np.broadcast_to(dummies, (n,) + dummies.shape)], axis=1)
    gc = g - g.mean(axis=1, keepdims=True)
    cov = np.einsum("npi,npj->nij", gc, gc) / (g.shape[1] - 1)
    inv = np.linalg.inv(cov)
    a = edge + mu[:, None, :]
    a_inv = np.einsum("npi,nij->npj", a, inv)
    const = np.einsum("npi,npi->n", a_inv, a)
    q = np.einsum("npi,npj->nij", edge, edge)
    return edge, inv, a_inv, const, q


def mgc(left, right):
    """Mahalanobis gradient compatibility (MGC).

    For a left tile ``i`` and right tile ``j`` with boundary columns ``x`` and
    ``y``, the left tile's outward gradients ``x - x_in`` have mean ``mu_i``
    and covariance ``S_i``; the gradient across the seam should look like them:

    ``D_LR(i, j) = sum_p (y_p - x_p - mu_i) S_i^-1 (y_p - x_p - mu_i)^T``

    and symmetrically ``D_RL`` from the right tile's side. MGC is
    ``D_LR + D_RL``. Both expand into constants plus inner products, so the
    whole block is one float32 matrix product.

    References
    ----------
    .. [1] A. C. Gallagher, "Jigsaw puzzles with pieces of unknown orientation",
       CVPR 2012.
    """
    e_l, s_l, as_l, c_l, q_l = _mgc_stats(left)
    e_r, s_r, bs_r, c_r, q_r = _mgc_stats(right)
    n, m = len(left), len(right)
    lf = np.concatenate([s_l.reshape(n, -1), q_l.reshape(n, -1), as_l.reshape(n, -1), e_l.reshape(n, -1)], 1)
    rf = np.concatenate([q_r.reshape(m, -1), s_r.reshape(m, -1), -2 * e_r.reshape(m, -1), -2 * bs_r.reshape(m, -1)], 1)
    # The strips are centred per band (normalize_strips), which keeps the
    # cancelling terms small enough for float32.
    d = lf.astype(np.float32) @ rf.astype(np.float32).T
    d += c_l.astype(np.float32)[:, None]
    d += c_r.astype(np.float32)[None, :]
    return np.maximum(d, 0.0)


_BUILTIN = {"mgc": mgc, "ssd": ssd}

#: Measure used when none is named.
DEFAULT_MEASURE = "mgc"


def available_measures():
    """Names of built-in and installed measures, sorted."""
    names = set(_BUILTIN)
    names.update(ep.name for ep in entry_points(group=ENTRY_POINT_GROUP))
    return sorted(names)


def get_measure(name):
    """The measure registered under ``name`` (built in or by entry point)."""
    if name in _BUILTIN:
        return _BUILTIN[name]
    for ep in entry_points(group=ENTRY_POINT_GROUP):
        if ep.name == name:
            return ep.load()
    raise OptionError(f"seam measure {name!r} is unknown; choose one of {', '.join(available_measures())}")


def _side_pairs(orientations):
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


@dataclass(frozen=True, eq=False)
class SeamTable:
    """Seam costs for every pair of sides the search may join.

    Attributes
    ----------
    n_tiles : int
    orientations : tuple of int
        Allowed orientation codes (see :mod:`stitch.layout`).
    blocks : ndarray, shape (n_blocks, n_tiles, n_tiles), float32
        ``blocks[block_index[a, b, f]][i, j]`` is the cost of side ``a`` of
        tile ``i`` against side ``b`` of tile ``j`` (flip ``f``: one of them
        mirrored); when ``transposed[a, b, f]`` the block is read as ``[j, i]``.
        A tile against itself costs ``inf``.
    block_index : ndarray, shape (4, 4, 2), int64; -1 where the sides never meet.
    transposed : ndarray, shape (4, 4, 2), bool
    candidates : ndarray, shape (4 * n_tiles, k), int64
        For each side slot, partners ``2 * slot + flip`` from best to worst;
        -1 pads.
    candidate_costs : ndarray, shape (4 * n_tiles, k), float32
    second : ndarray, shape (4 * n_tiles,), float32
        Second-best cost of each slot (normalises costs across tiles).
    best_buddies : ndarray, shape (4 * n_tiles,), int64
        ``2 * slot + flip`` of the mutual best partner, or -1.
    measure : str
    """

    n_tiles: int
    orientations: tuple[int, ...]
    blocks: np.ndarray
    block_index: np.ndarray
    transposed: np.ndarray
    candidates: np.ndarray
    candidate_costs: np.ndarray
    second: np.ndarray
    best_buddies: np.ndarray
    measure: str

    def cost(self, slot_a, slot_b, flip=0):
        """Cost of joining two side slots (vectorised over arrays)."""
        slot_a, slot_b, flip = np.broadcast_arrays(np.asarray(slot_a), np.asarray(slot_b), np.asarray(flip))
        ta, sa, tb, sb = slot_a // 4, slot_a % 4, slot_b // 4, slot_b % 4
        idx = self.block_index[sa, sb, flip]
        tr = self.transposed[sa, sb, flip]
        i = np.where(tr, tb, ta)
        j = np.where(tr, ta, tb)
        out = np.where(idx >= 0, self.blocks[np.maximum(idx, 0), i, j], np.inf)
        return out

    def confidence(self, slot_a, slot_b, flip=0):
        """Seam confidence in [0, 1]: ``1 - cost / second-best`` of both sides, clipped."""
        c = self.cost(slot_a, slot_b, flip)
        sec = np.minimum(self.second[slot_a], self.second[slot_b])
        with np.errstate(divide="ignore", invalid="ignore"):
            r = np.where(sec > 0, 1.0 - c / sec, 0.0)
        return np.clip(np.nan_to_num(r, nan=0.0), 0.0, 1.0)


def score_seams(edges, *, orientations=(0,), measure=DEFAULT_MEASURE, k=16):
    """Score every seam the allowed orientations can form.

    Parameters
    ----------
    edges : stitch.tiles.EdgeStrips
    orientations : tuple of int, optional
        Allowed orientation codes, from :func:`stitch.layout.allowed_orientations`.
    measure : str or callable, optional
        A registered measure name or a function ``(left, right) -> costs``.
    k : int, optional
        Candidates kept per side slot.

    Returns
    -------
    SeamTable
    """
    fn = get_measure(measure) if isinstance(measure, str) else measure
    name = measure if isinstance(measure, str) else getattr(measure, "__name__", "custom")
    sides = normalize_strips(edges.sides, edges.valid)
    n = sides[0].shape[0]
    pairs = _side_pairs(orientations)
    block_index = np.full((4, 4, 2), -1, np.int64)
    transposed = np.zeros((4, 4, 2), bool)
    blocks = []
    for a, b, f in pairs:
        if block_index[a, b, f] >= 0:
            continue
        if sides[a].shape[1] != sides[b].shape[1]:
            continue  # sides of different length never meet
        right = sides[b] if f else sides[b][:, ::-1]
        block = np.asarray(fn(sides[a], np.ascontiguousarray(right)), dtype=np.float32)
        if block.shape != (n, n):
            raise OptionError(f"seam measure {name!r} returned shape {block.shape}, expected {(n, n)}")
        block = np.where(np.isfinite(block), block, np.float32(np.finfo(np.float32).max))
        np.fill_diagonal(block, np.inf)
        block_index[a, b, f] = len(blocks)
        block_index[b, a, f] = len(blocks)
        transposed[b, a, f] = a != b
        blocks.append(block)
    blocks = np.stack(blocks) if blocks else np.empty((0, n, n), np.float32)

    k = max(1, min(k, 4 * n * 2))
    candidates = np.full((4 * n, k), -1, np.int64)
    cand_costs = np.full((4 * n, k), np.inf, np.float32)
    for a in range(4):
        cols, codes = [], []
        for b in range(4):
            for f in range(2):
                idx = block_index[a, b, f]
                if idx < 0:
                    continue
                blk = blocks[idx].T if transposed[a, b, f] else blocks[idx]
                cols.append(blk)
                codes.append(2 * (4 * np.arange(n) + b) + f)
        if not cols:
            continue
        row_costs = np.concatenate(cols, axis=1)
        row_codes = np.concatenate(codes)
        kk = min(k, row_costs.shape[1])
        part = np.argpartition(row_costs, kk - 1, axis=1)[:, :kk] if kk < row_costs.shape[1] else \
            np.tile(np.arange(row_costs.shape[1]), (n, 1))
        pc = np.take_along_axis(row_costs, part, axis=1)
        order = np.argsort(pc, axis=1, kind="stable")
        part = np.take_along_axis(part, order, axis=1)
        slots = 4 * np.arange(n) + a
        candidates[slots, :kk] = row_codes[part]
        cand_costs[slots, :kk] = np.take_along_axis(row_costs, part, axis=1)
    candidates[~np.isfinite(cand_costs)] = -1
    second = np.where(np.isfinite(cand_costs[:, min(1, k - 1)]), cand_costs[:, min(1, k - 1)], 0).astype(np.float32)

    best = candidates[:, 0]
    buddies = np.full(4 * n, -1, np.int64)
    ok = best >= 0
    partner_slot = np.where(ok, best // 2, 0)
    back = candidates[partner_slot, 0]
    mutual = ok & (back == 2 * np.arange(4 * n) + (best % 2))
    buddies[mutual] = best[mutual]
    log.debug("scored %d blocks of %d x %d with %s; %d best-buddy sides", len(blocks), n, n, name, mutual.sum())
    return SeamTable(
        n_tiles=n,
        orientations=tuple(orientations),
        blocks=blocks,
        block_index=block_index,
        transposed=transposed,
        candidates=candidates,
        candidate_costs=cand_costs,
        second=second,
        best_buddies=buddies,
        measure=name,
    )
