"""One placement problem: the seam table laid out for the kernels, the allowed
orientations and the pins, with the operations the strategies are built from."""

from __future__ import annotations

import itertools

import numpy as np

from ..orientation import FACE
from . import _grow, _lookup, _polish
from ._lookup import SeamLookup, SideRanking
from .types import Grid, Pins, canvas_layout

__all__ = ["Problem", "grid_seams"]

#: Every arrangement of six cells, for the window local search.
PERMS6 = np.array(list(itertools.permutations(range(6))), dtype=np.int64)


def seam_lookup(table):
    """A :class:`~stitch.search._lookup.SeamLookup` of a seam table, laid out
    as the kernels read it (contiguous, fixed dtypes)."""
    blocks = table.blocks if table.dense else np.zeros((1, 1, 1), np.float32)
    return SeamLookup(
        blocks=np.ascontiguousarray(blocks, dtype=np.float32),
        block_index=np.ascontiguousarray(table.block_index, dtype=np.int64),
        transposed=np.ascontiguousarray(table.transposed, dtype=np.bool_),
        candidates=np.ascontiguousarray(table.candidates, dtype=np.int64),
        candidate_costs=np.ascontiguousarray(table.candidate_costs, dtype=np.float32),
        fallback=np.ascontiguousarray(table.fallback, dtype=np.float32),
        dense=bool(table.dense),
        hole=np.ascontiguousarray(np.zeros(4 * table.n_tiles) if table.hole_costs is None else table.hole_costs,
                                  dtype=np.float32),
    )


def side_ranking(table):
    """A :class:`~stitch.search._lookup.SideRanking` of a seam table."""
    return SideRanking(second=np.ascontiguousarray(table.second, dtype=np.float64),
                       best_buddies=np.ascontiguousarray(table.best_buddies, dtype=np.int64))


def grid_seams(grid):
    """The seams of a grid, to the right then below, as ``(ok, slot_a, slot_b,
    flip)`` arrays shaped like those seams; ``ok`` is False where a hole
    meets (the slots there are meaningless)."""
    gt, go = grid
    for d, sl_a, sl_b in ((1, np.s_[:, :-1], np.s_[:, 1:]), (2, np.s_[:-1, :], np.s_[1:, :])):
        a_t, a_o, b_t, b_o = gt[sl_a], go[sl_a], gt[sl_b], go[sl_b]
        ok = (a_t >= 0) & (b_t >= 0)
        sa = np.where(ok, 4 * a_t + FACE[a_o, d], 0)
        sb = np.where(ok, 4 * b_t + FACE[b_o, (d + 2) % 4], 0)
        yield ok, sa, sb, (a_o >= 4) != (b_o >= 4)


class Problem:
    """The arrays the kernels need, gathered once, and the moves made of them.

    Parameters
    ----------
    table : stitch.seams.SeamTable
    orientations : sequence of int
        Allowed orientation codes.
    pins : Pins, optional
        Tiles that never move.
    """

    def __init__(self, table, orientations, pins=Pins()):
        self.n = table.n_tiles
        self.table = table
        self.lookup = seam_lookup(table)
        self.ranking = side_ranking(table)
        self.allowed = np.zeros(8, np.bool_)
        self.allowed[list(orientations)] = True
        self.orientations = tuple(orientations)
        self.pins = pins
        self.fixed = np.zeros(self.n, np.bool_)
        self.fixed[list(pins.tiles)] = True
        self._no_parent = np.full(4 * self.n, -1, np.int64)
        live = table.second[(table.second > 0) & ~table.dead]
        #: A typical cost of a plausible seam: the search objective rewards
        #: each seam by it, so grids with holes do not scatter them to drop seams.
        self.bonus = float(np.median(live)) if live.size else 0.0

    # -- growing placements ------------------------------------------------

    def greedy(self, seed, shape, kfree):
        """Greedy placement on a ``shape`` grid grown from tile ``seed`` (or the pins)."""
        return Grid(*_grow.greedy(seed, 0, shape[0], shape[1], self.lookup, self.ranking, self.allowed, kfree,
                                  self.pins.on_canvas(shape)))

    def crossover(self, pa, pb, seed, seed_o, shape, mutation, rseed):
        """A child of two parents given by their partner codes (:meth:`partners`)."""
        return Grid(*_grow.crossover(pa, pb, seed, seed_o, shape[0], shape[1], self.lookup, self.ranking,
                                     self.allowed, mutation, rseed, self.pins.on_canvas(shape)))

    def random(self, shape, rng):
        """A random placement respecting pins and grid size (crossover of nothing)."""
        seed = int(rng.integers(self.n))
        return self.crossover(self._no_parent, self._no_parent, seed, self.orientations[0], shape, 1.0,
                              int(rng.integers(2**31 - 1)))

    def regrow(self, grid, cells, kfree):
        """Keep the tiles in ``cells`` (flat cell indices) and the pins where
        they are, with their orientations; place the rest greedily."""
        gt, go = grid
        rows, cols = gt.shape
        keep = np.zeros(rows * cols, bool)
        keep[cells] = True
        keep |= np.isin(gt.ravel(), np.asarray(self.pins.tiles, np.int64))
        keep &= gt.ravel() >= 0
        r, c = np.divmod(np.flatnonzero(keep), cols)
        layout = canvas_layout(gt.ravel()[keep], r, c, go.ravel()[keep], (rows, cols),
                               absolute=self.pins.absolute, origin=(r.min(), c.min()))
        return Grid(*_grow.greedy(0, 0, rows, cols, self.lookup, self.ranking, self.allowed, kfree, layout))

    # -- local search ------------------------------------------------------

    def swap_pass(self, grid, passes):
        """Swaps and turns in place while they lower the cost (at most
        ``passes`` passes); returns the number of moves."""
        gt, go = grid
        return _polish.improve(gt, go, self.lookup, self.allowed, self.fixed, passes, 4)

    def window_pass(self, grid):
        """Every arrangement of each 2 x 3 and 3 x 2 window, in place; returns
        the number of windows rearranged."""
        gt, go = grid
        changed = 0
        for h, w in ((2, 3), (3, 2)):
            if gt.shape[0] >= h and gt.shape[1] >= w:
                changed += _polish.permute_windows(gt, go, h, w, PERMS6, self.lookup, self.fixed,
                                                   self.ranking.best_buddies)
        return changed

    def polish(self, grid, passes, windows=0):
        """Local search in place: swaps and turns, then up to ``windows`` rounds
        of window permutations (each followed by swaps and turns again)."""
        moves = self.swap_pass(grid, passes)
        for _ in range(int(windows)):
            changed = self.window_pass(grid)
            if not changed:
                break
            moves += changed + self.swap_pass(grid, passes)
        return moves

    # -- judging placements ------------------------------------------------

    def partners(self, grid):
        """Partner code of every side slot in a grid (see :func:`stitch.search._lookup.partners`)."""
        return _lookup.partners(grid[0], grid[1], self.n)

    def buddy_seams(self, grid):
        """Number of best-buddy pairs a grid realises."""
        p = self.partners(grid)
        return int(np.sum((p >= 0) & (p == self.ranking.best_buddies)))

    def costs(self, grid):
        """Search objective and plain total seam cost (see :func:`stitch.search._lookup.fitness`)."""
        objective, total = _lookup.fitness(grid[0], grid[1], self.lookup, self.bonus)
        return float(objective), float(total)

    def costs_of(self, grids):
        """:meth:`costs` of several grids, as two arrays."""
        return np.array([self.costs(g) for g in grids], float).reshape(-1, 2).T

    def fitness(self, grid):
        """Search objective."""
        return self.costs(grid)[0]

    def total_cost(self, grid):
        """Plain total seam cost."""
        return self.costs(grid)[1]

    def normalized_cost(self, grid):
        """Mean of cost / second-best over the seams (comparable across shapes)."""
        total, count = 0.0, 0
        second = self.ranking.second
        for ok, sa, sb, flip in grid_seams(grid):
            if not ok.any():
                continue
            sa, sb = sa[ok], sb[ok]
            c = self.table.cost(sa, sb, flip[ok].astype(int))
            sec = np.maximum(np.minimum(second[sa], second[sb]), 1e-12)
            total += float(np.sum(np.minimum(c / sec, 10.0)))
            count += int(ok.sum())
        return total / count if count else 0.0

    def seed_ranking(self):
        """Tiles ordered by how distinctive they are: best-buddy sides, then margin."""
        n = self.n
        has_bb = (self.ranking.best_buddies >= 0).reshape(n, 4).sum(axis=1)
        best = self.table.candidate_costs[:, 0].reshape(n, 4)
        sec = self.table.second.reshape(n, 4)
        with np.errstate(divide="ignore", invalid="ignore"):
            margin = np.where(sec > 0, 1 - best / sec, 0)
        margin = np.nan_to_num(margin, nan=0.0, posinf=0.0, neginf=0.0).mean(axis=1)
        return np.lexsort((-margin, -has_bb))
