"""The ``greedy`` strategy: one greedy best-buddy placement per grid shape.

After G. Paikin, A. Tal, *Solving multiple square jigsaw puzzles with missing
pieces*, CVPR 2015: from the most distinctive tile, the free cell whose best
tile fits best is filled next, best buddies first.
"""

from __future__ import annotations

import numpy as np

from .problem import Problem
from .shapes import choose_shape
from .types import Pins, SearchResult, SearchSettings

__all__ = ["greedy_result", "greedy_search"]


def greedy_result(problem, choice):
    """A :class:`SearchResult` holding the greedy placement of a :class:`ShapeChoice`."""
    grid = choice.grid
    return SearchResult(tiles=grid[0], orientations=grid[1], cost=problem.total_cost(grid), strategy="greedy",
                        shape_scores=choice.scores, agreement=np.ones(4 * problem.n),
                        shape_evidence=choice.evidence())


def greedy_search(table, *, shape=None, orientations=None, settings=None, rng=None, progress=None, pins=None,
                  holes=False):
    """Greedy placement, polished by swaps and turns; see :func:`stitch.search.search_placement`."""
    settings = settings or SearchSettings(strategy="greedy")
    deadline = settings.deadline()
    problem = Problem(table, table.orientations if orientations is None else orientations, pins or Pins())
    seed = int(problem.seed_ranking()[0])
    choice = choose_shape(problem, seed, settings=settings, shape=shape, holes=holes, deadline=deadline,
                          progress=progress)
    return greedy_result(problem, choice)
