"""Seam measures and the seam table."""

import itertools

import numpy as np
import pytest

from conftest import skimage_image
from stitch.layout import allowed_orientations
from stitch.orientation import facing_side, orient
from stitch.measures import get_measure, mgc, ssd
from stitch.seams import band_scaling, score_seams
from stitch.tiles import EdgeStrips


def _mgc_reference(left, right):
    """MGC written out term by term (Gallagher, CVPR 2012, eqs. for D_LR and D_RL)."""
    def one_way(a, b):
        # a: the tile whose gradients are modelled, b: the other, both (L, 2, bands)
        g = a[:, 1] - a[:, 0]
        mu = g.mean(axis=0)
        bands = a.shape[-1]
        eye = np.eye(bands)
        dummies = np.concatenate([np.zeros((1, bands)), np.ones((1, bands)), -np.ones((1, bands)), eye, -eye])
        cov = np.cov(np.concatenate([g, dummies]).T).reshape(bands, bands)
        inv = np.linalg.inv(cov)
        total = 0.0
        for p in range(len(a)):
            dev = (b[p, 1] - a[p, 1]) - mu
            total += dev @ inv @ dev
        return total

    return one_way(left, right) + one_way(right, left)


def test_mgc_equals_term_by_term_formula():
    rng = np.random.default_rng(0)
    left = rng.normal(0, 30, (5, 12, 2, 3)).astype(np.float32)
    right = rng.normal(0, 30, (4, 12, 2, 3)).astype(np.float32)
    got = mgc(left, right)
    want = np.array([[_mgc_reference(a.astype(float), b.astype(float)) for b in right] for a in left])
    np.testing.assert_allclose(got, want, rtol=2e-4)


def test_ssd_by_hand():
    # Boundary columns [1, 2] and [4, 6]: (1-4)^2 + (2-6)^2 = 9 + 16 = 25.
    a = np.zeros((1, 2, 2, 1), np.float32)
    b = np.zeros((1, 2, 2, 1), np.float32)
    a[0, :, 1, 0] = [1, 2]
    b[0, :, 1, 0] = [4, 6]
    assert ssd(a, b)[0, 0] == pytest.approx(25.0)
    assert ssd(b, a)[0, 0] == pytest.approx(25.0)  # symmetric


def test_mgc_ignores_a_common_offset():
    """MGC scores gradients, so adding a constant to both tiles changes nothing."""
    rng = np.random.default_rng(1)
    left = rng.normal(100, 20, (3, 10, 2, 3)).astype(np.float32)
    right = rng.normal(100, 20, (3, 10, 2, 3)).astype(np.float32)
    np.testing.assert_allclose(mgc(left + 17, right + 17), mgc(left, right), rtol=1e-3, atol=1e-2)


def _tiles(n=6, size=16):
    img = skimage_image("coffee").astype(np.float32)
    return [img[:, 40 + size * (k // 3):40 + size * (k // 3 + 1), 100 + size * (k % 3):100 + size * (k % 3 + 1)]
            for k in range(n)]


@pytest.mark.parametrize("measure", ["mgc", "ssd"])
def test_table_matches_physically_turned_and_mirrored_tiles(measure):
    """Every lookup equals the measure on the two tiles turned and set side by side."""
    tiles = _tiles()
    edges = EdgeStrips.from_pixels(tiles)
    orients = allowed_orientations(90, True)
    table = score_seams(edges, orientations=orients, measure=measure, k=8)
    mean, scale = band_scaling(edges.sides)
    norm = [((t - mean[:, None, None]) * scale[:, None, None]).astype(np.float32) for t in tiles]
    fn = get_measure(measure)
    for i, j in [(0, 1), (2, 5), (4, 3)]:
        for oi, oj in itertools.product(orients, repeat=2):
            a = orient(norm[i], oi % 4, oi >= 4)
            b = orient(norm[j], oj % 4, oj >= 4)
            # Horizontal: a left of b. Strips: a's last two columns; b's first two,
            # column order reversed so the boundary pixel is column 1.
            left = np.moveaxis(a[:, :, -2:], 0, -1)[None]
            right = np.moveaxis(b[:, :, 1::-1], 0, -1)[None]
            want = fn(left, right)[0, 0]
            sa = 4 * i + int(facing_side(oi % 4, oi >= 4, 1))
            sb = 4 * j + int(facing_side(oj % 4, oj >= 4, 3))
            got = table.cost(sa, sb, int((oi >= 4) != (oj >= 4)))
            np.testing.assert_allclose(got, want, rtol=1e-3, atol=1e-2)
            # Vertical: a above b, checked by turning the pair a quarter counter-clockwise.
            at, bt = np.rot90(a, 1, axes=(1, 2)), np.rot90(b, 1, axes=(1, 2))
            want_v = fn(np.moveaxis(at[:, :, -2:], 0, -1)[None], np.moveaxis(bt[:, :, 1::-1], 0, -1)[None])[0, 0]
            sa = 4 * i + int(facing_side(oi % 4, oi >= 4, 2))
            sb = 4 * j + int(facing_side(oj % 4, oj >= 4, 0))
            np.testing.assert_allclose(table.cost(sa, sb, int((oi >= 4) != (oj >= 4))), want_v, rtol=1e-3, atol=1e-2)


def test_ssd_table_symmetric_under_swapping_pair_and_side():
    tiles = _tiles(6)
    edges = EdgeStrips.from_pixels(tiles)
    table = score_seams(edges, orientations=allowed_orientations(90, True), measure="ssd")
    a, b = np.meshgrid(np.arange(24), np.arange(24), indexing="ij")
    for f in (0, 1):
        # Equal up to float32 rounding of the expanded products.
        np.testing.assert_allclose(table.cost(a, b, f), table.cost(b, a, f), rtol=1e-5, atol=1e-3)


def test_candidates_sorted_and_best_buddies_mutual():
    tiles = _tiles(9)
    edges = EdgeStrips.from_pixels(tiles)
    table = score_seams(edges, orientations=(0,), k=4)
    costs = table.candidate_costs
    finite = np.isfinite(costs)
    assert np.all(np.diff(np.where(finite, costs, np.inf), axis=1)[finite[:, 1:]] >= 0)
    for slot, code in enumerate(table.best_buddies):
        if code >= 0:
            assert table.best_buddies[code // 2] == 2 * slot + code % 2
    # Upright: a right side only ever meets a left side.
    right_slots = np.arange(1, 4 * len(tiles), 4)
    partners = table.candidates[right_slots]
    assert np.all((partners[partners >= 0] // 2) % 4 == 3)


def test_blank_tiles_score_finite():
    tiles = _tiles(4)
    tiles.append(np.zeros_like(tiles[0]))
    tiles.append(np.full_like(tiles[0], 7.0))
    edges = EdgeStrips.from_pixels(tiles)
    blank = np.array([False] * 4 + [True, True])
    table = score_seams(edges, orientations=allowed_orientations(90, False), blank=blank)
    off_diag = ~np.eye(len(tiles), dtype=bool)
    assert np.isfinite(table.blocks[:, off_diag]).all()
    # Neutral: a blank tile costs the same against every other tile, in every
    # block, so it neither attracts nor repels; and it is nobody's best buddy.
    for block in table.blocks:
        for b in np.flatnonzero(blank):
            others = np.flatnonzero(np.arange(len(tiles)) != b)
            assert np.unique(block[b, others]).size == 1 and np.unique(block[others, b]).size == 1
    assert (table.best_buddies.reshape(-1, 4)[blank] == -1).all()
    assert not np.isin(table.best_buddies[table.best_buddies >= 0] // 8, np.flatnonzero(blank)).any()


def test_mgc_tiny_example_by_hand():
    """One band, two rows. Gallagher (CVPR 2012): D_LR + D_RL with dummy-regularised variances.

    Left strip: inner (0, 0), boundary (1, 3) -> outward gradients (1, 3), mean 2.
    Right strip (rows aligned, column 1 = boundary): boundary (4, 4), inner (5, 5)
    -> outward gradients (-1, -1), mean -1. One band: dummies 0, +1, -1, +1, -1.
    """
    left = np.array([[[0, 1]], [[0, 3]]], np.float32).reshape(1, 2, 2, 1)
    right = np.array([[[5, 4]], [[5, 4]]], np.float32).reshape(1, 2, 2, 1)
    # Variances over gradients + dummies, with n - 1 = 6 in the denominator:
    g_l = np.array([1, 3, 0, 1, -1, 1, -1.0])
    g_r = np.array([-1, -1, 0, 1, -1, 1, -1.0])
    var_l = ((g_l - 4 / 7) ** 2).sum() / 6  # = 574 / 294
    var_r = ((g_r + 2 / 7) ** 2).sum() / 6  # = 266 / 294
    assert var_l == pytest.approx(574 / 294) and var_r == pytest.approx(266 / 294)
    # D_LR: (y - x - mu_L) = (4 - 1 - 2, 4 - 3 - 2) = (1, -1) -> 2 / var_l
    # D_RL: (x - y - mu_R) = (1 - 4 + 1, 3 - 4 + 1) = (-2, 0) -> 4 / var_r
    want = 2 / var_l + 4 / var_r  # = 588/574 + 1176/266 = 5.4454...
    assert mgc(left, right)[0, 0] == pytest.approx(want, rel=1e-5)


def test_prediction_tiny_example_by_hand():
    """Pomeranz, Shemesh & Ben-Shahar (CVPR 2011), p = 3/10, q = 1/16, predicted from both sides.

    Left: inner (0, 0), boundary (1, 3) predicts the right boundary 2x - x_in = (2, 6).
    Right: boundary (4, 4), inner (5, 5) predicts the left boundary (3, 3).
    Errors |2-4|, |6-4|, |3-1|, |3-3| = 2, 2, 2, 0.
    """
    from stitch.measures import prediction

    left = np.array([[[0, 1]], [[0, 3]]], np.float32).reshape(1, 2, 2, 1)
    right = np.array([[[5, 4]], [[5, 4]]], np.float32).reshape(1, 2, 2, 1)
    want = (3 * 2**0.3 + 0**0.3) ** ((1 / 16) / 0.3)
    assert prediction(left, right)[0, 0] == pytest.approx(want, rel=1e-6)


def test_masked_rows_do_not_count():
    """A row masked on one side leaves the other rows' score, scaled to full length."""
    from stitch.measures import prediction

    rng = np.random.default_rng(3)
    left = rng.normal(0, 40, (2, 6, 2, 3)).astype(np.float32)
    right = rng.normal(0, 40, (3, 6, 2, 3)).astype(np.float32)
    lv = np.ones((2, 6), bool)
    lv[:, 2] = False
    for fn in (ssd, mgc, prediction):
        masked = fn(left, right, left_valid=lv, right_valid=np.ones((3, 6), bool))
        # Garbage in the masked row must not change the score.
        left2 = left.copy()
        left2[:, 2] = 1e4
        again = fn(left2, right, left_valid=lv, right_valid=np.ones((3, 6), bool))
        np.testing.assert_allclose(again, masked, rtol=1e-3)
        assert np.isfinite(masked).all()


def test_no_overlap_is_nan_for_the_table_to_neutralize():
    left = np.ones((1, 4, 2, 1), np.float32)
    lv = np.array([[True, True, False, False]])
    rv = np.array([[False, False, True, True]])
    assert np.isnan(ssd(left, left, left_valid=lv, right_valid=rv)[0, 0])


@pytest.mark.parametrize("measure", ["prediction", "ssd"])
def test_blocked_topk_equals_dense(monkeypatch, measure):
    """Candidates kept chunk by chunk equal the best of the full dense blocks."""
    import stitch.seams as seams

    tiles = _tiles(9)
    edges = EdgeStrips.from_pixels(tiles)
    orients = allowed_orientations(90, True)
    dense = score_seams(edges, orientations=orients, measure=measure, k=5, dense=True)
    monkeypatch.setattr(seams, "CHUNK_BYTES", 4 * 9 * 2)  # two rows per chunk
    sparse = score_seams(edges, orientations=orients, measure=measure, k=5, dense=False)
    assert not sparse.dense and sparse.blocks.size == 0
    # The reference: sort every partner of every slot from the dense table.
    n = len(tiles)
    slots = np.arange(4 * n)
    for slot in slots:
        codes = np.array([2 * other + f for other in slots for f in (0, 1)])
        costs = dense.cost(np.full(len(codes), slot), codes // 2, codes % 2)
        order = np.argsort(costs, kind="stable")[:5]
        np.testing.assert_allclose(np.sort(sparse.candidate_costs[slot]), np.sort(costs[order]), rtol=1e-5)
    np.testing.assert_array_equal(sparse.best_buddies, dense.best_buddies)
    # Lookups agree for every listed pair.
    a = np.repeat(slots, 5)
    b = sparse.candidates.reshape(-1)
    ok = b >= 0
    np.testing.assert_allclose(sparse.cost(a[ok], b[ok] // 2, b[ok] % 2), dense.cost(a[ok], b[ok] // 2, b[ok] % 2),
                               rtol=1e-5)



def _edges_of(img, px, side):
    """Edge strips of ``side x side`` tiles of ``px`` in reading order."""
    tiles = [img[:, px * r:px * (r + 1), px * c:px * (c + 1)].astype(np.float32)
             for r in range(side) for c in range(side)]
    return EdgeStrips.from_pixels(tiles)


def _ranked_first(table, side):
    """Share of true seams (both directions) whose true partner a side ranks first."""
    i = np.arange(side * side).reshape(side, side)
    a = np.concatenate([4 * i[:, :-1].ravel() + 1, 4 * i[:-1, :].ravel() + 2])  # right, bottom sides
    b = np.concatenate([4 * i[:, 1:].ravel() + 3, 4 * i[1:, :].ravel() + 0])  # their true partners
    first = table.candidates[:, 0]
    return np.mean(np.concatenate([first[a] == 2 * b, first[b] == 2 * a]))


@pytest.mark.parametrize("image, expected", [("gravel", "prediction"), ("astronaut", "mgc")])
def test_auto_keeps_the_measure_with_more_best_buddies(image, expected):
    """12 x 12 tiles of 28 px from scikit-image's bundled ``gravel`` (CC0) and
    ``astronaut`` (public domain, NASA): the measure with more best buddies
    is the one that ranks true neighbours first more often, found without
    the answer."""
    from stitch.seams import best_buddy_share

    edges = _edges_of(skimage_image(image), 28, 12)
    auto = score_seams(edges, measure="auto")
    each = {m: score_seams(edges, measure=m) for m in ("mgc", "prediction")}
    assert auto.measure == expected
    assert best_buddy_share(each[expected]) == max(best_buddy_share(t) for t in each.values())
    assert _ranked_first(each[expected], 12) == max(_ranked_first(t, 12) for t in each.values())
    np.testing.assert_array_equal(auto.candidates, each[expected].candidates)
    np.testing.assert_array_equal(auto.blocks, each[expected].blocks)


def test_auto_scores_large_sets_with_mgc_alone(monkeypatch):
    import stitch.seams

    edges = _edges_of(skimage_image("gravel"), 28, 6)  # prediction's set when both are tried
    work = 36 * 36 * 2 * 28 * 1  # tiles squared, upright blocks, side length, bands
    monkeypatch.setattr(stitch.seams, "AUTO_LIMIT", work - 1)
    calls = []
    progress = lambda stage, done, total: calls.append((done, total))  # noqa: E731
    assert score_seams(edges, measure="auto", progress=progress).measure == "mgc"
    one_pass = calls[-1][1]
    assert calls[-1][0] == one_pass  # reported to its end
    monkeypatch.setattr(stitch.seams, "AUTO_LIMIT", work)
    calls.clear()
    assert score_seams(edges, measure="auto", progress=progress).measure == "prediction"
    assert calls[-1] == (2 * one_pass, 2 * one_pass)  # two passes on one bar, to its end
    assert [d for d, _ in calls] == sorted(d for d, _ in calls)
