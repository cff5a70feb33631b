"""The orientation rule in its one home: tables, pixels and points agree.

The rule itself (mirror left-right first, then turn clockwise) is the
``placement.csv`` contract of this project; numpy's ``rot90`` (positive k
turns anticlockwise, numpy's documentation) is the outside reference for
what a turn does to pixels.
"""

import numpy as np
import pytest

from stitch.layout import Placement, seam_pairs
from stitch.orientation import (
    FACE,
    TURN_TO_FACE,
    facing_side,
    orient,
    orient_point,
    turned_orientations,
    unorient,
)

CODES = [pytest.param(o, id=f"rotation {o % 4}{' mirrored' if o >= 4 else ''}") for o in range(8)]


def test_face_table_is_the_rule_on_every_code():
    for o in range(8):
        for d in range(4):
            assert FACE[o, d] == facing_side(o % 4, o >= 4, d)


def test_turn_to_face_inverts_the_face_table():
    for m in (0, 1):
        for s in range(4):
            for d in range(4):
                o = TURN_TO_FACE[m, s, d]
                assert o // 4 == m and FACE[o, d] == s


@pytest.mark.parametrize("code", CODES)
def test_orient_follows_numpy_rot90_and_unorient_inverts_it(code):
    a = np.arange(2 * 3 * 5).reshape(2, 3, 5)
    r, m = code % 4, code >= 4
    want = np.rot90(a[..., ::-1] if m else a, -r, axes=(1, 2))
    np.testing.assert_array_equal(orient(a, r, m), want)
    np.testing.assert_array_equal(orient(unorient(a, r, m), r, m), a)


@pytest.mark.parametrize("code", CODES)
def test_orient_point_lands_on_the_pixel_orient_moves(code):
    """Each pixel centre of a 3 x 5 file maps to the centre of the pixel that
    holds its value once the file is oriented."""
    a = np.arange(15).reshape(1, 3, 5)
    r, m = code % 4, code >= 4
    out = orient(a, r, m)[0]
    for row in range(3):
        for col in range(5):
            u, v = orient_point(col + 0.5, row + 0.5, 5, 3, r, m)
            assert out[int(v), int(u)] == a[0, row, col]


@pytest.mark.parametrize("quarter_turns", [0, 1, 2, 3])
@pytest.mark.parametrize("mirror", [False, True])
def test_turning_the_mosaic_turns_every_tile_with_it(quarter_turns, mirror):
    """A tile's side that faced a neighbour still faces it after the whole
    mosaic is turned: Placement.turned and turned_orientations agree."""
    rng = np.random.default_rng(quarter_turns + 4 * mirror)
    names = tuple(f"t{i}" for i in range(6))
    rot, mir = rng.integers(0, 4, 6), rng.random(6) < 0.5
    p = Placement(names, (2, 3), np.repeat([0, 1], 3), np.tile([0, 1, 2], 2), rot, mir)
    q = p.turned(quarter_turns, mirror=mirror)
    r2, m2 = turned_orientations(rot, mir, quarter_turns, mirror)
    np.testing.assert_array_equal(q.rotations, r2)
    np.testing.assert_array_equal(q.mirrored, m2)
    assert {tuple(s) for s in seam_pairs(p)} == {tuple(s) for s in seam_pairs(q)}
