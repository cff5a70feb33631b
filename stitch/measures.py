"""Seam measures: pure functions scoring how badly two tile sides continue each other.

Every measure has the signature::

    measure(left, right, *, left_valid=None, right_valid=None) -> ndarray (len(left), len(right))

``left[i]`` and ``right[j]`` are ``(length, 2, bands)`` float32 strips (see
:mod:`stitch.tiles`): column 1 holds the boundary pixels, column 0 the pixels
one step inside, and row ``p`` of ``right[j]`` lies across the seam from row
``p`` of ``left[i]``. ``*_valid`` are ``(n, length)`` boolean masks of usable
rows (both pixels valid); masked rows do not count, and scores are scaled to
the full length so seams with different numbers of valid rows compare. Lower
is better; a pair with no valid row in common scores NaN, which the table
turns into a neutral score.

Because a measure sees only the arrays it needs, a block of the seam table is
a pure function of two edge arrays and can be computed anywhere.

:func:`overlap`, for tiles cut with an overlap, takes strips as deep as the
overlap instead of two pixels; the pipeline uses it when the tiles overlap
and never otherwise, so it is not offered by name.

Other packages add measures under the entry-point group ``stitch.seams``; a
plugin may also take just ``(left, right)``.
"""

from __future__ import annotations

import inspect
import numpy as np
from numba import njit, prange

from .plugins import Registry

__all__ = [
    "AUTO",
    "DEFAULT_MEASURE",
    "ENTRY_POINT_GROUP",
    "available_measures",
    "call_measure",
    "get_measure",
    "mgc",
    "mgc_prediction",
    "overlap",
    "prediction",
    "ssd",
]

#: Entry-point group under which other packages register measures.
ENTRY_POINT_GROUP = "stitch.seams"


def _weights(strips, valid):
    """Float row weights (n, length): 1 where the row is usable."""
    if valid is None:
        return np.ones(strips.shape[:2], np.float32)
    return np.asarray(valid, np.float32)


def _rescale(d, wl, wr, length, masked):
    """Scale masked sums to the full strip length; NaN where nothing overlaps."""
    if not masked:
        return d
    overlap = wl @ wr.T
    with np.errstate(divide="ignore", invalid="ignore"):
        out = d * (length / overlap)
    out[overlap < 0.5] = np.nan
    return out


def ssd(left, right, *, left_valid=None, right_valid=None):
    """Sum of squared differences between the two boundary pixel columns.

    The plain reference measure, ``sum_p ||x_p - y_p||^2`` over boundary pixels
    ``x`` of the left strip and ``y`` of the right one, expanded into
    ``|x|^2 + |y|^2 - 2 x.y`` so that a block is one matrix product.

    Examples
    --------
    >>> a = np.zeros((1, 2, 2, 1), np.float32); b = np.ones((1, 2, 2, 1), np.float32)
    >>> float(ssd(a, b)[0, 0])
    2.0
    """
    return _row_ssd(left[:, :, -1, :], right[:, :, -1, :], left_valid, right_valid)


def overlap(left, right, *, left_valid=None, right_valid=None):
    """Disagreement of the strips two overlapping tiles share.

    For tiles cut with an overlap of ``k`` pixels (:mod:`stitch.overlap`),
    ``left`` and ``right`` are ``(n, length, k, bands)`` strips, and two true
    neighbours hold the same pixels in them: the left tile's strip read from
    the inside out is the right tile's read from the boundary in. The cost is
    the sum of squared differences over the shared strip, one matrix product
    as in :func:`ssd`; it is 0 for a true seam of lossless tiles.

    Examples
    --------
    >>> a = np.arange(6, dtype=np.float32).reshape(1, 1, 3, 2)
    >>> float(overlap(a, a[:, :, ::-1])[0, 0]), float(overlap(a, a)[0, 0])
    (0.0, 64.0)
    """
    n, m = len(left), len(right)
    return _row_ssd(left.reshape(n, left.shape[1], -1), right[:, :, ::-1].reshape(m, right.shape[1], -1),
                    left_valid, right_valid)


def _row_ssd(x, y, left_valid, right_valid):
    """``sum_p ||x_p - y_p||^2`` over the usable rows ``p`` of ``(n, length,
    features)`` and ``(m, length, features)`` arrays, as one matrix product."""
    n, length = x.shape[:2]
    m = len(y)
    masked = left_valid is not None or right_valid is not None
    wl, wr = _weights(x, left_valid), _weights(y, right_valid)
    x = x.astype(np.float32) * wl[..., None]
    y = y.astype(np.float32) * wr[..., None]
    if not masked:
        lf = np.concatenate([(x * x).sum((1, 2))[:, None], np.ones((n, 1), np.float32), x.reshape(n, -1)], 1)
        rf = np.concatenate([np.ones((m, 1), np.float32), (y * y).sum((1, 2))[:, None], -2.0 * y.reshape(m, -1)], 1)
    else:
        lf = np.concatenate([(x * x).sum(2), wl, x.reshape(n, -1)], 1)
        rf = np.concatenate([wr, (y * y).sum(2), -2.0 * y.reshape(m, -1)], 1)
    d = lf @ rf.T
    np.maximum(d, 0.0, out=d)
    return _rescale(d, wl, wr, length, masked)


def _mgc_stats(strips, w):
    """Gradient statistics of one side of each tile (Gallagher 2012).

    Returns the boundary pixels, the inverse covariance of the outward
    gradients, ``(edge + mu) S^-1`` and its per-row quadratic form.
    """
    n, length, _, bands = strips.shape
    edge = strips[:, :, 1, :].astype(np.float64)
    w64 = w.astype(np.float64)[..., None]
    grad = (edge - strips[:, :, 0, :]) * w64
    count = w64.sum(axis=1)
    mu = grad.sum(axis=1) / np.maximum(count, 1.0)
    # Dummy gradients (zero, +-1 on all bands, +-1 on each band) keep the
    # covariance invertible on flat or single-valued edges, as in the paper.
    # They sum to zero and their outer products to 2 (ones + identity), so the
    # covariance over gradients and dummies follows from sums alone.
    n_dummy = 3 + 2 * bands
    total = count + n_dummy
    mean = grad.sum(axis=1) / total
    outer = grad.transpose(0, 2, 1) @ grad + 2.0 * (np.ones((bands, bands)) + np.eye(bands))
    cov = (outer - total[:, :, None] * mean[:, :, None] * mean[:, None, :]) / (total[:, :, None] - 1)
    inv = np.linalg.inv(cov)
    a = edge + mu[:, None, :]
    a_inv = a @ inv
    return edge, inv, a_inv, (a_inv * a).sum(axis=-1)


def mgc(left, right, *, left_valid=None, right_valid=None):
    """Mahalanobis gradient compatibility (MGC).

    The left tile's outward gradients ``x - x_in`` along the seam have mean
    ``mu_L`` and covariance ``S_L``; the gradient across the seam should look
    like them:

    ``D_LR = sum_p (y_p - x_p - mu_L) S_L^-1 (y_p - x_p - mu_L)^T``,

    and ``D_RL`` likewise from the right tile. MGC is ``D_LR + D_RL``. Both
    expand into products of a left-only and a right-only factor summed over
    ``p``, so a whole block is one float32 matrix product (features of width
    ``2 B^2 + 2 L B`` unmasked, ``L (2 B^2 + 2 B + 2)`` with masks).

    References
    ----------
    .. [1] A. C. Gallagher, "Jigsaw puzzles with pieces of unknown orientation",
       CVPR 2012.
    """
    n, length, _, bands = left.shape
    m = len(right)
    masked = left_valid is not None or right_valid is not None
    wl, wr = _weights(left, left_valid), _weights(right, right_valid)
    e_l, s_l, as_l, c_l = _mgc_stats(left, wl)
    e_r, s_r, bs_r, c_r = _mgc_stats(right, wr)
    wl64, wr64 = wl.astype(np.float64), wr.astype(np.float64)
    if not masked:
        q_l = e_l.transpose(0, 2, 1) @ e_l
        q_r = e_r.transpose(0, 2, 1) @ e_r
        lf = [s_l.reshape(n, -1), q_l.reshape(n, -1), as_l.reshape(n, -1), e_l.reshape(n, -1), c_l.sum(1, keepdims=True),
              np.ones((n, 1))]
        rf = [q_r.reshape(m, -1), s_r.reshape(m, -1), -2 * e_r.reshape(m, -1), -2 * bs_r.reshape(m, -1), np.ones((m, 1)),
              c_r.sum(1, keepdims=True)]
    else:
        # Per-row features: sum_p wl_p wr_p f_L(p) . f_R(p).
        def rows(w, a):
            return (w[:, :, None] * a.reshape(a.shape[0], a.shape[1], -1)).reshape(a.shape[0], -1)

        outer_l = np.einsum("npi,npj->npij", e_l, e_l)
        outer_r = np.einsum("npi,npj->npij", e_r, e_r)
        s_lp = np.broadcast_to(s_l[:, None], (n, length, bands, bands))
        s_rp = np.broadcast_to(s_r[:, None], (m, length, bands, bands))
        lf = [rows(wl64, s_lp), rows(wl64, outer_l), rows(wl64, as_l), rows(wl64, e_l), wl64 * c_l, wl64]
        rf = [rows(wr64, outer_r), rows(wr64, s_rp), -2 * rows(wr64, e_r), -2 * rows(wr64, bs_r), wr64, wr64 * c_r]
    # The strips are centred per band (stitch.seams.normalize_strips), which
    # keeps the cancelling terms small enough for float32.
    lf = np.concatenate(lf, axis=1).astype(np.float32)
    rf = np.concatenate(rf, axis=1).astype(np.float32)
    d = lf @ rf.T
    np.maximum(d, 0.0, out=d)  # rounding can dip a perfect match below zero
    return _rescale(d, wl, wr, length, masked)


@njit(parallel=True, cache=True)
def _prediction_block(le, lp, lw, re, rp, rw, p):
    n, m, width = le.shape[0], re.shape[0], le.shape[1]
    out = np.empty((n, m), np.float64)
    cnt = np.empty((n, m), np.float64)
    for i in prange(n):
        for j in range(m):
            s = 0.0
            c = 0.0
            for t in range(width):
                w = lw[i, t] * rw[j, t]
                if w > 0:
                    s += abs(lp[i, t] - re[j, t]) ** p + abs(rp[j, t] - le[i, t]) ** p
                    c += 1.0
            out[i, j] = s
            cnt[i, j] = c
    return out, cnt


def prediction(left, right, *, left_valid=None, right_valid=None, p=0.3, q=1.0 / 16.0):
    """Prediction-based (L_p)^q dissimilarity.

    Each tile predicts its neighbour's boundary pixels by linear extrapolation
    of its last two columns, ``2 x_K - x_{K-1}``; the dissimilarity is

    ``( sum |(2 x_K - x_{K-1}) - y_1|^p + |(2 y_1 - y_2) - x_K|^p )^(q / p)``

    over rows and bands, predicting from both sides so that the score is
    symmetric, with the paper's p = 3/10 and q = 1/16. The fractional power
    does not expand into products, so a compiled kernel (numba, both cores)
    computes each block.

    References
    ----------
    .. [1] D. Pomeranz, M. Shemesh and O. Ben-Shahar, "A fully automated greedy
       square jigsaw puzzle solver", CVPR 2011.
    """
    n, length, _, bands = left.shape
    m = len(right)
    wl, wr = _weights(left, left_valid), _weights(right, right_valid)
    le = left[:, :, 1, :].astype(np.float64)
    lp = 2 * le - left[:, :, 0, :]
    re = right[:, :, 1, :].astype(np.float64)
    rp = 2 * re - right[:, :, 0, :]
    lw = np.repeat(wl.astype(np.float64), bands, axis=1)
    rw = np.repeat(wr.astype(np.float64), bands, axis=1)
    s, cnt = _prediction_block(le.reshape(n, -1), lp.reshape(n, -1), lw, re.reshape(m, -1), rp.reshape(m, -1), rw, p)
    with np.errstate(divide="ignore", invalid="ignore"):
        s = s * (length * bands / cnt)
    s[cnt < 0.5] = np.nan
    return (s ** (q / p)).astype(np.float32)


def mgc_prediction(left, right, *, left_valid=None, right_valid=None):
    """MGC and the prediction-based measure combined.

    Each is divided by its median over the block, so the two weigh alike,
    then they are added. The median is over the block the table computes, so
    the result depends on the tile set, which is fine for ranking partners.
    """
    a = mgc(left, right, left_valid=left_valid, right_valid=right_valid)
    b = prediction(left, right, left_valid=left_valid, right_valid=right_valid)
    return a / _robust_scale(a) + b / _robust_scale(b)


def _robust_scale(block):
    finite = block[np.isfinite(block)]
    med = float(np.median(finite)) if finite.size else 1.0
    return med if med > 0 else 1.0


_BUILTIN = {"mgc": mgc, "ssd": ssd, "prediction": prediction, "mgc+prediction": mgc_prediction}

#: Not a measure: asks :func:`stitch.seams.score_seams` to score with MGC and
#: with prediction and keep the one whose best buddies are more numerous.
AUTO = "auto"

#: Measure used when none is named (see :func:`stitch.seams.score_seams` and
#: DEVELOPERS.md for how it was chosen).
DEFAULT_MEASURE = AUTO


_REGISTRY = Registry(ENTRY_POINT_GROUP, _BUILTIN, "--seam")


def available_measures():
    """Names of built-in and installed measures, sorted."""
    return _REGISTRY.names()


def get_measure(name):
    """The measure registered under ``name`` (built in or by entry point)."""
    return _REGISTRY.get(name)


def call_measure(fn, left, right, left_valid=None, right_valid=None):
    """Call a measure, passing masks only to measures that take them."""
    try:
        params = inspect.signature(fn).parameters
    except (TypeError, ValueError):
        params = {}
    if left_valid is None and right_valid is None:
        return fn(left, right)
    if "left_valid" in params or any(p.kind is p.VAR_KEYWORD for p in params.values()):
        return fn(left, right, left_valid=left_valid, right_valid=right_valid)
    # A plugin without mask support sees masked pixels at the band mean (0).
    return fn(left, right)
