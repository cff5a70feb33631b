"""Segment regrowth: keep a trusted segment of a placement, place the rest again.

Swaps of single tiles cannot move a whole misplaced block (each swap on the
way breaks good seams). Cutting the placement into segments joined by
best-buddy seams, keeping one where it is and growing every other tile
around it again does.
"""

from __future__ import annotations

import numpy as np

from .types import past

__all__ = ["regrow", "segments"]


def segments(problem, grid, loops=True):
    """Cells of a grid in segments, largest first.

    Two cells join when their seam is a best-buddy seam and, with ``loops``,
    lies in a 2 x 2 square whose four seams are all best buddies: a lone
    best-buddy seam between two wrong segments happens, a closed loop of them
    rarely (the loop constraint of Son, Hays & Cooper, ECCV 2014).

    Returns
    -------
    list of ndarray
        Flat cell indices of each segment (holes left out).
    """
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    from .problem import grid_seams

    gt = grid[0]
    rows, cols = gt.shape
    bb = problem.ranking.best_buddies
    # h: (rows, cols-1) seams to the right; v: (rows-1, cols) seams below
    h, v = (ok & (bb[sa] == 2 * sb + flip) for ok, sa, sb, flip in grid_seams(grid))
    if loops:
        square = h[:-1, :] & h[1:, :] & v[:, :-1] & v[:, 1:]  # (rows-1, cols-1)
        h_ok = np.zeros_like(h)
        v_ok = np.zeros_like(v)
        h_ok[:-1, :] |= square
        h_ok[1:, :] |= square
        v_ok[:, :-1] |= square
        v_ok[:, 1:] |= square
    else:
        h_ok, v_ok = h, v
    cell = np.arange(rows * cols).reshape(rows, cols)
    src = np.concatenate([cell[:, :-1][h_ok], cell[:-1, :][v_ok]])
    dst = np.concatenate([cell[:, 1:][h_ok], cell[1:, :][v_ok]])
    graph = coo_matrix((np.ones(len(src)), (src, dst)), shape=(rows * cols, rows * cols))
    _, label = connected_components(graph, directed=False)
    label = np.where(gt.ravel() >= 0, label, -1)
    sizes = np.bincount(label[label >= 0])
    order = np.argsort(-sizes, kind="stable")
    return [np.flatnonzero(label == k) for k in order if sizes[k] > 0]


def _candidates(problem, grid, top, placed):
    """The ``top`` largest segments with the loop constraint, then without it,
    each once; single tiles and segments holding every tile are left out."""
    out, seen = [], set()
    for loops in (True, False):
        for cells in segments(problem, grid, loops)[:top]:
            key = (len(cells), int(cells[0]))
            if 2 <= len(cells) < placed and key not in seen:
                seen.add(key)
                out.append(cells)
    return out


def regrow(problem, grid, settings, deadline, rounds=20, top=3, tick=None, pool=None):
    """Segment regrowth, repeated while it pays.

    The placement is cut into segments of trusted seams (:func:`segments`,
    with and without the loop constraint); for the largest few, that segment
    stays where it is and every other tile is placed around it again
    greedily, then polished. The first cheaper result, in candidate order, is
    kept and cut again.

    Parameters
    ----------
    problem : stitch.search.problem.Problem
    grid : Grid
    settings : SearchSettings
    deadline : float or None
        ``time.perf_counter()`` value after which no attempt starts.
    rounds, top : int
        Most rounds, and segments tried per round (each with and without
        loops).
    tick : callable, optional
        Called once per attempt (progress).
    pool : concurrent.futures.Executor, optional
        Runs the attempts of a round side by side; the result is the same, as
        the first cheaper one in candidate order still wins.

    Returns
    -------
    (Grid, float)
        The placement and its search objective.
    """
    cost = problem.fitness(grid)
    placed = int(np.sum(grid[0] >= 0))

    def attempt(job):
        base, cells = job
        if past(deadline):
            return None
        g = problem.regrow(base, cells, settings.candidates_free)
        if int(np.sum(g[0] >= 0)) < placed:  # the frame left no room for every tile
            return g, np.inf
        problem.polish(g, settings.polish_passes)
        return g, problem.fitness(g)

    for _ in range(rounds):
        jobs = [(grid, cells) for cells in _candidates(problem, grid, top, placed)]
        # Executor.map cancels the attempts not yet started when the loop breaks.
        for out in (pool.map if pool is not None else map)(attempt, jobs):
            if tick is not None:
                tick()
            if out is None:  # time is up
                return grid, cost
            if out[1] < cost - 1e-9 * max(1.0, abs(cost)):
                grid, cost = out
                break
        else:
            break  # no segment helped
    return grid, cost
