"""The search stage's value types: settings, pins, a grid, the result."""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field
from typing import NamedTuple

import numpy as np

from ..errors import OptionError
from ._grow import PinnedLayout

__all__ = ["Grid", "Pins", "SearchResult", "SearchSettings", "canvas_layout", "past"]


class Grid(NamedTuple):
    """A placement as the search works on it: two ``(rows, cols)`` int64 arrays.

    Attributes
    ----------
    tiles : ndarray
        Tile index per cell, -1 for a hole.
    orientations : ndarray
        Orientation code per cell (:mod:`stitch.orientation`).
    """

    tiles: np.ndarray
    orientations: np.ndarray

    def copy(self):
        return Grid(self.tiles.copy(), self.orientations.copy())


@dataclass(frozen=True)
class SearchSettings:
    """Tuning of the placement search; every field has a working default.

    Attributes
    ----------
    strategy : {"evolution", "greedy"}
        Or the name of a search installed by a plugin.
    population : int
        Placements per generation; 0 picks by tile count.
    generations : int
        Upper bound on generations; 0 picks by tile count.
    patience : int
        Stop after this many generations without a better best placement.
    time_limit : float or None
        Seconds for the whole search (grid inference, first population and
        generations); None for no limit. The best placement so far is
        returned when it runs out.
    elite : int
        Best placements copied unchanged into the next generation.
    mutation : float
        Chance that a crossover's free choice takes a random tile.
    greedy_share : float
        Share of the first population grown greedily (rest random).
    candidates_free : int
        Free candidates the greedy step scores per neighbour side.
    polish : int
        Children per generation polished by swap-and-turn local search.
    polish_passes : int
        Passes of that local search.
    regrow : bool
        Segment regrowth: keep the largest trusted segment of the best
        placement where it is and place the other tiles around it again,
        keeping the result when it is cheaper.
    """

    strategy: str = "evolution"
    population: int = 0
    generations: int = 0
    patience: int = 12
    time_limit: float | None = None
    elite: int = 4
    mutation: float = 0.005
    greedy_share: float = 0.5
    candidates_free: int = 3
    polish: int = 3
    polish_passes: int = 3
    regrow: bool = True

    def __post_init__(self):
        if self.population < 0 or self.generations < 0 or self.patience < 1:
            raise OptionError("population and generations must be >= 0 and patience >= 1")
        if self.time_limit is not None and not (math.isfinite(self.time_limit) and self.time_limit > 0):
            raise OptionError(f"--time-limit must be a positive number of seconds, not {self.time_limit}")

    def deadline(self):
        """``time.perf_counter()`` value at which the time limit runs out, or None."""
        return None if self.time_limit is None else time.perf_counter() + self.time_limit


def past(deadline, share=1.0, start=None):
    """Has ``share`` of the time from ``start`` to ``deadline`` gone by?

    Always False without a deadline; with no ``start``, whether the deadline
    itself has passed.
    """
    if deadline is None:
        return False
    now = time.perf_counter()
    if start is None:
        return now > deadline
    return now > start + share * (deadline - start)


@dataclass(frozen=True)
class Pins:
    """Tiles whose cell is known; they never move.

    Attributes
    ----------
    tiles : tuple of int
        Tile indices.
    rows, cols : tuple of int
        Grid cells when ``absolute``, else offsets from the first pin (tiles
        that kept georeferencing know where they lie relative to each other,
        not in which cell of a grid not yet known).
    absolute : bool
    """

    tiles: tuple = ()
    rows: tuple = ()
    cols: tuple = ()
    absolute: bool = False

    def __bool__(self):
        return len(self.tiles) > 0

    def span(self):
        """Rows and columns the pins cover (absolute: from cell 0)."""
        if not self:
            return 0, 0
        if self.absolute:
            return max(self.rows) + 1, max(self.cols) + 1
        return max(self.rows) - min(self.rows) + 1, max(self.cols) - min(self.cols) + 1

    def fits(self, shape):
        r, c = self.span()
        return r <= shape[0] and c <= shape[1]

    def on_canvas(self, shape):
        """The pins as a :class:`~stitch.search._grow.PinnedLayout` on the
        growth canvas of a ``shape`` grid.

        Pinned tiles sit upright (their georeferencing fixes the frame).
        """
        t = np.asarray(self.tiles, np.int64)
        upright = np.zeros(len(t), np.int64)
        if not self:
            return PinnedLayout(t, t.copy(), t.copy(), np.array([-1, -1], np.int64), upright)
        rows, cols = np.asarray(self.rows, np.int64), np.asarray(self.cols, np.int64)
        return canvas_layout(t, rows, cols, upright, shape, absolute=self.absolute,
                             origin=None if self.absolute else (self.rows[0], self.cols[0]))


def canvas_layout(tiles, rows, cols, orientations, shape, *, absolute, origin=None):
    """Tiles held at grid cells, as a :class:`~stitch.search._grow.PinnedLayout`.

    With ``absolute`` the cells are those of the final grid: the frame is
    fixed (canvas cell (1, 1) is grid cell (0, 0)). Otherwise they are
    offsets: the cell ``origin`` goes to the canvas centre and the block may
    end up anywhere in the grid.
    """
    if absolute:
        return PinnedLayout(tiles, 1 + rows, 1 + cols, np.array([1, 1], np.int64), orientations)
    return PinnedLayout(tiles, rows - origin[0] + shape[0], cols - origin[1] + shape[1],
                        np.array([-1, -1], np.int64), orientations)


@dataclass(frozen=True, eq=False)
class SearchResult:
    """Outcome of a placement search.

    Attributes
    ----------
    tiles, orientations : ndarray, shape (rows, cols)
        Tile index per cell (-1 for a hole) and orientation codes.
    cost : float
        Total seam cost of the best placement.
    best_history, mean_history : tuple of float
        Total seam cost of the best placement and mean over the population,
        per generation (empty for greedy).
    generations : int
    strategy : str
    shape_scores : dict
        Per tried shape, the best-buddy seams and mean normalised seam cost
        of its greedy placement.
    agreement : ndarray, shape (4 * n_tiles,)
        Share of the final elite holding the best placement's seam on each
        side slot (1 for greedy); feeds tile confidence.
    shape_evidence : dict or None
        For an inferred grid, what the inference rests on
        (:meth:`stitch.search.shapes.ShapeChoice.evidence`): runner-up shape,
        margin, whether it is thin, the largest trusted segment.
    """

    tiles: np.ndarray
    orientations: np.ndarray
    cost: float
    best_history: tuple = ()
    mean_history: tuple = ()
    generations: int = 0
    strategy: str = "greedy"
    shape_scores: dict = field(default_factory=dict)
    agreement: np.ndarray | None = None
    shape_evidence: dict | None = None

    @property
    def shape(self):
        return self.tiles.shape
