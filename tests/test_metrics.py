"""Direct and neighbour comparison (Cho, Avidan & Freeman, CVPR 2010) on hand-made cases."""

import numpy as np
import pytest

from stitch.errors import OptionError
from stitch.layout import Placement
from stitch.puzzles import score_placement

NAMES = tuple(f"t{i}" for i in range(9))


def grid_placement(grid, shape=None, rotations=None):
    """Placement from a list of rows of tile numbers (-1 = hole)."""
    grid = np.asarray(grid)
    orient = np.zeros_like(grid) if rotations is None else np.asarray(rotations)
    p = Placement.from_grid(NAMES, grid, orient)
    if shape is not None:
        p = Placement(p.names, shape, p.rows, p.cols, p.rotations, p.mirrored)
    return p


KEY = grid_placement([[0, 1, 2], [3, 4, 5], [6, 7, 8]])  # 12 adjacencies


def test_identical_is_perfect():
    s = score_placement(KEY, KEY)
    assert (s.direct, s.neighbor, s.perfect, s.adjacencies) == (1.0, 1.0, True, 12)


def test_shift_by_one_column_keeps_every_neighbour():
    """Direct comparison takes cells as they stand (no tile is in its cell);
    the shifted variant forgives the global shift."""
    shifted = grid_placement([[-1, 0, 1, 2], [-1, 3, 4, 5], [-1, 6, 7, 8]])
    s = score_placement(shifted, KEY)
    assert (s.direct, s.shifted_direct, s.neighbor, s.perfect) == (0.0, 1.0, 1.0, True)


def test_swapping_corner_and_centre_breaks_their_six_adjacencies():
    # t0 has 2 neighbours, t4 has 4, none shared: 6 of 12 adjacencies break.
    swapped = grid_placement([[4, 1, 2], [3, 0, 5], [6, 7, 8]])
    s = score_placement(swapped, KEY)
    assert s.neighbor == pytest.approx(6 / 12)
    assert s.direct == pytest.approx(7 / 9)
    assert not s.perfect


def test_swapping_two_neighbours_breaks_four_adjacencies():
    # t0 (2 neighbours) and t1 (3 neighbours) share one seam: 2 + 3 - 1 = 4 break,
    # including their own seam, which now joins the wrong sides.
    swapped = grid_placement([[1, 0, 2], [3, 4, 5], [6, 7, 8]])
    s = score_placement(swapped, KEY)
    assert s.neighbor == pytest.approx(8 / 12)
    assert s.direct == pytest.approx(7 / 9)


def test_global_quarter_turn_is_forgiven_only_when_frame_is_free():
    turned = KEY.turned(1)
    assert score_placement(turned, KEY).perfect  # auto: turned tiles present
    assert score_placement(turned, KEY, frame="free").direct == 1.0
    fixed = score_placement(turned, KEY, frame="fixed")
    assert fixed.direct < 1.0 and fixed.neighbor == 1.0  # neighbours never depend on the frame


def test_missing_tiles_count_as_wrong():
    partial = Placement(NAMES[:8], KEY.shape, KEY.rows[:8], KEY.cols[:8], KEY.rotations[:8], KEY.mirrored[:8])
    s = score_placement(partial, KEY)
    assert s.missing == 1 and s.direct == pytest.approx(8 / 9) and s.neighbor == pytest.approx(10 / 12)


def test_a_missing_tile_never_borrows_another_tiles_cell():
    """Key: a at (0, 0), b at (0, 1). The solution lost a and put b on a's
    cell: no tile is where it belongs, so the direct comparison is 0 (a
    scorer that looked up the missing tile by a default index would credit
    b's cell to a), and the shifted one is 1/2 (b alone, one column off)."""
    key = Placement(("a", "b"), (1, 2), np.array([0, 0]), np.array([0, 1]), np.zeros(2, int), np.zeros(2, bool))
    solution = Placement(("b",), (1, 2), np.array([0]), np.array([0]), np.zeros(1, int), np.zeros(1, bool))
    s = score_placement(solution, key)
    assert (s.direct, s.shifted_direct, s.missing, s.perfect) == (0.0, 0.5, 1, False)
    assert s.neighbor == 0.0  # the one true seam a|b is gone


def test_scores_do_not_depend_on_the_order_tiles_are_listed_in():
    """The same 3 x 3 placement, its tiles listed in another order (as a
    placement.csv sorted by name and an answer key sorted by cell are), with
    turned tiles: every score is perfect, every seam found under its names."""
    rot = np.array([0, 1, 2, 3, 0, 1, 2, 3, 0])
    key = Placement(NAMES, (3, 3), KEY.rows, KEY.cols, rot, np.zeros(9, bool))
    order = np.array([4, 8, 0, 6, 2, 7, 1, 5, 3])
    listed = Placement(tuple(NAMES[i] for i in order), (3, 3), KEY.rows[order], KEY.cols[order], rot[order],
                       np.zeros(9, bool))
    s = score_placement(listed, key)
    assert (s.direct, s.shifted_direct, s.neighbor, s.perfect, s.adjacencies) == (1.0, 1.0, 1.0, True, 12)


def test_a_global_mirror_is_forgiven_only_when_the_frame_allows_it():
    """The whole 3x3 mirrored left-right (every tile flagged mirrored, by
    hand: t2 t1 t0 / t5 t4 t3 / t8 t7 t6): the same mosaic seen from behind.
    "free" forgives it, "fixed" does not, "auto" does because tiles are
    mirrored; the neighbour comparison never depends on the frame."""
    mirrored = Placement(KEY.names, (3, 3), KEY.rows, 2 - KEY.cols, KEY.rotations, np.ones(9, bool))
    assert np.array_equal(mirrored.turned(0, mirror=True).cols, KEY.cols)  # the hand-made mirror is the library's
    for frame, direct in (("free", 1.0), ("auto", 1.0), ("fixed", 0.0)):
        s = score_placement(mirrored, KEY, frame=frame)
        assert s.shifted_direct == direct and s.perfect is (direct == 1.0), frame
        assert s.neighbor == 1.0


def test_a_single_tile_key_and_an_empty_one():
    """With one tile there are no adjacencies: neighbour comparison is 1 for
    the right tile and 0 for a wrong orientation (it follows the direct
    comparison); a key that places no tile is refused."""
    key = Placement(("a",), (1, 1), [0], [0], [0], [False])
    s = score_placement(key, key)
    assert (s.direct, s.neighbor, s.perfect, s.tiles, s.adjacencies) == (1.0, 1.0, True, 1, 0)
    wrong = Placement(("a",), (1, 1), [0], [0], [2], [False])
    s = score_placement(wrong, key, frame="fixed")
    assert (s.direct, s.neighbor, s.perfect) == (0.0, 0.0, False)
    empty = Placement(("a",), (1, 1), [-1], [-1], [0], [False])
    with pytest.raises(OptionError, match="^the answer key places no tile$"):
        score_placement(key, empty)
