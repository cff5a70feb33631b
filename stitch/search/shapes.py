"""Grid-shape inference: which ``rows x cols`` grid the tiles came from.

Every shape that holds the tiles is tried with one greedy placement (and, for
sets that may have missing tiles, the box a free greedy placement fills). A
wrong shape forces seams the tiles do not want, so the right one keeps the
most best-buddy seams. Sets with nodata are judged by the search objective
instead, which prices their empty cells (skipped all-nodata tiles).
"""

from __future__ import annotations

import logging
import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import OptionError
from ..orientation import FACE, STEPS
from .assembly import Segment
from .regrowth import regrow
from .types import Grid

__all__ = ["ShapeChoice", "candidate_shapes", "choose_shape"]

log = logging.getLogger(__name__)

#: Smallest share of its cells that tiles must fill in a grid with holes that
#: only a free greedy placement suggests (a few tiles missing, not a scatter).
MIN_FILL = 0.8

#: Smallest share in a grid with holes that a nodata collar (sides that hold
#: nodata) or a trusted segment's box vouches for: a collar of skipped
#: all-nodata tiles leaves up to 60 % of the cells empty.
MIN_FILL_SEGMENT = 0.4

#: A trusted segment suggests grids with holes around it only when it holds
#: at least this share of the tiles.
SEGMENT_SHARE = 0.25

#: Grids with holes compared besides the free greedy box: this many with the
#: fewest empty cells, and every one at most BOX_SLACK rows and columns
#: larger than the largest trusted segment's box.
MAX_HOLEY_SHAPES = 12
BOX_SLACK = 3

#: In a grid less than MIN_FILL full, at least this share of the tile sides
#: facing an empty cell must hold nodata (our choice, no source).
EXPLAINED_SHARE = 0.8

#: How many more best-buddy seams (as a factor) a grid with holes must keep
#: than a full one before it wins.
HOLES_MARGIN = 1.05

#: Without a nodata collar to explain them, every empty cell of a grid with
#: holes costs this share of a tile's worth of evidence (its best-buddy
#: seams are scaled by ``1 - HOLE_COST * empty / tiles``): a frame a column
#: wider lets one tile dodge a seam it does not like, and a few more
#: best-buddy seams must not buy a column of holes (our choice, no source).
HOLE_COST = 0.5

#: Below this margin over the runner-up the inferred grid is reported as
#: uncertain.
THIN_MARGIN = 0.03


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
    """The grid shape chosen, its best greedy placement and the evidence.

    Attributes
    ----------
    shape : (int, int)
    grid : Grid
        The polished (and, for the evolutionary search, regrown) greedy
        placement on ``shape``.
    scores : dict
        ``(rows, cols) -> {"buddy_pairs": int, "mean_normalized_cost": float}``
        for every shape tried.
    inferred : bool
        False when the shape was given.
    runner_up : (int, int) or None
        The best shape tried that is a real alternative (neither frame holds
        the other's placement; with quarter turns either way round).
    margin : float or None
        How much more evidence the chosen shape has than the runner-up: the
        relative difference of what ranks the shapes, named by
        :attr:`margin_of`.
    margin_of : str
        ``"best-buddy seams"`` (hole-discounted), or ``"search objective"``
        for sets with a nodata collar, whose empty cells the objective prices.
    segment : Segment or None
        The largest trusted segment (:func:`stitch.search.assembly.trusted_segments`),
        whose box every shape tried contains.
    """

    shape: tuple
    grid: Grid
    scores: dict = field(default_factory=dict)
    inferred: bool = False
    runner_up: tuple | None = None
    margin: float | None = None
    segment: Segment | None = None
    margin_of: str = "best-buddy seams"

    @property
    def thin(self):
        """Is the chosen shape only barely ahead of the runner-up?"""
        return self.margin is not None and self.margin < THIN_MARGIN

    def evidence(self):
        """What the inference rests on, as plain data (None for a given grid)."""
        if not self.inferred:
            return None
        seg = self.segment
        return {
            "source": "seams",
            "search_frame": list(self.shape),
            "runner_up": list(self.runner_up) if self.runner_up else None,
            "margin": None if self.margin is None else round(float(self.margin), 4),
            "margin_of": self.margin_of,
            "thin": self.thin,
            "trusted_segment": {"tiles": len(seg), "box": list(seg.box)} if seg is not None else None,
            "shapes_tried": len(self.scores),
        }


def _free_shape(problem, seed, kfree):
    """Grid read off a greedy placement with room to grow any way (holes allowed)."""
    side = 2 * math.ceil(math.sqrt(problem.n)) + 2
    return _placed_box(problem.greedy(seed, (side, side), kfree))


def quarter_turns(problem):
    """Does the problem allow tiles a quarter turn?"""
    return bool(set(problem.orientations) & {1, 3, 5, 7})


def _placed_box(grid):
    """Rows and columns a placement's tiles span."""
    rows = np.flatnonzero((grid[0] >= 0).any(axis=1))
    cols = np.flatnonzero((grid[0] >= 0).any(axis=0))
    return int(rows[-1] - rows[0] + 1), int(cols[-1] - cols[0] + 1)


def _explained_holes(problem, grid):
    """Share of the tile sides facing an empty cell inside the grid that hold
    some nodata (1 when no side faces one)."""
    gt, go = grid
    coverage = problem.table.coverage
    if coverage is None:
        return 0.0
    rows, cols = gt.shape
    facing, explained = 0, 0
    for d, (dr, dc) in enumerate(STEPS):
        r0, r1 = max(0, -dr), rows - max(0, dr)
        c0, c1 = max(0, -dc), cols - max(0, dc)
        here = gt[r0:r1, c0:c1]
        there = gt[r0 + dr:r1 + dr, c0 + dc:c1 + dc]
        hit = (here >= 0) & (there < 0)
        if hit.any():
            slots = 4 * here[hit] + FACE[go[r0:r1, c0:c1][hit], d]
            facing += int(hit.sum())
            explained += int(np.sum(coverage[slots] < 1))
    return explained / facing if facing else 1.0


def largest_segment(problem):
    """The largest trusted segment of a problem's seam table, or None."""
    from .assembly import trusted_segments

    segments = trusted_segments(problem.ranking.best_buddies, problem.orientations,
                                lambda seams: problem.table.confidence(seams[:, 0], seams[:, 1], seams[:, 2]))
    return segments[0] if segments else None


def _holds(frame, box, quarter):
    """Does a ``frame`` (rows, cols) hold a ``box``, turned a quarter if ``quarter``?"""
    return (box[0] <= frame[0] and box[1] <= frame[1]) or (quarter and box[1] <= frame[0] and box[0] <= frame[1])


def _holey_shapes(n, box, bound, quarter):
    """Grids with more cells than tiles, at most ``bound`` cells, that contain
    ``box``: the :data:`MAX_HOLEY_SHAPES` with the fewest empty cells (then
    the least elongated), and those at most :data:`BOX_SLACK` rows and
    columns larger than the box (the tiles a segment leaves out, such as
    collar tiles along its edge, extend it by a row or two on each side)."""
    out = [(r, c) for r in range(2, int(bound) + 1) for c in range(max(2, -(-(n + 1) // r)), int(bound // r) + 1)
           if _holds((r, c), box, quarter)]
    out.sort(key=lambda s: (s[0] * s[1], max(s) / min(s), s))
    boxes = [box, box[::-1]] if quarter else [box]

    def near(s):  # at most BOX_SLACK larger than the box, either way round
        return any(_holds(s, b, False) and _holds((b[0] + BOX_SLACK, b[1] + BOX_SLACK), s, False) for b in boxes)

    return out[:MAX_HOLEY_SHAPES] + [s for s in out[MAX_HOLEY_SHAPES:] if near(s)]


def shapes_to_try(problem, shape, seed, kfree, holes, segment=None):
    """The grid shapes a search compares.

    The one given (and, with quarter turns, its transpose: the seed tile may
    sit turned); or every shape that holds the tiles and contains the box of
    the largest trusted ``segment`` (a grid that cannot hold it is wrong).
    With ``holes``, also grids with empty cells: the box a free greedy
    placement fills (while tiles fill :data:`MIN_FILL` of it) and, when the
    segment holds :data:`SEGMENT_SHARE` of the tiles, the smallest grids
    around it (down to :data:`MIN_FILL_SEGMENT` full when its own box has
    that many empty cells). Shapes the pins do not fit are left out.
    """
    n = problem.n
    quarter = quarter_turns(problem)
    if shape is not None:
        rows, cols = shape
        if rows * cols < n:
            raise OptionError(f"grid {rows}x{cols} holds {rows * cols} tiles but there are {n}; give a larger --grid")
        shapes = [tuple(shape)]
        if quarter and rows != cols and not problem.pins.absolute:
            shapes.append((cols, rows))  # the seed may sit turned; turned back later
    else:
        box = segment.box if segment is not None else (1, 1)
        shapes = [s for s in candidate_shapes(n, transposes=True) if _holds(s, box, quarter)]
        if holes:
            # A free run can wander off and leave a box far larger than the
            # set: it is only a candidate while at least MIN_FILL of its
            # cells hold a tile (sparser sets need --grid or a segment).
            # Sides that hold nodata (a collar) explain empty cells: a tiler
            # skips the tiles that hold only nodata.
            fill = MIN_FILL_SEGMENT if problem.table.has_collar else MIN_FILL
            free = _free_shape(problem, seed, kfree)
            if n <= free[0] * free[1] <= n / fill and free not in shapes and _holds(free, box, quarter):
                shapes.append(free)
            if segment is not None and len(segment) >= SEGMENT_SHARE * n:
                area = box[0] * box[1]
                bound = max(n / fill, area) if n >= MIN_FILL_SEGMENT * area else n / fill
                shapes += [s for s in _holey_shapes(n, box, bound, quarter) if s not in shapes]
            if n > 3 and all(min(s) == 1 for s in shapes):
                # Only a strip holds the tiles exactly (a prime count, after
                # a tile went missing): the nearly full grids compete too.
                shapes += [s for s in _holey_shapes(n, box, n / MIN_FILL, quarter) if s not in shapes]
        if not shapes:  # nothing holds the segment: do not let it rule out every grid
            shapes = candidate_shapes(n, transposes=True)
    fitting = [s for s in shapes if problem.pins.fits(s)]
    if not fitting:
        r, c = problem.pins.span()
        raise OptionError(f"pinned tiles span {r}x{c} cells, more than any grid tried "
                          f"({', '.join(f'{a}x{b}' for a, b in shapes)}); give --grid")
    return fitting


def choose_shape(problem, seed, *, settings, shape=None, holes=False, regrow_contenders=False, deadline=None,
                 progress=None):
    """Grow a greedy placement on each shape to try and keep the best.

    Shapes that cannot hold the largest trusted segment are not tried (see
    :func:`shapes_to_try`). Of the rest, a wrong shape forces seams the tiles
    do not want: the right one keeps the most best-buddy pairs (with a nodata
    collar: the lowest search objective, which prices empty cells, then the
    smallest box the tiles fill); among equals,
    the one with fewer cells, then the least elongated, then the cheapest
    seams. Empty cells let a free greedy run dodge seams a full frame forces,
    so with ``regrow_contenders`` the close contenders (within nine tenths of
    the most best-buddy seams) are first mended by segment regrowth, and a
    grid with holes must keep :data:`HOLES_MARGIN` times the best-buddy seams
    of a full one before it wins.

    Parameters
    ----------
    problem : stitch.search.problem.Problem
    seed : int
        Tile the greedy placements grow from.
    settings : SearchSettings
    shape : (int, int), optional
        The grid given by the user; inferred when None.
    holes : bool
        Also consider grids with empty cells (tiles missing).
    regrow_contenders : bool
    deadline : float, optional
    progress : callable, optional

    Returns
    -------
    ShapeChoice
    """
    n = problem.n
    segment = largest_segment(problem) if shape is None else None
    shapes = shapes_to_try(problem, shape, seed, settings.candidates_free, holes, segment)

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
    # Share of the sides facing each grid's empty cells that hold nodata.
    # Below MIN_FILL a grid's empty cells must be explained by the collar,
    # as around a skipped tile.
    explained = {s: _explained_holes(problem, g) for s, g in grids.items() if s[0] * s[1] > n}
    for s in [s for s in grids if n < MIN_FILL * s[0] * s[1]]:
        if len(grids) > 1 and explained[s] < EXPLAINED_SHARE:
            log.debug("shape %dx%d: its empty cells border valid data; left out", s[0], s[1])
            del grids[s], buddies[s]
    scores, keys = {}, {}
    collar = problem.table.has_collar
    for s, grid in grids.items():
        b, cells = buddies[s], s[0] * s[1]
        objective, normalized = problem.fitness(grid), problem.normalized_cost(grid)
        if collar:
            # With nodata, an empty cell is a skipped all-nodata tile and the
            # search objective prices it (valid data facing it costs its
            # footprint term; seams without shared valid rows cost what a
            # seam earns), so it compares grids with holes directly; among
            # equals, the smaller box the tiles fill, then fewer cells.
            box = _placed_box(grid)
            keys[s] = (objective, box[0] * box[1], cells, max(s) / min(s), normalized)
        else:
            evidence = b if cells == n else b / HOLES_MARGIN * max(0.0, 1.0 - HOLE_COST * (cells - n) / n)
            keys[s] = (-evidence, cells, max(s) / min(s), normalized)
        scores[s] = {"buddy_pairs": b, "mean_normalized_cost": normalized}
        if collar and s in explained:
            scores[s]["explained_holes"] = round(explained[s], 4)
        log.debug("shape %dx%d: %d best-buddy seams, mean normalised cost %.4f, search objective %.4g (seam "
                  "costs less the reward of each plausible seam; not the total seam cost)", s[0], s[1], b,
                  normalized, objective)
    ranked = sorted(keys, key=keys.get)
    best = ranked[0]
    # The runner-up is the best shape that is a real alternative: a frame
    # that holds the chosen placement (empty rows or columns around it), or
    # whose placement the chosen frame holds, or with quarter turns the same
    # grid turned, would end as the same mosaic.
    quarter = quarter_turns(problem)
    boxes = {s: _placed_box(grids[s]) for s in ranked}
    others = [s for s in ranked[1:] if not (_holds(best, boxes[s], quarter) or _holds(s, boxes[best], quarter))]
    runner_up = others[0] if others else None
    margin = None
    if runner_up is not None:
        top, second = -keys[best][0], -keys[runner_up][0]  # evidence, or (with a collar) minus the objective
        margin = (top - second) / abs(top) if top else 0.0
    if shape is None:
        log.info("grid %dx%d inferred from %d shapes%s", best[0], best[1], len(shapes),
                 f" (runner-up {runner_up[0]}x{runner_up[1]}, margin {margin:.1%})" if runner_up else "")
    return ShapeChoice(best, grids[best], scores, inferred=shape is None, runner_up=runner_up, margin=margin,
                       segment=segment, margin_of="search objective" if collar else "best-buddy seams")
