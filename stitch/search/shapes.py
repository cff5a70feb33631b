"""Grid-shape inference: which ``rows x cols`` grid the tiles came from.

Every shape that holds the tiles is tried with one greedy placement (and, for
sets that may have missing tiles, the box a free greedy placement fills). A
wrong shape forces seams the tiles do not want, so the right one keeps the
most best-buddy seams.
"""

from __future__ import annotations

import logging
import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import OptionError
from .regrowth import regrow
from .types import Grid

__all__ = ["ShapeChoice", "candidate_shapes", "choose_shape"]

log = logging.getLogger(__name__)

#: Smallest share of a hole-y grid's cells that tiles must fill for the grid
#: to be inferred (a few tiles missing, not a scatter).
MIN_FILL = 0.8

#: How many more best-buddy seams (as a factor) a grid with holes must keep
#: than a full one before it wins.
HOLES_MARGIN = 1.05


def candidate_shapes(n_tiles, *, transposes=True):
    """Grid shapes ``(rows, cols)`` that hold exactly ``n_tiles`` tiles.

    Thin strips are left out when a fuller shape exists.

    Examples
    --------
    >>> candidate_shapes(6)
    [(2, 3), (3, 2)]
    """
    shapes = []
    for r in range(1, n_tiles + 1):
        if n_tiles % r == 0:
            shapes.append((r, n_tiles // r))
    full = [s for s in shapes if min(s) >= 2]
    shapes = full or shapes
    if not transposes:
        shapes = [s for s in shapes if s[0] <= s[1]]
    return shapes


@dataclass(frozen=True, eq=False)
class ShapeChoice:
    """The grid shape chosen, its best greedy placement and every shape's score.

    Attributes
    ----------
    shape : (int, int)
    grid : Grid
        The polished (and, for the evolutionary search, regrown) greedy
        placement on ``shape``.
    scores : dict
        ``(rows, cols) -> {"buddy_pairs": int, "mean_normalized_cost": float}``
        for every shape tried.
    """

    shape: tuple
    grid: Grid
    scores: dict = field(default_factory=dict)


def _free_shape(problem, seed, kfree):
    """Grid read off a greedy placement with room to grow any way (holes allowed)."""
    side = 2 * math.ceil(math.sqrt(problem.n)) + 2
    gt, _ = problem.greedy(seed, (side, side), kfree)
    rows = np.flatnonzero((gt >= 0).any(axis=1))
    cols = np.flatnonzero((gt >= 0).any(axis=0))
    return int(rows[-1] - rows[0] + 1), int(cols[-1] - cols[0] + 1)


def shapes_to_try(problem, shape, seed, kfree, holes):
    """The grid shapes a search compares: the one given (and, with quarter
    turns, its transpose: the seed tile may sit turned), or every shape that
    holds the tiles, plus the free greedy box when ``holes`` allows it.
    Shapes the pins do not fit are left out."""
    n = problem.n
    quarter = bool(set(problem.orientations) & {1, 3, 5, 7})
    if shape is not None:
        rows, cols = shape
        if rows * cols < n:
            raise OptionError(f"grid {rows}x{cols} holds {rows * cols} tiles but there are {n}; give a larger --grid")
        shapes = [tuple(shape)]
        if quarter and rows != cols and not problem.pins.absolute:
            shapes.append((cols, rows))  # the seed may sit turned; turned back later
    else:
        shapes = candidate_shapes(n, transposes=True)
        if holes:
            # A free run can wander off and leave a box far larger than the
            # set: a grid with holes is only a candidate while at least
            # MIN_FILL of its cells hold a tile (sparser sets need --grid).
            free = _free_shape(problem, seed, kfree)
            if n <= free[0] * free[1] <= n / MIN_FILL and free not in shapes:
                shapes.append(free)
    fitting = [s for s in shapes if problem.pins.fits(s)]
    if not fitting:
        r, c = problem.pins.span()
        raise OptionError(f"pinned tiles span {r}x{c} cells, more than any grid tried "
                          f"({', '.join(f'{a}x{b}' for a, b in shapes)}); give --grid")
    return fitting


def choose_shape(problem, seed, *, settings, shape=None, holes=False, regrow_contenders=False, deadline=None,
                 progress=None):
    """Grow a greedy placement on each shape to try and keep the best.

    A wrong shape forces seams the tiles do not want: the right one keeps the
    most best-buddy pairs; among equals, the one with fewer cells, then the
    cheapest seams. Empty cells let a free greedy run dodge seams a full
    frame forces, so with ``regrow_contenders`` the close contenders (within
    nine tenths of the most best-buddy seams) are first mended by segment
    regrowth, and a grid with holes must keep :data:`HOLES_MARGIN` times the
    best-buddy seams of a full one before it wins.

    Parameters
    ----------
    problem : stitch.search.problem.Problem
    seed : int
        Tile the greedy placements grow from.
    settings : SearchSettings
    shape : (int, int), optional
        The grid given by the user; inferred when None.
    holes : bool
        Also consider the box of a free greedy placement (tiles missing).
    regrow_contenders : bool
    deadline : float, optional
    progress : callable, optional

    Returns
    -------
    ShapeChoice
    """
    n = problem.n
    shapes = shapes_to_try(problem, shape, seed, settings.candidates_free, holes)

    def tick():
        if progress is not None:
            progress("search", 0, 1, "comparing grid shapes")

    grids = {}
    for s in shapes:
        if progress is not None:
            progress("search", 0, 1, f"trying a {s[0]}x{s[1]} grid")
        grid = problem.greedy(seed, s, settings.candidates_free)
        problem.polish(grid, settings.polish_passes)
        grids[s] = grid
    buddies = {s: problem.buddy_seams(g) for s, g in grids.items()}
    if regrow_contenders and len(shapes) > 1:
        top = max(buddies.values())
        for s in shapes:
            if buddies[s] >= 0.9 * top:
                grids[s], _ = regrow(problem, grids[s], settings, deadline, rounds=3, tick=tick)
                buddies[s] = problem.buddy_seams(grids[s])
    scores = {}
    best, best_key = None, None
    for s, grid in grids.items():
        b = buddies[s]
        key = (-(b if s[0] * s[1] == n else b / HOLES_MARGIN), s[0] * s[1], problem.normalized_cost(grid))
        scores[s] = {"buddy_pairs": b, "mean_normalized_cost": key[2]}
        log.debug("shape %dx%d: %d best-buddy seams, mean normalised cost %.4f", s[0], s[1], b, key[2])
        if best_key is None or key < best_key:
            best, best_key = s, key
    return ShapeChoice(best, grids[best], scores)
