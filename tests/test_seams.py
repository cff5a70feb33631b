"""Seam measures and the seam table."""

import itertools

import numpy as np
import pytest

from conftest import skimage_image
from stitch.layout import allowed_orientations, facing_side
from stitch.seams import band_scaling, get_measure, mgc, score_seams, ssd
from stitch.tiles import EdgeStrips, orient, side_strips


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
    sides = [np.stack([side_strips(t)[s] for t in tiles]) for s in range(4)]
    edges = EdgeStrips(tuple(sides), tuple(np.ones(x.shape[:-1], bool) for x in sides))
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


def test_candidates_sorted_and_best_buddies_mutual():
    tiles = _tiles(9)
    sides = [np.stack([side_strips(t)[s] for t in tiles]) for s in range(4)]
    edges = EdgeStrips(tuple(sides), tuple(np.ones(x.shape[:-1], bool) for x in sides))
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
    sides = [np.stack([side_strips(t)[s] for t in tiles]) for s in range(4)]
    edges = EdgeStrips(tuple(sides), tuple(np.ones(x.shape[:-1], bool) for x in sides))
    table = score_seams(edges, orientations=allowed_orientations(90, False))
    off_diag = ~np.eye(len(tiles), dtype=bool)
    assert np.isfinite(table.blocks[:, off_diag]).all()
