"""Trusted segments: tiles joined by best-buddy seams that close 2 x 2 loops.

A best-buddy seam alone is good evidence, a closed loop of four of them much
better: a wrong best-buddy pair happens, four that agree around a square
rarely do (the loop constraint of K. Son, J. Hays, D. Cooper, *Solving square
jigsaw puzzles with loop constraints*, ECCV 2014). Seams in such loops are
joined, most confident first, into rigid segments in a frame of their own (a
seam that would put two tiles in one cell is left out), with no grid and no
search involved. The box the largest segment fills is what any grid holding
the tiles must contain; :mod:`stitch.search.shapes` uses it to rule shapes
out.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..orientation import FACE, STEPS, TURN_TO_FACE, turned_orientations

__all__ = ["Segment", "loop_seams", "trusted_segments"]


@dataclass(frozen=True, eq=False)
class Segment:
    """Tiles held together by trusted seams, in the segment's own frame.

    Attributes
    ----------
    tiles, rows, cols, orientations : ndarray of int
        Each tile's cell (from 0) and orientation code in the segment's frame.
    """

    tiles: np.ndarray
    rows: np.ndarray
    cols: np.ndarray
    orientations: np.ndarray

    def __len__(self):
        return len(self.tiles)

    @property
    def box(self):
        """``(rows, cols)`` the segment spans."""
        return int(self.rows.max()) + 1, int(self.cols.max()) + 1


def _follow(bb, tiles, o, direction, allowed):
    """The best buddy of each tile's side facing ``direction`` (tile at
    orientation ``o``) and the orientation that makes it face back; -1 where
    there is none or its orientation is not allowed."""
    code = bb[4 * tiles + FACE[o, direction]]
    ok = code >= 0
    code = np.where(ok, code, 0)
    other = code // 8
    side = (code // 2) % 4
    mirror = (o >= 4).astype(np.int64) ^ (code % 2)
    o2 = TURN_TO_FACE[mirror, side, (direction + 2) % 4]
    ok &= allowed[o2]
    return np.where(ok, other, -1), np.where(ok, o2, 0)


def loop_seams(best_buddies, orientations):
    """Best-buddy seams that lie in a closed 2 x 2 loop of best buddies.

    Parameters
    ----------
    best_buddies : ndarray, shape (4 * n_tiles,)
        Partner code of each side slot's mutual best match, or -1.
    orientations : sequence of int
        Allowed orientation codes.

    Returns
    -------
    ndarray, shape (n_seams, 3)
        ``(slot_a, slot_b, flip)`` with ``slot_a < slot_b``, each seam once.
    """
    bb = np.asarray(best_buddies, np.int64)
    n = len(bb) // 4
    allowed = np.zeros(8, bool)
    allowed[list(orientations)] = True
    a = np.arange(n)
    found = []
    # Each square is found from its top-left tile, in every orientation that
    # tile may take (the square may lie any way round in the tile's file).
    for oa in orientations:
        oa_arr = np.full(n, oa, np.int64)
        b, ob = _follow(bb, a, oa_arr, 1, allowed)   # right of a
        c, oc = _follow(bb, a, oa_arr, 2, allowed)   # below a
        ok = (b >= 0) & (c >= 0) & (b != c)
        d1, od1 = _follow(bb, np.maximum(b, 0), ob, 2, allowed)  # below b
        d2, od2 = _follow(bb, np.maximum(c, 0), oc, 1, allowed)  # right of c
        ok &= (d1 >= 0) & (d1 == d2) & (od1 == od2) & (d1 != a) & (d1 != b) & (d1 != c)
        if not ok.any():
            continue
        for x, ox, d in ((a, oa_arr, 1), (a, oa_arr, 2), (b, ob, 2), (c, oc, 1)):
            x, ox = x[ok], ox[ok]
            slot = 4 * x + FACE[ox, d]
            found.append(np.stack([slot, bb[slot] // 2, bb[slot] % 2], axis=1))
    if not found:
        return np.empty((0, 3), np.int64)
    seams = np.concatenate(found)
    seams[:, :2] = np.sort(seams[:, :2], axis=1)
    return np.unique(seams, axis=0)


def _where(o, side):
    """Direction that ``side`` of a tile at orientation ``o`` faces."""
    return int(np.flatnonzero(FACE[o] == side)[0])


def _frame_move(o_from, o_to):
    """``(quarter_turns, mirror)`` that turns orientation ``o_from`` into ``o_to``."""
    for mirror in (False, True):
        for k in range(4):
            r, m = turned_orientations(np.array([o_from % 4]), np.array([o_from >= 4]), k, mirror)
            if int(m[0]) * 4 + int(r[0]) == o_to:
                return k, mirror
    raise AssertionError("orientations form a group; unreachable")


def _move_cell(r, c, k, mirror):
    """A cell of a segment's frame after the frame is mirrored, then turned k times clockwise."""
    if mirror:
        c = -c
    for _ in range(k % 4):
        r, c = c, -r
    return r, c


def _alignment(members, si, sj, i, j, slot_a, slot_b, flip):
    """How segment ``sj`` must move into ``si``'s frame for the seam between
    tile ``i`` (in ``si``, side ``slot_a``) and tile ``j`` (in ``sj``):
    ``(quarter_turns, mirror, d_row, d_col)``."""
    ri, ci, oi = members[si][i]
    d = _where(oi, slot_a % 4)
    want_o = int(TURN_TO_FACE[int(oi >= 4) ^ flip, slot_b % 4, (d + 2) % 4])
    want_r, want_c = ri + STEPS[d][0], ci + STEPS[d][1]
    rj, cj, oj = members[sj][j]
    k, mirror = _frame_move(oj, want_o)
    mr, mc = _move_cell(rj, cj, k, mirror)
    return k, mirror, want_r - mr, want_c - mc


def trusted_segments(best_buddies, orientations, confidence=None):
    """Rigid segments joined by :func:`loop_seams`, largest first.

    Seams are taken most confident first: ``confidence``, when given, is
    called with the ``(n_seams, 3)`` array of :func:`loop_seams` and returns
    one value per seam (by default they are taken in that array's order). A tile
    on its own joins a segment by one seam; two segments of two or more
    tiles join only when at least two seams between them agree on how they
    lie (one wrong loop in uniform ground then cannot drag a segment off),
    and never when two tiles would share a cell. The smaller segment is
    turned and shifted onto the larger. Rounds of joins repeat until none is
    left.

    Returns
    -------
    list of Segment
        Every segment of two or more tiles.
    """
    seams = loop_seams(best_buddies, orientations)
    if len(seams) == 0:
        return []
    order = np.arange(len(seams)) if confidence is None else np.argsort(-np.asarray(confidence(seams)), kind="stable")
    seams = [tuple(int(v) for v in seams[q]) for q in order]
    tiles = sorted({s // 4 for seam in seams for s in seam[:2]})
    # tile -> segment id; segment id -> {tile: (row, col, orientation)} and {cell: tile}
    owner = {t: t for t in tiles}
    members = {t: {t: (0, 0, 0)} for t in tiles}
    cells = {t: {(0, 0): t} for t in tiles}
    while True:
        proposals = {}  # (into, moved, alignment) -> [support, first seam]
        for q, (slot_a, slot_b, flip) in enumerate(seams):
            i, j = slot_a // 4, slot_b // 4
            si, sj = owner[i], owner[j]
            if si == sj:
                continue
            if (len(members[si]), -si) < (len(members[sj]), -sj):  # move the smaller onto the larger
                i, j, slot_a, slot_b, si, sj = j, i, slot_b, slot_a, sj, si
            key = (si, sj, _alignment(members, si, sj, i, j, slot_a, slot_b, flip))
            entry = proposals.setdefault(key, [0, q])
            entry[0] += 1
        joined, touched = False, set()
        for (si, sj, (k, mirror, dr, dc)), (support, _) in sorted(proposals.items(), key=lambda kv: kv[1][1]):
            if si in touched or sj in touched:
                continue  # this round moved one of them: look again next round
            if support < (1 if min(len(members[si]), len(members[sj])) == 1 else 2):
                continue
            moved = {}
            for t, (r, c, o) in members[sj].items():
                r2, c2 = _move_cell(r, c, k, mirror)
                r2, c2 = r2 + dr, c2 + dc
                if (r2, c2) in cells[si]:
                    moved = None
                    break
                rot, mir = turned_orientations(np.array([o % 4]), np.array([o >= 4]), k, mirror)
                moved[t] = (r2, c2, int(mir[0]) * 4 + int(rot[0]))
            if moved is None:
                continue  # the two segments would overlap: these seams are not to be trusted
            for t, (r, c, o) in moved.items():
                members[si][t] = (r, c, o)
                cells[si][(r, c)] = t
                owner[t] = si
            del members[sj], cells[sj]
            touched.update((si, sj))
            joined = True
        if not joined:
            break
    out = []
    for m in members.values():
        if len(m) < 2:
            continue
        t = np.fromiter(m.keys(), np.int64, len(m))
        r, c, o = (np.array(v, np.int64) for v in zip(*m.values()))
        out.append(Segment(t, r - r.min(), c - c.min(), o))
    out.sort(key=lambda s: (-len(s), int(s.tiles.min())))
    return out
