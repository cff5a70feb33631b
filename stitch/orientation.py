"""Orientation arithmetic: which side of a turned tile faces where, turning pixels and points.

The one home of the rule every stage shares (the ``placement.csv`` contract):
a tile file is first mirrored left-right when ``mirrored`` is set, then turned
clockwise by ``rotation`` quarter turns; the result sits upright in the mosaic.

* Sides of a tile file and directions in the mosaic are both numbered
  clockwise from the top: 0 top (up), 1 right, 2 bottom (down), 3 left.
* An orientation *code* is one small integer ``o = 4 * mirrored + rotation``
  (0-7).
* A *side slot* ``4 * tile + side`` names one side of one tile file.

The tables :data:`FACE` and :data:`TURN_TO_FACE` are this rule evaluated once,
for the compiled search loops (numba reads module-level arrays as
constants); :func:`facing_side` is the same rule on arrays.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "FACE",
    "STEPS",
    "TURN_MODES",
    "TURN_TO_FACE",
    "facing_side",
    "orient",
    "orient_point",
    "turned_orientations",
    "unorient",
]

#: Turns a tile may need, by the ``--rotations`` value (of ``solve`` and ``cut``): none,
#: half turns, or any quarter turn (clockwise quarter turns).
TURN_MODES = {0: (0,), 180: (0, 2), 90: (0, 1, 2, 3)}

#: Cell offsets (d_row, d_col) for directions 0 up, 1 right, 2 down, 3 left.
STEPS = ((-1, 0), (0, 1), (1, 0), (0, -1))


def facing_side(rotation, mirrored, direction):
    """Side of the tile file that faces ``direction`` once oriented.

    Parameters
    ----------
    rotation : int or ndarray
        Clockwise quarter turns.
    mirrored : bool or ndarray
    direction : int or ndarray
        0 up, 1 right, 2 down, 3 left in the mosaic.

    Examples
    --------
    A tile turned a quarter clockwise shows its old top side on the right:

    >>> int(facing_side(1, False, 1))
    0
    """
    rotation = np.asarray(rotation)
    direction = np.asarray(direction)
    return np.where(np.asarray(mirrored, bool), (rotation - direction) % 4, (direction - rotation) % 4)


#: ``FACE[o, d]``: side of the tile file facing direction ``d`` under
#: orientation code ``o``.
FACE = facing_side(np.arange(8)[:, None] % 4, np.arange(8)[:, None] >= 4, np.arange(4)[None, :]).astype(np.int64)


def _turn_to_face():
    out = np.full((2, 4, 4), -1, np.int64)
    for o in range(8):
        for d in range(4):
            out[o // 4, FACE[o, d], d] = o
    return out


#: ``TURN_TO_FACE[m, s, d]``: the orientation code with mirror bit ``m`` that
#: makes side ``s`` of the tile file face direction ``d`` (the inverse of
#: :data:`FACE` for a given mirror bit).
TURN_TO_FACE = _turn_to_face()


def turned_orientations(rotation, mirrored, quarter_turns=0, mirror=False):
    """Tile orientations after the whole mosaic is mirrored (optional), then turned.

    Parameters
    ----------
    rotation, mirrored : ndarray
        Each tile's clockwise quarter turns and mirror flag.
    quarter_turns : int
        Clockwise quarter turns of the whole mosaic.
    mirror : bool
        Mirror the whole mosaic left-right first.

    Returns
    -------
    rotation, mirrored : ndarray

    Examples
    --------
    Mirroring a tile that was turned a quarter clockwise leaves it turned a
    quarter anticlockwise, and mirrored:

    >>> r, m = turned_orientations(np.array([1]), np.array([False]), mirror=True)
    >>> int(r[0]), bool(m[0])
    (3, True)
    """
    rotation = np.asarray(rotation)
    mirrored = np.asarray(mirrored, bool)
    if mirror:
        rotation, mirrored = (-rotation) % 4, ~mirrored
    return (rotation + quarter_turns) % 4, mirrored


def orient(pixels, rotation, mirrored=False):
    """Turn a ``(bands, rows, cols)`` array the way a placement says.

    Parameters
    ----------
    pixels : ndarray
        Tile pixels, bands first, as rasterio reads them.
    rotation : int
        Clockwise quarter turns (0-3) applied after the optional mirror.
    mirrored : bool, optional
        Mirror left-right first.

    Returns
    -------
    ndarray
        A view of ``pixels`` as it sits in the mosaic.

    Examples
    --------
    >>> a = np.arange(4).reshape(1, 2, 2)
    >>> orient(a, 1)[0]
    array([[2, 0],
           [3, 1]])
    """
    if mirrored:
        pixels = pixels[..., ::-1]
    return np.rot90(pixels, -int(rotation) % 4, axes=(-2, -1))


def unorient(pixels, rotation, mirrored=False):
    """The inverse of :func:`orient`: the file that ``orient`` turns into ``pixels``.

    Examples
    --------
    >>> a = np.arange(6).reshape(1, 2, 3)
    >>> bool((orient(unorient(a, 3, True), 3, True) == a).all())
    True
    """
    pixels = np.rot90(pixels, int(rotation) % 4, axes=(-2, -1))
    return pixels[..., ::-1] if mirrored else pixels


def orient_point(col, row, width, height, rotation, mirrored=False):
    """Where a position inside a tile file lies once the tile is oriented.

    Coordinates are continuous, in GDAL's pixel/line convention ((0, 0) is
    the upper-left corner of the upper-left pixel); ``width`` and ``height``
    are the file's.

    Returns
    -------
    (col, row) : tuple of float
        In the oriented tile, whose width and height swap under odd turns.

    Examples
    --------
    The upper-left corner of a 4 x 2 file turned a quarter clockwise lies at
    the upper-right corner of the 2 x 4 result:

    >>> orient_point(0, 0, 4, 2, 1)
    (2.0, 0.0)
    """
    u, v, w, h = float(col), float(row), float(width), float(height)
    if mirrored:
        u = w - u
    for _ in range(int(rotation) % 4):
        u, v, w, h = h - v, u, h, w
    return u, v
