"""Placements: orientation convention, whole-mosaic turns, the placement.csv contract."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from stitch.errors import PlacementFileError
from stitch.layout import Placement, format_placement_csv, read_placement_csv, seam_pairs
from stitch.orientation import facing_side, orient


def test_orient_matches_numpy_clockwise_turn_after_mirror():
    a = np.arange(6).reshape(1, 2, 3)
    np.testing.assert_array_equal(orient(a, 1), np.rot90(a, -1, axes=(1, 2)))
    np.testing.assert_array_equal(orient(a, 3, True), np.rot90(a[..., ::-1], -3, axes=(1, 2)))


def test_facing_side_follows_the_pixels():
    """Mark each side of a tile, orient it, and see which mark faces each way."""
    tile = np.zeros((1, 5, 5), int)
    tile[0, 0, 1:4], tile[0, 1:4, 4], tile[0, 4, 1:4], tile[0, 1:4, 0] = 1, 2, 3, 4  # sides 0..3 marked 1..4
    probes = {0: (0, 2), 1: (2, 4), 2: (4, 2), 3: (2, 0)}
    for r in range(4):
        for m in (False, True):
            t = orient(tile, r, m)[0]
            for d, (i, j) in probes.items():
                assert t[i, j] - 1 == facing_side(r, m, d)


@settings(max_examples=50, deadline=None)
@given(st.integers(1, 4), st.integers(1, 4), st.integers(0, 3), st.booleans(), st.integers(0, 2**31 - 1))
def test_whole_mosaic_turns_keep_every_seam(rows, cols, k, m, seed):
    rng = np.random.default_rng(seed)
    n = rows * cols
    p = Placement(tuple(map(str, range(n))), (rows, cols), np.arange(n) // cols, np.arange(n) % cols,
                  rng.integers(0, 4, n), rng.random(n) < 0.5)
    q = p.turned(k, mirror=m)
    assert {tuple(s) for s in seam_pairs(p)} == {tuple(s) for s in seam_pairs(q)}
    back = p.turned(4)
    np.testing.assert_array_equal(back.rows, p.rows)
    np.testing.assert_array_equal(back.rotations, p.rotations)


def test_placement_csv_round_trip(tmp_path):
    p = Placement(("b.tif", "a.tif", "c.tif"), (1, 3), [0, 0, -1], [1, 0, -1], [1, 0, 2], [True, False, False],
                  [0.5, 1.0, np.nan])
    text = format_placement_csv(p)
    assert text.splitlines() == [
        "tile,row,col,rotation,mirrored,confidence",
        "a.tif,0,0,0,0,1.0000",
        "b.tif,0,1,90,1,0.5000",
        "c.tif,,,180,0,",
    ]
    f = tmp_path / "p.csv"
    f.write_text(text)
    q = read_placement_csv(f)
    assert dict(zip(q.names, q.rows)) == {"a.tif": 0, "b.tif": 0, "c.tif": -1}
    assert dict(zip(q.names, q.cols)) == {"a.tif": 0, "b.tif": 1, "c.tif": -1}
    assert dict(zip(q.names, q.rotations)) == {"a.tif": 0, "b.tif": 1, "c.tif": 2}
    assert dict(zip(q.names, q.mirrored)) == {"a.tif": False, "b.tif": True, "c.tif": False}
    assert q.shape == (1, 2)


@pytest.mark.parametrize(
    "text, message",
    [
        pytest.param("tile,row,col\n", "lacks column", id="missing columns"),
        pytest.param("tile,row,col,rotation,mirrored\na,0,x,0,0\n", "line 2", id="non-numeric"),
        pytest.param("tile,row,col,rotation,mirrored\na,0,0,45,0\n", "rotation must be", id="bad rotation"),
        pytest.param("tile,row,col,rotation,mirrored\na,0,0,0,0\na,0,1,0,0\n", "more than once", id="duplicate"),
        pytest.param("tile,row,col,rotation,mirrored\na,0,0,0,0\nb,0,0,0,0\n", "share a cell", id="same cell"),
    ],
)
def test_bad_placement_csv(tmp_path, text, message):
    f = tmp_path / "p.csv"
    f.write_text(text)
    with pytest.raises(PlacementFileError, match=message):
        read_placement_csv(f)


def test_placement_csv_errors_name_the_file_and_what_is_expected(tmp_path):
    f = tmp_path / "p.csv"
    f.write_text("tile,row,col\n")
    with pytest.raises(PlacementFileError) as err:
        read_placement_csv(f)
    assert str(err.value) == (f"placement file {str(f)!r} lacks column(s) rotation, mirrored; "
                              "expected header tile,row,col,rotation,mirrored,confidence")
    with pytest.raises(PlacementFileError, match=f"cannot read placement file {str(tmp_path / 'none.csv')!r}"):
        read_placement_csv(tmp_path / "none.csv")


def test_seam_pairs_of_a_3x2_grid_by_hand():
    """Tiles 0 1 / 2 3 / 4 5, upright: a tile's right side is slot 4 t + 1,
    its bottom 4 t + 2, its left 4 t + 3, its top 4 t (sides clockwise from
    the top, the placement.csv contract). Three horizontal and four vertical
    seams, listed by hand."""
    import numpy as np

    p = Placement(tuple("abcdef"), (3, 2), np.array([0, 0, 1, 1, 2, 2]), np.array([0, 1, 0, 1, 0, 1]),
                  np.zeros(6, int), np.zeros(6, bool))
    expected = {(1, 7, 0), (9, 15, 0), (17, 23, 0),   # 0|1, 2|3, 4|5
                (2, 8, 0), (6, 12, 0), (10, 16, 0), (14, 20, 0)}  # 0/2, 1/3, 2/4, 3/5
    assert {tuple(int(v) for v in s) for s in seam_pairs(p)} == expected


def test_placement_csv_reads_what_a_hand_written_file_leaves_out(tmp_path):
    """Blank rotation and mirrored mean 0; confidence is read when given and
    NaN when blank; turns beyond 270 wrap (450 is 90); a file placing no tile
    has an empty grid."""
    f = tmp_path / "p.csv"
    f.write_text("tile,row,col,rotation,mirrored,confidence\na,0,0,,,0.25\nb,0,1,450,1,\n")
    q = read_placement_csv(f)
    assert q.rotations.tolist() == [0, 1] and q.mirrored.tolist() == [False, True]
    assert q.confidence[0] == 0.25 and np.isnan(q.confidence[1])
    f.write_text("tile,row,col,rotation,mirrored\na,,,0,0\n")
    assert read_placement_csv(f).shape == (0, 0)


@pytest.mark.parametrize("line", ["a,-1,3,0,0", "a,3,-1,0,0", "a,0,0,0,2", "a,0,0,45,0"])
def test_placement_csv_refuses_a_bad_cell_turn_or_mirror(tmp_path, line):
    f = tmp_path / "p.csv"
    f.write_text(f"tile,row,col,rotation,mirrored\n{line}\n")
    with pytest.raises(PlacementFileError) as err:
        read_placement_csv(f)
    assert str(err.value) == ("p.csv line 2: rotation must be 0, 90, 180 or 270, mirrored 0 or 1, "
                              "row and col non-negative")


def test_placement_csv_names_tiles_listed_twice(tmp_path):
    f = tmp_path / "p.csv"
    f.write_text("tile,row,col,rotation,mirrored\nb,0,0,0,0\na,0,1,0,0\nb,1,0,0,0\na,1,1,0,0\nc,2,0,0,0\n")
    with pytest.raises(PlacementFileError) as err:
        read_placement_csv(f)
    assert str(err.value) == "p.csv lists tile(s) more than once: a, b"


def _row(names, cols, rotations, mirrored):
    n = len(names)
    return Placement(tuple(names), (1, max(cols) + 1), np.zeros(n, int), np.array(cols), np.array(rotations),
                     np.array(mirrored, bool))


def test_frame_unmirrors_a_mosaic_seen_from_behind():
    """a b c, stored mirrored and placed right to left: with mirrors allowed
    (orientation codes 0 and 4: no turns), the frame that leaves every tile
    as stored in its file is a b c upright."""
    from stitch.layout import normalize_frame

    behind = _row("abc", [2, 1, 0], [0, 0, 0], [True, True, True])
    p = normalize_frame(behind, orientations=(0, 4))
    assert p.cols.tolist() == [0, 1, 2] and not p.mirrored.any() and p.shape == (1, 3)
    assert normalize_frame(behind, orientations=(0,)).mirrored.all()  # no mirrors allowed: left as it is


def test_frame_ties_keep_the_placement_as_found():
    """Half the tiles upright either way: the frame as found wins (no turn,
    no mirror), so a result never flips for nothing."""
    from stitch.layout import normalize_frame

    turned = _row("ab", [0, 1], [0, 2], [False, False])
    p = normalize_frame(turned, orientations=(0, 2))
    assert p.cols.tolist() == [0, 1] and p.rotations.tolist() == [0, 2]
    half = _row("ab", [0, 1], [0, 0], [False, True])
    p = normalize_frame(half, orientations=(0, 4))
    assert p.cols.tolist() == [0, 1] and p.mirrored.tolist() == [False, True]


def test_frame_puts_partial_tiles_outer_sides_right_and_down():
    """Both tiles stored half turned; b is a partial edge tile whose file
    side 3 (left) faced the raster's edge. Turned back (more tiles upright),
    that side would face left; as found it faces right, where tilers put the
    remainder, and that outranks the upright count."""
    from stitch.layout import normalize_frame

    stored = _row("ab", [0, 1], [2, 2], [False, False])
    outer = np.zeros((2, 4), bool)
    outer[1, 3] = True
    p = normalize_frame(stored, orientations=(0, 2), outer=outer)
    assert p.cols.tolist() == [0, 1] and p.rotations.tolist() == [2, 2]
    assert normalize_frame(stored, orientations=(0, 2)).rotations.tolist() == [0, 0]  # without the edge evidence


def test_frame_fits_the_grid_given_or_says_it_cannot():
    from stitch.errors import OptionError
    from stitch.layout import normalize_frame

    p = normalize_frame(_row("ab", [0, 1], [0, 0], [False, False]), orientations=(0, 1, 2, 3), fit=(2, 3))
    assert p.shape == (2, 3) and p.rotations.tolist() == [0, 0]
    with pytest.raises(OptionError) as err:
        normalize_frame(_row("ab", [0, 1], [0, 0], [False, False]), orientations=(0,), fit=(2, 1))
    assert str(err.value) == "the placement (1x2) does not fit the grid 2x1"


def test_frame_reads_mirrored_partial_tiles_and_defaults_to_no_turn():
    """As above with the tiles stored mirrored instead of turned: a mirrored
    tile shows its file side 3 on the right (facing_side(0, True, 1) == 3),
    so the mosaic as found keeps b's outer side on the right. Without
    orientations given, nothing is turned."""
    from stitch.layout import normalize_frame
    from stitch.orientation import facing_side

    assert int(facing_side(0, True, 1)) == 3
    stored = _row("ab", [0, 1], [0, 0], [True, True])
    outer = np.zeros((2, 4), bool)
    outer[1, 3] = True
    p = normalize_frame(stored, orientations=tuple(range(8)), outer=outer)
    assert p.cols.tolist() == [0, 1] and p.mirrored.tolist() == [True, True] and p.rotations.tolist() == [0, 0]
    q = normalize_frame(_row("ab", [0, 1], [1, 3], [False, False]))
    assert q.cols.tolist() == [0, 1] and q.rotations.tolist() == [1, 3]


def test_placement_csv_names_at_most_five_tiles_listed_twice(tmp_path):
    f = tmp_path / "p.csv"
    f.write_text("tile,row,col,rotation,mirrored\n" + "".join(f"{n},,,0,0\n{n},,,0,0\n" for n in "abcdef"))
    with pytest.raises(PlacementFileError) as err:
        read_placement_csv(f)
    assert str(err.value) == "p.csv lists tile(s) more than once: a, b, c, d, e"
