"""Search for the placement with the lowest total seam cost.

Two strategies are built in:

``greedy``
    Greedy best-buddy placement (Paikin & Tal, CVPR 2015) from the most
    distinctive tile.
``evolution``
    A genetic algorithm over whole placements whose crossover keeps the
    segments both parents agree on (Sholomon, David & Netanyahu, CVPR 2013),
    with its first population grown greedily from different seed tiles.

Both return a :class:`SearchResult`. The grid shape may be given or inferred:
every factorisation ``rows x cols`` of the tile count is tried greedily and the
one with the lowest mean normalised seam cost wins.

The compiled loops live in :mod:`stitch._kernels`; this module only drives
them, with every random choice drawn from one :class:`numpy.random.Generator`.
"""

from __future__ import annotations

import itertools
import logging
import math
import os
import time
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field

import numpy as np

from . import _kernels as K
from .errors import OptionError
from .plugins import Registry

__all__ = [
    "SearchResult",
    "Pins",
    "SearchSettings",
    "available_searches",
    "candidate_shapes",
    "get_search",
    "search_placement",
    "side_confidence",
    "tile_confidence",
]

log = logging.getLogger(__name__)



@dataclass(frozen=True)
class SearchSettings:
    """Tuning of the placement search; every field has a working default.

    Attributes
    ----------
    strategy : {"evolution", "greedy"}
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
        if self.time_limit is not None and self.time_limit <= 0:
            raise OptionError(f"time limit must be positive seconds, not {self.time_limit}")


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

    @property
    def shape(self):
        return self.tiles.shape


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


#: Most rounds of window permutations when polishing to the end, and for
#: each new best placement during the generations.
_WINDOW_ROUNDS = 50
_NEW_BEST_WINDOW_ROUNDS = 1

#: Every arrangement of six cells, for the window local search.
_PERMS6 = np.array(list(itertools.permutations(range(6))), dtype=np.int64)


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
        """``(tiles, canvas_rows, canvas_cols, box, orientations)`` for the kernels.

        Pinned tiles sit upright (their georeferencing fixes the frame).
        """
        rows, cols = shape
        t = np.asarray(self.tiles, np.int64)
        upright = np.zeros(len(t), np.int64)
        if not self:
            return (t, t.copy(), t.copy(), np.array([-1, -1], np.int64), upright)
        if self.absolute:
            return (t, 1 + np.asarray(self.rows, np.int64), 1 + np.asarray(self.cols, np.int64),
                    np.array([1, 1], np.int64), upright)
        r = np.asarray(self.rows, np.int64) - self.rows[0] + rows
        c = np.asarray(self.cols, np.int64) - self.cols[0] + cols
        return (t, r, c, np.array([-1, -1], np.int64), upright)


def _grid_seams(grid):
    """The seams of a grid, to the right then below, as ``(ok, slot_a, slot_b,
    flip)`` arrays shaped like those seams; ``ok`` is False where a hole
    meets (the slots there are meaningless)."""
    gt, go = grid
    for d, sl_a, sl_b in ((1, np.s_[:, :-1], np.s_[:, 1:]), (2, np.s_[:-1, :], np.s_[1:, :])):
        a_t, a_o, b_t, b_o = gt[sl_a], go[sl_a], gt[sl_b], go[sl_b]
        ok = (a_t >= 0) & (b_t >= 0)
        sa = np.where(ok, 4 * a_t + K.FACE[a_o, d], 0)
        sb = np.where(ok, 4 * b_t + K.FACE[b_o, (d + 2) % 4], 0)
        yield ok, sa, sb, (a_o >= 4) != (b_o >= 4)


class _Problem:
    """Arrays the kernels need, gathered once."""

    def __init__(self, table, orientations, pins=Pins()):
        self.n = table.n_tiles
        self.cand = np.ascontiguousarray(table.candidates, dtype=np.int64)
        blocks = table.blocks if table.dense else np.zeros((1, 1, 1), np.float32)
        self.tab = (
            np.ascontiguousarray(blocks, dtype=np.float32),
            np.ascontiguousarray(table.block_index, dtype=np.int64),
            np.ascontiguousarray(table.transposed, dtype=np.bool_),
            self.cand,
            np.ascontiguousarray(table.candidate_costs, dtype=np.float32),
            np.ascontiguousarray(table.fallback, dtype=np.float32),
            bool(table.dense),
        )
        self.second = np.ascontiguousarray(table.second, dtype=np.float64)
        self.bb = np.ascontiguousarray(table.best_buddies, dtype=np.int64)
        self.allowed = np.zeros(8, np.bool_)
        self.allowed[list(orientations)] = True
        self.orientations = tuple(orientations)
        self.table = table
        self.pins = pins
        self.fixed = np.zeros(self.n, np.bool_)
        self.fixed[list(pins.tiles)] = True
        self._no_parent = np.full(4 * self.n, -1, np.int64)
        live = table.second[(table.second > 0) & ~table.dead]
        self.bonus = float(np.median(live)) if live.size else 0.0

    def greedy(self, seed, shape, kfree):
        return K.greedy(seed, 0, shape[0], shape[1], self.n, self.tab, self.cand, self.second, self.bb,
                        self.allowed, kfree, self.pins.on_canvas(shape))

    def crossover(self, pa, pb, seed, seed_o, shape, mutation, rseed):
        return K.crossover(pa, pb, seed, seed_o, shape[0], shape[1], self.n, self.tab, self.cand, self.bb,
                           self.allowed, mutation, rseed, self.pins.on_canvas(shape))

    def random(self, shape, rng):
        """A random placement respecting pins and grid size (crossover of nothing)."""
        seed = int(rng.integers(self.n))
        return self.crossover(self._no_parent, self._no_parent, seed, self.orientations[0], shape, 1.0,
                              int(rng.integers(2**31 - 1)))

    def polish(self, grid, passes, windows=0):
        """Local search in place: swaps and turns, then up to ``windows`` rounds
        of window permutations (each followed by swaps and turns again)."""
        moves = K.improve(grid[0], grid[1], self.n, self.tab, self.cand, self.allowed, self.fixed, passes, 4)
        for _ in range(int(windows)):
            changed = 0
            for h, w in ((2, 3), (3, 2)):
                if grid[0].shape[0] >= h and grid[0].shape[1] >= w:
                    changed += K.permute_windows(grid[0], grid[1], h, w, _PERMS6, self.tab, self.fixed, self.bb)
            if not changed:
                break
            moves += changed + K.improve(grid[0], grid[1], self.n, self.tab, self.cand, self.allowed, self.fixed,
                                         passes, 4)
        return moves

    def segments(self, grid, loops=True):
        """Cells of a grid in segments, largest first.

        Two cells join when their seam is a best-buddy seam and, with
        ``loops``, lies in a 2 x 2 square whose four seams are all best
        buddies: a lone best-buddy seam between two wrong segments happens, a
        closed loop of them rarely (the loop constraint of Son, Hays & Cooper,
        ECCV 2014). Returns a list of arrays of flat cell indices (holes left
        out).
        """
        from scipy.sparse import coo_matrix
        from scipy.sparse.csgraph import connected_components

        gt = grid[0]
        rows, cols = gt.shape
        # h: (rows, cols-1) seams to the right; v: (rows-1, cols) seams below
        h, v = (ok & (self.bb[sa] == 2 * sb + flip) for ok, sa, sb, flip in _grid_seams(grid))
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

    def regrow(self, grid, cells, kfree):
        """Keep the tiles in ``cells`` (and the pins) where they are; place the rest greedily."""
        gt, go = grid
        rows, cols = gt.shape
        keep = np.zeros(rows * cols, bool)
        keep[cells] = True
        keep |= np.isin(gt.ravel(), np.asarray(self.pins.tiles, np.int64))
        keep &= gt.ravel() >= 0
        r, c = np.divmod(np.flatnonzero(keep), cols)
        t = gt.ravel()[keep]
        o = go.ravel()[keep]
        if self.pins.absolute:
            pins = (t, 1 + r, 1 + c, np.array([1, 1], np.int64), o)
        else:
            pins = (t, r - r.min() + rows, c - c.min() + cols, np.array([-1, -1], np.int64), o)
        return K.greedy(0, 0, rows, cols, self.n, self.tab, self.cand, self.second, self.bb, self.allowed, kfree,
                        pins)

    def partners(self, grid):
        """Partner code of every side slot in a grid (see :func:`stitch._kernels.partners`)."""
        return K.partners(grid[0], grid[1], self.n)

    def buddy_seams(self, grid):
        """Number of best-buddy pairs a grid realises."""
        p = self.partners(grid)
        return int(np.sum((p >= 0) & (p == self.bb)))

    def costs(self, grid):
        """Search objective and plain total seam cost (see :func:`stitch._kernels.fitness`)."""
        objective, total = K.fitness(grid[0], grid[1], self.tab, self.bonus)
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
        for ok, sa, sb, flip in _grid_seams(grid):
            if not ok.any():
                continue
            sa, sb = sa[ok], sb[ok]
            c = self.table.cost(sa, sb, flip[ok].astype(int))
            sec = np.maximum(np.minimum(self.second[sa], self.second[sb]), 1e-12)
            total += float(np.sum(np.minimum(c / sec, 10.0)))
            count += int(ok.sum())
        return total / count if count else 0.0


def _seed_ranking(problem):
    """Tiles ordered by how distinctive they are: best-buddy sides, then margin."""
    n = problem.n
    has_bb = (problem.bb >= 0).reshape(n, 4).sum(axis=1)
    best = problem.table.candidate_costs[:, 0].reshape(n, 4)
    sec = problem.table.second.reshape(n, 4)
    with np.errstate(divide="ignore", invalid="ignore"):
        margin = np.where(sec > 0, 1 - best / sec, 0)
    margin = np.nan_to_num(margin, nan=0.0, posinf=0.0, neginf=0.0).mean(axis=1)
    return np.lexsort((-margin, -has_bb))


def _default_sizes(n):
    population = int(min(200, max(30, 8 * math.sqrt(n))))
    generations = int(min(300, 40 + n // 4))
    return population, generations


#: Smallest share of a hole-y grid's cells that tiles must fill for the grid
#: to be inferred (a few tiles missing, not a scatter).
_MIN_FILL = 0.8


def _free_shape(problem, seed, kfree):
    """Grid read off a greedy placement with room to grow any way (holes allowed)."""
    side = 2 * math.ceil(math.sqrt(problem.n)) + 2
    gt, _ = problem.greedy(seed, (side, side), kfree)
    rows = np.flatnonzero((gt >= 0).any(axis=1))
    cols = np.flatnonzero((gt >= 0).any(axis=0))
    return int(rows[-1] - rows[0] + 1), int(cols[-1] - cols[0] + 1)


def _shapes_to_try(problem, shape, orientations, seed, kfree, holes):
    n = problem.n
    quarter = bool(set(orientations) & {1, 3, 5, 7})
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
            # _MIN_FILL of its cells hold a tile (sparser sets need --grid).
            free = _free_shape(problem, seed, kfree)
            if n <= free[0] * free[1] <= n / _MIN_FILL and free not in shapes:
                shapes.append(free)
    fitting = [s for s in shapes if problem.pins.fits(s)]
    if not fitting:
        r, c = problem.pins.span()
        raise OptionError(f"pinned tiles span {r}x{c} cells, more than any grid tried "
                          f"({', '.join(f'{a}x{b}' for a, b in shapes)}); give --grid")
    return fitting


def search_placement(table, *, shape=None, orientations=(0,), settings=None, rng=None, progress=None, pins=None,
                     holes=False):
    """Find a low-cost placement of every tile of a seam table.

    Parameters
    ----------
    table : stitch.seams.SeamTable
    shape : (int, int), optional
        Grid rows and columns; inferred when None.
    orientations : tuple of int, optional
        Allowed orientation codes.
    settings : SearchSettings, optional
    rng : {numpy.random.Generator, int}, optional
        Source of every random choice.
    progress : callable, optional
        Called as ``progress("search", generation, max_generations, detail)``.
    pins : Pins, optional
        Tiles that never move.
    holes : bool, optional
        When inferring the grid, also consider grids with more cells than
        tiles (some tiles missing).

    Returns
    -------
    SearchResult
    """
    settings = settings or SearchSettings()
    strategy = get_search(settings.strategy)
    if strategy not in _BUILTIN_SEARCHES.values():
        return strategy(table, shape=shape, orientations=orientations, settings=settings,
                        rng=np.random.default_rng(rng), progress=progress, pins=pins or Pins())
    rng = np.random.default_rng(rng)
    deadline = None if settings.time_limit is None else time.perf_counter() + settings.time_limit
    problem = _Problem(table, orientations, pins or Pins())
    n = problem.n
    ranking = _seed_ranking(problem)
    seed0 = int(ranking[0])
    shapes = _shapes_to_try(problem, shape, orientations, seed0, settings.candidates_free, holes)

    # A wrong shape forces seams the tiles do not want: the right one keeps
    # the most best-buddy pairs; among equals, the one with fewer cells, then
    # the cheapest seams. Empty cells let a free greedy run dodge seams a full
    # frame forces, so the close contenders are first mended by segment
    # regrowth, and a grid with holes must then keep clearly more best-buddy
    # seams (5 %) than a full one before it wins.
    def tick():
        if progress is not None:
            progress("search", 0, 1, "comparing grid shapes")

    grids = {}
    for s in shapes:
        if progress is not None:
            progress("search", 0, 1, f"trying a {s[0]}x{s[1]} grid")
        grid = problem.greedy(seed0, s, settings.candidates_free)
        problem.polish(grid, settings.polish_passes)
        grids[s] = grid
    buddies = {s: problem.buddy_seams(g) for s, g in grids.items()}
    if settings.regrow and settings.strategy != "greedy" and len(shapes) > 1:
        top = max(buddies.values())
        for s in shapes:
            if buddies[s] >= 0.9 * top:
                grids[s], _ = _regrow(problem, grids[s], settings, deadline, rounds=3, tick=tick)
                buddies[s] = problem.buddy_seams(grids[s])
    shape_scores = {}
    best_shape, best_greedy, best_key = None, None, None
    for s, grid in grids.items():
        b = buddies[s]
        key = (-(b if s[0] * s[1] == n else b / 1.05), s[0] * s[1], problem.normalized_cost(grid))
        shape_scores[s] = {"buddy_pairs": b, "mean_normalized_cost": key[2]}
        log.debug("shape %dx%d: %d best-buddy seams, mean normalised cost %.4f", s[0], s[1], b, key[2])
        if best_key is None or key < best_key:
            best_shape, best_greedy, best_key = s, grid, key
    if settings.strategy == "greedy" or n < 3:
        return SearchResult(
            tiles=best_greedy[0], orientations=best_greedy[1], cost=problem.total_cost(best_greedy), strategy="greedy",
            shape_scores=shape_scores, agreement=np.ones(4 * n),
        )
    return _evolve(problem, best_shape, best_greedy, ranking, settings, rng, progress, shape_scores, deadline)


def _past(deadline, share=1.0, start=None):
    """Has ``share`` of the time from ``start`` to ``deadline`` gone by?"""
    if deadline is None:
        return False
    now = time.perf_counter()
    if start is None:
        return now > deadline
    return now > start + share * (deadline - start)


def _regrow(problem, grid, settings, deadline, rounds=20, top=3, tick=None, pool=None):
    """Segment regrowth, repeated while it pays.

    The best placement is cut into segments of trusted seams
    (:meth:`_Problem.segments`, with and without the loop constraint); for
    the largest few, that segment stays where it is and every other tile is
    placed around it again greedily, then polished. The first cheaper result,
    in candidate order, is kept and cut again. This moves whole misplaced
    segments, which swaps of single tiles cannot. With a thread ``pool`` the
    attempts of a round run side by side (same result, as the first cheaper
    one still wins). ``tick()``, when given, is called once per attempt.
    Returns ``(grid, fitness)``.
    """
    cost = problem.fitness(grid)
    placed = int(np.sum(grid[0] >= 0))

    def attempt(job):
        base, cells = job
        if _past(deadline):
            return None
        g = problem.regrow(base, cells, settings.candidates_free)
        if int(np.sum(g[0] >= 0)) < placed:  # the frame left no room for every tile
            return g, np.inf
        problem.polish(g, settings.polish_passes)
        return g, problem.fitness(g)

    for _ in range(rounds):
        jobs = [(grid, cells) for cells in _regrow_candidates(problem, grid, top, placed)]
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


def _regrow_candidates(problem, grid, top, placed):
    """The ``top`` largest segments with the loop constraint, then without it,
    each once; single tiles and segments holding every tile are left out."""
    out, seen = [], set()
    for loops in (True, False):
        for cells in problem.segments(grid, loops)[:top]:
            key = (len(cells), int(cells[0]))
            if 2 <= len(cells) < placed and key not in seen:
                seen.add(key)
                out.append(cells)
    return out


def _evolve(problem, shape, first, ranking, settings, rng, progress, shape_scores, deadline):
    n = problem.n
    pop_default, gen_default = _default_sizes(n)
    pop_size = settings.population or pop_default
    max_gen = settings.generations or gen_default
    elite = max(1, min(settings.elite, pop_size - 1))
    start = time.perf_counter()

    # First population: the best greedy placement, more greedy runs from other
    # seeds (polished by swaps and turns), then random placements; then the
    # first one gets segment regrowth and window permutations. Under a time
    # limit the extra greedy runs stop at a quarter of it, so large tile sets
    # still get generations.
    problem.polish(first, settings.polish_passes)
    population = [first]
    pool = ThreadPoolExecutor(max_workers=os.cpu_count() or 1)
    n_greedy = max(1, int(round(pop_size * settings.greedy_share)))
    seeds = [int(t) for t in ranking[1:]] if not problem.pins else []  # with pins every greedy run starts alike
    rng.shuffle(seeds)

    generation = 0

    def greedy_runs(count, share):
        out = []
        while seeds and len(out) < count and not _past(deadline, share, start):
            if progress is not None:
                progress("search", generation, max_gen, "growing placements")
            g = problem.greedy(seeds.pop(), shape, settings.candidates_free)
            problem.polish(g, settings.polish_passes)
            out.append(g)
        return out

    def tick():
        if progress is not None:
            progress("search", generation, max_gen, "regrowing segments")

    population += greedy_runs(n_greedy - 1, 0.25)
    if settings.regrow:
        population[0], _ = _regrow(problem, first, settings, deadline, tick=tick, pool=pool)
    if not _past(deadline, 0.5, start):
        problem.polish(population[0], settings.polish_passes, windows=_WINDOW_ROUNDS)
    while len(population) < pop_size:
        population.append(problem.random(shape, rng))
    # costs: the search objective; raws: plain total seam cost (for the history)
    costs, raws = problem.costs_of(population)
    parts = [problem.partners(g) for g in population]

    best_hist, mean_hist = [], []
    stale = 0
    best_cost = costs.min()

    while generation < max_gen:
        if deadline is not None and time.perf_counter() > deadline:
            log.info("time limit reached after %d generations", generation)
            break
        if stale >= settings.patience:
            # Converged. Without a time limit that is the end; with time left,
            # fresh greedy placements replace all but the elite and the
            # search goes on from there.
            fresh = greedy_runs(max(1, pop_size // 4), 1.0) if deadline is not None else []
            if not fresh:
                break
            log.info("generation %d: population refreshed with %d greedy placements", generation, len(fresh))
            keep = np.argsort(costs, kind="stable")[: pop_size - len(fresh)]
            population = [population[i] for i in keep] + fresh
            parts = [parts[i] for i in keep] + [problem.partners(g) for g in fresh]
            fresh_costs, fresh_raws = problem.costs_of(fresh)
            costs = np.concatenate([costs[keep], fresh_costs])
            raws = np.concatenate([raws[keep], fresh_raws])
            stale = 0
        order = np.argsort(costs, kind="stable")
        new_pop = [population[i] for i in order[:elite]]
        new_costs = [costs[i] for i in order[:elite]]
        new_raws = [raws[i] for i in order[:elite]]
        # Tournament selection of size 3.
        picks = rng.integers(0, pop_size, size=(pop_size - elite, 2, 3))
        winners = np.take_along_axis(picks, np.argmin(costs[picks], axis=2)[..., None], axis=2)[..., 0]
        starts = rng.integers(0, n, size=pop_size - elite)
        rseeds = rng.integers(0, 2**31 - 1, size=pop_size - elite)

        def breed(job):
            (ia, ib), seed, rs = job
            pa_t, pa_o = population[ia]
            at = np.flatnonzero(pa_t == seed)
            seed_o = int(pa_o.flat[at[0]]) if at.size else problem.orientations[0]
            child = problem.crossover(parts[ia], parts[ib], int(seed), seed_o, shape, settings.mutation, int(rs))
            return child, problem.costs(child)

        # Children depend only on their parents and their own seed, so running
        # them on both cores (the kernels release the GIL) changes no result.
        for child, (cost, raw) in pool.map(breed, zip(winners, starts, rseeds)):
            new_pop.append(child)
            new_costs.append(cost)
            new_raws.append(raw)
        # Memetic step: polish the most promising children with local search
        # (polishing all of them costs more than it gains).
        children = np.argsort(new_costs[elite:], kind="stable")[: settings.polish] + elite

        def polish(c):
            problem.polish(new_pop[c], settings.polish_passes)
            return c, problem.costs(new_pop[c])

        for c, (cost, raw) in pool.map(polish, children):
            new_costs[c], new_raws[c] = cost, raw
        # A new best placement gets segment regrowth and window permutations
        # (dearer than swaps, so kept for it); the result takes the place of
        # the worst child.
        top = int(np.argmin(new_costs))
        if new_costs[top] < best_cost and not _past(deadline):
            g = (new_pop[top][0].copy(), new_pop[top][1].copy())
            if settings.regrow:
                g, _ = _regrow(problem, g, settings, deadline, rounds=3, tick=tick, pool=pool)
            problem.polish(g, settings.polish_passes, windows=0 if _past(deadline) else _NEW_BEST_WINDOW_ROUNDS)
            c, r = problem.costs(g)
            if c < new_costs[top]:
                worst = elite + int(np.argmax(new_costs[elite:]))
                new_pop[worst], new_costs[worst], new_raws[worst] = g, c, r
        new_parts = [parts[i] for i in order[:elite]] + list(pool.map(problem.partners, new_pop[elite:]))
        population, parts, costs, raws = new_pop, new_parts, np.array(new_costs), np.array(new_raws)
        generation += 1
        gen_best = float(costs.min())
        best_hist.append(float(raws[int(np.argmin(costs))]))
        mean_hist.append(float(np.mean(raws)))
        if gen_best < best_cost - 1e-9 * max(1.0, abs(best_cost)):
            best_cost = gen_best
            stale = 0
        else:
            stale += 1
        if progress is not None:
            progress("search", generation, max_gen, f"best seam cost {best_hist[-1]:,.0f}")

    pool.shutdown()
    if progress is not None:  # stopped early: show the stage as done
        progress("search", generation, generation, f"best seam cost {best_hist[-1]:,.0f}" if best_hist else "")
    order = np.argsort(costs, kind="stable")
    best = population[order[0]]
    best_parts = parts[order[0]]
    top = [parts[i] for i in order[: max(elite, pop_size // 10)]]
    agreement = np.mean([p == best_parts for p in top], axis=0)
    log.info("evolution: %d generations, best cost %.1f", generation, costs[order[0]])
    return SearchResult(
        tiles=best[0], orientations=best[1], cost=float(raws[order[0]]),
        best_history=tuple(best_hist), mean_history=tuple(mean_hist), generations=generation,
        strategy="evolution", shape_scores=shape_scores, agreement=agreement,
    )


#: Entry-point group under which other packages register search strategies.
SEARCH_ENTRY_POINT_GROUP = "stitch.searches"

_BUILTIN_SEARCHES = {"evolution": search_placement, "greedy": search_placement}


_REGISTRY = Registry(SEARCH_ENTRY_POINT_GROUP, _BUILTIN_SEARCHES, "--search")


def available_searches():
    """Names of built-in and installed search strategies, sorted."""
    return _REGISTRY.names()


def get_search(name):
    """The search registered under ``name``.

    A plugin search is called as ``search(table, *, shape, orientations,
    settings, rng, progress, pins)`` and returns a :class:`SearchResult`.
    """
    return _REGISTRY.get(name)


def side_confidence(placement, table):
    """Seam confidence on each side of every tile as it sits in the mosaic.

    Returns
    -------
    ndarray, shape (n_tiles, 4)
        Columns: top, right, bottom, left in the mosaic; NaN at the border,
        next to a hole, or for unplaced tiles.
    """
    from .layout import STEPS, facing_side

    n = len(placement.names)
    out = np.full((n, 4), np.nan)
    grid, orient = placement.grid()
    rows, cols = placement.shape
    for i in np.flatnonzero(placement.placed):
        r, c, o = placement.rows[i], placement.cols[i], placement.orientations[i]
        for d, (dr, dc) in enumerate(STEPS):
            rr, cc = r + dr, c + dc
            if 0 <= rr < rows and 0 <= cc < cols and grid[rr, cc] >= 0:
                j, oj = grid[rr, cc], orient[rr, cc]
                sa = 4 * i + int(facing_side(o % 4, o >= 4, d))
                sb = 4 * j + int(facing_side(oj % 4, oj >= 4, (d + 2) % 4))
                out[i, d] = float(table.confidence(sa, sb, int((o >= 4) != (oj >= 4))))
    return out


def tile_confidence(placement, table, agreement=None):
    """Per-tile confidence in [0, 1] from the seams each tile makes.

    A seam scores the mean of three signs of a right join: the two sides are
    best buddies (Pomeranz, Shemesh & Ben-Shahar, CVPR 2011); its normalised
    confidence ``1 - cost / second best``; and the share of the final elite
    holding it (``agreement``). A tile scores the mean over its seams; a tile
    with no placed neighbour scores 0.

    Parameters
    ----------
    placement : stitch.layout.Placement
    table : stitch.seams.SeamTable
    agreement : ndarray, shape (4 * n_tiles,), optional

    Returns
    -------
    ndarray of float, shape (n_tiles,)
    """
    from .layout import seam_pairs

    n = len(placement.names)
    pairs = seam_pairs(placement)
    conf = np.zeros(n)
    if len(pairs) == 0:
        return conf
    sa, sb, flip = pairs.T
    is_bb = (table.best_buddies[sa] == 2 * sb + flip).astype(float)
    compat = table.confidence(sa, sb, flip)
    agree = np.ones(len(pairs)) if agreement is None else (agreement[sa] + agreement[sb]) / 2
    seam_conf = (is_bb + compat + agree) / 3
    tiles = np.concatenate([sa // 4, sb // 4])
    total = np.bincount(tiles, weights=np.concatenate([seam_conf, seam_conf]), minlength=n)
    count = np.bincount(tiles, minlength=n)
    np.divide(total, count, out=conf, where=count > 0)
    return conf
