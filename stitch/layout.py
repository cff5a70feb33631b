"""A placement: which tile sits in which grid cell, turned how.

Orientation convention (the ``placement.csv`` contract)
--------------------------------------------------------
A tile file is first mirrored left-right when ``mirrored`` is set, then turned
clockwise by ``rotation`` quarter turns; the result sits upright in the mosaic.
Row 0 is the top (north) row, column 0 the left (west) column.

Internally an orientation is one small integer ``o = 4 * mirrored + rotation``
(0-7), and a *side slot* ``4 * tile + side`` names one side of one tile file
(sides 0 top, 1 right, 2 bottom, 3 left, before any turn); the arithmetic of
both lives in :mod:`stitch.orientation`.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from .errors import OptionError, PlacementFileError
from .files import write_text_atomic
from .orientation import FACE, TURN_MODES, facing_side, turned_orientations

__all__ = [
    "CSV_HEADER",
    "Placement",
    "allowed_orientations",
    "format_placement_csv",
    "normalize_frame",
    "read_placement_csv",
    "seam_pairs",
    "write_placement_csv",
]

#: Column names of placement.csv, in order.
CSV_HEADER = ("tile", "row", "col", "rotation", "mirrored", "confidence")

def allowed_orientations(rotations, mirrored, *, square=True):
    """Orientation codes ``4 * mirrored + rotation`` a search may use.

    Parameters
    ----------
    rotations : {0, 180, 90}
        0: upright only; 180: half turns; 90: any quarter turn.
    mirrored : bool
        Also allow left-right mirrored tiles.
    square : bool, optional
        Quarter turns need square tiles.

    Returns
    -------
    tuple of int
    """
    if rotations not in TURN_MODES:
        raise OptionError(f"rotations must be one of {sorted(TURN_MODES)}, not {rotations!r}")
    if rotations == 90 and not square:
        raise OptionError("quarter turns (--rotations 90) need square tiles; use --rotations 180")
    turns = TURN_MODES[rotations]
    codes = [t for t in turns]
    if mirrored:
        codes += [4 + t for t in turns]
    return tuple(codes)


@dataclass(frozen=True, eq=False)
class Placement:
    """Where every tile goes.

    Attributes
    ----------
    names : tuple of str
        Tile names; the arrays below are indexed like ``names``.
    shape : (int, int)
        Grid rows and columns.
    rows, cols : ndarray of int
        Cell of each tile; -1 for a tile that is not placed.
    rotations : ndarray of int
        Clockwise quarter turns (0-3).
    mirrored : ndarray of bool
    confidence : ndarray of float
        In [0, 1]; NaN where unknown.
    """

    names: tuple[str, ...]
    shape: tuple[int, int]
    rows: np.ndarray
    cols: np.ndarray
    rotations: np.ndarray
    mirrored: np.ndarray
    confidence: np.ndarray = field(default=None)

    def __post_init__(self):
        n = len(self.names)
        conv = {
            "rows": np.int64, "cols": np.int64, "rotations": np.int64,
            "mirrored": bool, "confidence": np.float64,
        }
        for name, dtype in conv.items():
            value = getattr(self, name)
            if value is None:
                value = np.full(n, np.nan)
            arr = np.array(value, dtype=dtype).reshape(-1)
            if arr.shape != (n,):
                raise ValueError(f"{name} has {arr.size} entries for {n} tiles")
            arr.flags.writeable = False
            object.__setattr__(self, name, arr)
        object.__setattr__(self, "shape", (int(self.shape[0]), int(self.shape[1])))
        object.__setattr__(self, "rotations", self.rotations % 4)
        placed = self.rows >= 0
        if np.any(self.rows[placed] >= self.shape[0]) or np.any(self.cols[placed] >= self.shape[1]):
            raise ValueError(f"a tile lies outside the {self.shape[0]}x{self.shape[1]} grid")
        cells = self.rows[placed] * self.shape[1] + self.cols[placed]
        if len(np.unique(cells)) != len(cells):
            raise ValueError("two tiles share a cell")

    @classmethod
    def from_grid(cls, names, tiles, orientations, confidence=None):
        """Build from a ``(rows, cols)`` grid of tile indices (-1 = hole) and codes."""
        tiles = np.asarray(tiles)
        orientations = np.asarray(orientations)
        n = len(names)
        rows = np.full(n, -1)
        cols = np.full(n, -1)
        rot = np.zeros(n, int)
        mir = np.zeros(n, bool)
        r, c = np.nonzero(tiles >= 0)
        t = tiles[r, c]
        rows[t], cols[t] = r, c
        rot[t] = orientations[r, c] % 4
        mir[t] = orientations[r, c] >= 4
        return cls(tuple(names), tiles.shape, rows, cols, rot, mir, confidence)

    @property
    def placed(self):
        """Boolean mask of placed tiles."""
        return self.rows >= 0

    @property
    def orientations(self):
        """Orientation codes ``4 * mirrored + rotation``."""
        return self.mirrored.astype(np.int64) * 4 + self.rotations

    def grid(self):
        """``(tiles, orientations)``: two ``shape`` arrays, tile index -1 in holes."""
        tiles = np.full(self.shape, -1, np.int64)
        orient = np.zeros(self.shape, np.int64)
        p = self.placed
        tiles[self.rows[p], self.cols[p]] = np.nonzero(p)[0]
        orient[self.rows[p], self.cols[p]] = self.orientations[p]
        return tiles, orient

    def with_confidence(self, confidence):
        return replace(self, confidence=np.asarray(confidence, float))

    def turned(self, quarter_turns=1, mirror=False):
        """The whole mosaic mirrored (optional) then turned clockwise.

        Every tile's own orientation changes with it, so seams are kept.
        """
        rows, cols = self.rows.copy(), self.cols.copy()
        rot, mir = self.rotations.copy(), self.mirrored.copy()
        nrows, ncols = self.shape
        p = self.placed
        if mirror:
            cols[p] = ncols - 1 - cols[p]
        for _ in range(quarter_turns % 4):
            rows[p], cols[p] = cols[p], nrows - 1 - rows[p]
            nrows, ncols = ncols, nrows
        rot, mir = turned_orientations(rot, mir, quarter_turns, mirror)
        return Placement(self.names, (nrows, ncols), rows, cols, rot, mir, self.confidence)

    def cropped(self):
        """Shift so the placed tiles start at row 0, column 0, and trim the grid."""
        p = self.placed
        if not p.any():
            return self
        r0, c0 = self.rows[p].min(), self.cols[p].min()
        rows, cols = self.rows.copy(), self.cols.copy()
        rows[p] -= r0
        cols[p] -= c0
        shape = (rows[p].max() + 1, cols[p].max() + 1)
        return replace(self, shape=shape, rows=rows, cols=cols)


def seam_pairs(placement):
    """Every seam of a placement as side slots.

    Returns
    -------
    ndarray, shape (n_seams, 3)
        ``(slot_a, slot_b, flip)`` with ``slot = 4 * tile + side`` of the tile
        files, ``slot_a < slot_b``, and ``flip`` 1 when exactly one of the two
        tiles is mirrored. The set does not change when the whole mosaic is
        shifted, turned or mirrored, which makes it the basis of the
        neighbour comparison.
    """
    tiles, orient = placement.grid()
    out = []
    for direction, (a_t, a_o, b_t, b_o) in (
        (1, (tiles[:, :-1], orient[:, :-1], tiles[:, 1:], orient[:, 1:])),
        (2, (tiles[:-1, :], orient[:-1, :], tiles[1:, :], orient[1:, :])),
    ):
        both = (a_t >= 0) & (b_t >= 0)
        a_t, a_o, b_t, b_o = a_t[both], a_o[both], b_t[both], b_o[both]
        sa = a_t * 4 + facing_side(a_o % 4, a_o >= 4, direction)
        sb = b_t * 4 + facing_side(b_o % 4, b_o >= 4, (direction + 2) % 4)
        flip = (a_o >= 4) ^ (b_o >= 4)
        out.append(np.stack([np.minimum(sa, sb), np.maximum(sa, sb), flip.astype(np.int64)], axis=1))
    return np.concatenate(out).astype(np.int64) if out else np.empty((0, 3), np.int64)


def format_placement_csv(placement, review=None):
    """Text of ``placement.csv`` (header ``tile,row,col,rotation,mirrored,confidence``).

    Tiles are listed in reading order of their cells; unplaced tiles last with
    empty row and col. Rotation is in degrees clockwise. With ``review`` (one
    label per tile: ``""``, ``"interchangeable"`` or ``"doubtful"``) a last
    column ``review`` holds it.
    """
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(CSV_HEADER + (("review",) if review is not None else ()))
    order = np.lexsort((placement.cols, placement.rows, ~placement.placed))
    for i in order:
        placed = placement.rows[i] >= 0
        conf = placement.confidence[i]
        w.writerow([
            placement.names[i],
            int(placement.rows[i]) if placed else "",
            int(placement.cols[i]) if placed else "",
            int(placement.rotations[i]) * 90,
            int(placement.mirrored[i]),
            "" if np.isnan(conf) else f"{conf:.4f}",
        ] + ([review[i]] if review is not None else []))
    return buf.getvalue()


def write_placement_csv(placement, path, *, overwrite=False, review=None):
    """Write :func:`format_placement_csv` to ``path`` atomically."""
    return write_text_atomic(path, format_placement_csv(placement, review), overwrite=overwrite)


def read_placement_csv(path):
    """Read a placement CSV written by :func:`write_placement_csv` (or by hand).

    Raises
    ------
    PlacementFileError
        Missing columns, values out of range, duplicate tiles or cells.
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8-sig")
    except OSError as exc:
        raise PlacementFileError(f"cannot read placement file {str(path)!r}: {exc.strerror}") from exc
    rows = list(csv.DictReader(io.StringIO(text)))
    header = text.splitlines()[0].split(",") if text.strip() else []
    missing = [c for c in CSV_HEADER[:5] if c not in [h.strip() for h in header]]
    if missing:
        raise PlacementFileError(
            f"placement file {str(path)!r} lacks column(s) {', '.join(missing)}; "
            f"expected header {','.join(CSV_HEADER)}"
        )
    names, r_, c_, rot, mir, conf = [], [], [], [], [], []
    for lineno, row in enumerate(rows, start=2):
        try:
            name = row["tile"].strip()
            placed = row["row"].strip() != ""
            r_.append(int(row["row"]) if placed else -1)
            c_.append(int(row["col"]) if placed else -1)
            deg = int(float(row["rotation"] or 0))
            m = int(row["mirrored"] or 0)
            cv = (row.get("confidence") or "").strip()
            conf.append(float(cv) if cv else np.nan)
        except (TypeError, ValueError) as exc:
            raise PlacementFileError(f"{path.name} line {lineno}: {exc}; fix the value") from None
        if deg % 90 or m not in (0, 1) or (placed and (r_[-1] < 0 or c_[-1] < 0)):
            raise PlacementFileError(
                f"{path.name} line {lineno}: rotation must be 0, 90, 180 or 270, mirrored 0 or 1, "
                "row and col non-negative"
            )
        names.append(name)
        rot.append((deg // 90) % 4)
        mir.append(bool(m))
    if len(set(names)) != len(names):
        dup = sorted({n for n in names if names.count(n) > 1})
        raise PlacementFileError(f"{path.name} lists tile(s) more than once: {', '.join(dup[:5])}")
    r_, c_ = np.array(r_, int), np.array(c_, int)
    shape = (int(r_.max()) + 1, int(c_.max()) + 1) if len(r_) and (r_ >= 0).any() else (0, 0)
    try:
        return Placement(tuple(names), shape, r_, c_, rot, mir, conf)
    except ValueError as exc:
        raise PlacementFileError(f"{path.name}: {exc}") from None


def normalize_frame(placement, *, orientations=(0,), fit=None, anchors=None, outer=None):
    """Choose the global turn (and mirror) nothing else fixes.

    Seam costs do not change when the whole mosaic is turned or mirrored, so
    the search cannot tell those frames apart. The frame chosen is the one
    that makes the ``anchors`` (tiles whose georeferencing survived) upright
    and unmirrored; then the one that turns the most partial edge tiles'
    outer sides right and down, where tilers put the raster's remainder; then
    the one that leaves the most tiles as stored in their files (rotation 0,
    not mirrored).

    Parameters
    ----------
    placement : Placement
    orientations : sequence of int
        The orientation codes tiles were allowed: the whole mosaic may take
        any of their turns, and be mirrored when tiles may be.
    fit : (int, int), optional
        Only frames whose placed tiles fit in this ``rows x cols`` grid (one
        the user gave); the result then has exactly this shape.
    anchors : array of int, optional
        Indices of anchor tiles.
    outer : ndarray of bool, shape (n_tiles, 4), optional
        File sides of partial edge tiles that faced the raster's edge
        (:func:`stitch.partial.partial_edges`).

    Returns
    -------
    Placement
        Shifted to start at row 0, column 0.
    """
    turns = sorted({int(o) % 4 for o in orientations})
    mirror = any(int(o) >= 4 for o in orientations)
    best, best_key = None, None
    for m in ((False, True) if mirror else (False,)):
        for k in turns:
            cand = placement.turned(k, mirror=m).cropped()
            if fit is not None:
                if cand.shape[0] > fit[0] or cand.shape[1] > fit[1]:
                    continue
                cand = replace(cand, shape=tuple(fit))
            upright = cand.placed & (cand.rotations == 0) & ~cand.mirrored
            on_anchor = int(upright[np.asarray(anchors, int)].sum()) if anchors is not None and len(anchors) else 0
            key = (on_anchor, _edge_outward(cand, outer), int(upright.sum()), -k, -int(m))
            if best_key is None or key > best_key:
                best, best_key = cand, key
    if best is None:
        if fit is not None:
            raise OptionError(f"the placement ({placement.shape[0]}x{placement.shape[1]}) does not fit the grid "
                              f"{fit[0]}x{fit[1]}")
        return placement.cropped()
    return best


def _edge_outward(placement, outer):
    """Partial edge tiles whose outer sides all face right or down."""
    if outer is None or not outer.any():
        return 0
    tiles = np.flatnonzero(outer.any(axis=1) & placement.placed)
    codes = 4 * placement.mirrored[tiles].astype(np.int64) + placement.rotations[tiles]
    up, left = FACE[codes, 0], FACE[codes, 3]  # file sides facing up and left
    bad = outer[tiles, up] | outer[tiles, left]
    return int((~bad).sum())
