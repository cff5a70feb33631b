"""Search for the placement with the lowest total seam cost.

Two strategies are built in, each a function of the same signature:

``evolution`` (:func:`~stitch.search.evolution.evolution_search`)
    A genetic algorithm over whole placements whose crossover keeps the
    segments both parents agree on (Sholomon, David & Netanyahu, CVPR 2013),
    with its first population grown greedily from different seed tiles.
``greedy`` (:func:`~stitch.search.greedy.greedy_search`)
    Greedy best-buddy placement (Paikin & Tal, CVPR 2015) from the most
    distinctive tile.

Other packages add strategies under the entry-point group
``stitch.searches``. Every strategy returns a :class:`SearchResult`.

The package, in the order a run uses it:

* :mod:`~stitch.search.types`: settings, pins, the ``Grid`` pair, the result;
* :mod:`~stitch.search.problem`: the seam table laid out for the kernels and
  the moves built on them (greedy growth, crossover, swaps, windows, regrowth);
* :mod:`~stitch.search.shapes`: which grid shape the tiles came from;
* :mod:`~stitch.search.greedy`, :mod:`~stitch.search.evolution`,
  :mod:`~stitch.search.regrowth`: the strategies and segment regrowth;
* ``_lookup``, ``_grow``, ``_polish``: the compiled loops (numba).

Every random choice is drawn from one :class:`numpy.random.Generator`.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np

from ..plugins import Registry
from .evolution import evolution_search
from .greedy import greedy_search
from .shapes import candidate_shapes
from .types import Grid, Pins, SearchResult, SearchSettings

__all__ = [
    "Grid",
    "Pins",
    "SEARCH_ENTRY_POINT_GROUP",
    "SearchResult",
    "SearchSettings",
    "available_searches",
    "candidate_shapes",
    "evolution_search",
    "get_search",
    "greedy_search",
    "kernels_compiled",
    "search_placement",
]

#: Entry-point group under which other packages register search strategies.
SEARCH_ENTRY_POINT_GROUP = "stitch.searches"

_REGISTRY = Registry(SEARCH_ENTRY_POINT_GROUP, {"evolution": evolution_search, "greedy": greedy_search}, "--search")


def available_searches():
    """Names of built-in and installed search strategies, sorted."""
    return _REGISTRY.names()


def get_search(name):
    """The search strategy registered under ``name``.

    A strategy is called as ``search(table, *, shape, orientations, settings,
    rng, progress, pins, holes)`` (see :func:`search_placement`) and returns
    a :class:`SearchResult`.
    """
    return _REGISTRY.get(name)


def search_placement(table, *, shape=None, orientations=None, settings=None, rng=None, progress=None, pins=None,
                     holes=False):
    """Find a low-cost placement of every tile of a seam table.

    Parameters
    ----------
    table : stitch.seams.SeamTable
    shape : (int, int), optional
        Grid rows and columns; inferred when None.
    orientations : tuple of int, optional
        Allowed orientation codes; by default those the table was scored for.
    settings : SearchSettings, optional
        ``settings.strategy`` names the strategy.
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
    return strategy(table, shape=shape, orientations=table.orientations if orientations is None else orientations,
                    settings=settings, rng=np.random.default_rng(rng), progress=progress, pins=pins or Pins(),
                    holes=holes)


def kernels_compiled():
    """Have the search loops been compiled and cached (numba's cache, beside
    the sources or in ``NUMBA_CACHE_DIR``)? The first run compiles them,
    which takes about 15 s on this project's 2-core reference machine."""
    from . import _grow

    here = Path(_grow.__file__).parent / "__pycache__"
    places = [here] + ([Path(os.environ["NUMBA_CACHE_DIR"])] if os.environ.get("NUMBA_CACHE_DIR") else [])
    return any(next(place.rglob("_grow.greedy-*.nbi"), None) for place in places if place.is_dir())
