"""Preflight: is a tile folder usable, and what would ``solve`` cost?

Reads headers and edge strips only, never writes. Reports tile count, size,
bands, data type, nodata, blank and duplicate tiles (identical on all four
edges), surviving georeferencing and whether it agrees, plausible grid
shapes, an estimate of run time and memory, and the problems that would stop
``solve``.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field

import numpy as np

from .errors import StitchError
from .georef import anchor_cells, map_units, pixel_size
from .layout import allowed_orientations
from .names import DEFAULT_TILE_MATRIX_SET, find_names, with_names
from .overlap import with_overlap
from .search import candidate_shapes, kernels_compiled
from .seams import auto_tries_prediction, count_blocks, keeps_dense
from .tiles import read_tileset, skipped_note

__all__ = ["Inspection", "inspect_tiles"]


@dataclass(frozen=True)
class Inspection:
    """Findings of :func:`inspect_tiles`; ``problems`` empty means solve can run.

    ``overlap`` is :meth:`stitch.overlap.OverlapFinding.facts`, or None when
    it could not be looked for; ``tile_names`` is
    :meth:`stitch.names.NameFinding.facts` (the scheme found, how many names
    survived, zoom and tile range), or None when the names could not be read.
    """

    folder: str
    tiles: int = 0
    tile_size: tuple = ()
    bands: int = 0
    dtype: str = ""
    nodata: float | None = None
    blank: tuple = ()
    duplicates: tuple = ()
    georeferenced: tuple = ()
    anchors_agree: bool | None = None
    grid_shapes: tuple = ()
    estimated_seconds: float = 0.0
    estimated_memory_mb: float = 0.0
    kernels_compiled: bool = True
    anchor_crs: str | None = None
    anchor_pixel_size: tuple | None = None
    anchor_units: str | None = None
    overlap: dict | None = None
    tile_names: dict | None = None
    problems: tuple = ()
    notes: tuple = field(default=())
    inferred_grid: tuple | None = None
    grid_evidence: dict | None = None
    verdict: dict | None = None
    seconds: float | None = None

    @property
    def ok(self):
        return not self.problems

    def as_dict(self):
        d = asdict(self)
        d["ok"] = self.ok
        return d


def _estimate(n, size, bands, quarter=False):
    """Rough seconds and MB of ``solve`` with the search loops compiled (from
    bench/seams.py and bench/solve.py, and solve runs on cut scikit-image
    astronaut folders of 64 to 324 tiles, on 2 cores)."""
    blocks = count_blocks(allowed_orientations(90 if quarter else 0, False))
    seam_s = 4.5e-8 * blocks * n * n * (2 * bands * bands + 2 * size * bands + 2) / 188
    if auto_tries_prediction(n, blocks, size, bands):  # the default measure also scores with prediction
        seam_s += 2.5e-8 * blocks * n * n * size * bands  # from bench timings of prediction
    search_s = (16.0 if quarter else 7.0) * (n / 432) if n > 50 else 1.0
    mem = (blocks * n * n * 4 if keeps_dense(n, blocks) else 70 * 2**20) / 2**20 + n * 4 * size * 2 * bands * 4 / 2**20 + 250
    return seam_s + search_s + 2, mem  # 2 s: starting Python, reading headers, writing


def inspect_tiles(folder, *, recursive=False, rotations=0, mirrored=False, grid=None, infer=False, seed=0,
                  overlap=None, tile_scheme="auto", tile_matrix_set=DEFAULT_TILE_MATRIX_SET):
    """Check a tile folder before solving.

    Parameters
    ----------
    folder : path-like
    recursive : bool, optional
    rotations : {0, 180, 90}, optional
        Turns the tiles may need, as ``solve --rotations`` (for the estimate
        and ``infer``).
    mirrored : bool, optional
    grid : (int, int), optional
        The grid the user would give ``solve``: checked against the tile count.
    infer : bool, optional
        Also run the placement (seams and search, as ``solve`` does with
        these options and ``seed``, writing nothing) and report the grid
        found, how sure its inference is and the run's verdict. Takes about
        as long as ``solve``.
    seed : int, optional
    overlap : int, optional
        The overlap the user would give ``solve`` (``--overlap``); found in
        the pixels, as ``solve`` does, when None.

    Returns
    -------
    Inspection
        Never raises for a bad folder: what would stop ``solve`` is listed in
        ``problems``.
    """
    try:
        ts = read_tileset(folder, recursive=recursive)
    except StitchError as exc:
        return Inspection(folder=str(folder), problems=(str(exc),))
    n = len(ts)
    problems, notes = [], []
    if n < 2:
        problems.append("a single tile: there is nothing to put together")
    blank = tuple(np.asarray(ts.names)[ts.blank].tolist())
    if blank and len(blank) == n:
        problems.append("every tile is blank (constant or all nodata): no seam carries information")
    elif n >= 2 and ts.structureless().all():
        problems.append("no tile shows ground detail (all are constant or noise-like, as open water or haze): "
                        "no seam carries information")
    elif blank:
        notes.append(f"{len(blank)} blank tile(s) will be placed with no evidence")
    if ts.skipped:
        notes.append(skipped_note(ts.skipped))
    overlap_facts = None
    if n >= 2 and not ts.blank.all():
        try:
            ts, finding = with_overlap(ts, given=overlap, seed=seed)
            overlap_facts = finding.facts()
        except StitchError as exc:
            problems.append(str(exc))
    name_facts = None
    try:
        finding = find_names(ts.folder, ts.names, scheme=tile_scheme, tile_matrix_set_id=tile_matrix_set)
        ts = with_names(ts, finding)
        name_facts = finding.facts(n)
        notes.extend(finding.notes)
    except StitchError as exc:
        problems.append(str(exc))
    duplicates = ts.duplicate_groups()
    if duplicates:
        notes.append(f"{len(duplicates)} group(s) of tiles with identical edges: they are interchangeable")
    # Tiles georeferenced by their names kept no tags or world file.
    georef = tuple(name for name, g in zip(ts.names, ts.georefs) if g is not None and not g.from_name)
    first = next((g for g in ts.georefs if g is not None), None)
    anchor_crs = None if first is None or first.crs is None else first.crs.to_string()
    anchor_pixel = None if first is None else pixel_size(first.transform)
    anchor_units = None if first is None else map_units(first.crs)
    agree = None
    if georef or (ts.tile_names and ts.tile_names.georeferences):
        try:
            anchor_cells(ts)
            agree = True
        except StitchError as exc:
            agree = False
            problems.append(str(exc))
    elif not (ts.tile_names and ts.tile_names.georeferences):
        notes.append("no tile kept georeferencing: give --bounds, --origin or --gcps with --crs")
    if grid is not None and grid[0] * grid[1] < n:
        problems.append(f"--grid {grid[0]}x{grid[1]} holds {grid[0] * grid[1]} tiles but the folder has {n}")
    shapes = tuple(f"{r}x{c}" for r, c in candidate_shapes(n)) if n >= 2 else ()
    seconds, memory = _estimate(n, max(ts.width, ts.height), ts.count, quarter=rotations == 90)
    found = {}
    if infer and not problems:
        found = _infer(ts, rotations, mirrored, grid, seed, ts.overlap)
    return Inspection(
        folder=str(folder), tiles=n, tile_size=(ts.width, ts.height), bands=ts.count, dtype=ts.dtype,
        nodata=ts.nodata, blank=blank, duplicates=duplicates, georeferenced=georef, anchors_agree=agree,
        grid_shapes=shapes, estimated_seconds=round(seconds, 1), estimated_memory_mb=round(memory),
        kernels_compiled=kernels_compiled(), anchor_crs=anchor_crs, anchor_pixel_size=anchor_pixel,
        anchor_units=anchor_units, overlap=overlap_facts, tile_names=name_facts,
        problems=tuple(problems), notes=tuple(notes), **found,
    )


def _infer(tileset, rotations, mirrored, grid, seed, overlap):
    """The placement ``solve`` would make, down to what ``inspect`` reports."""
    import time

    from .confidence import run_verdict
    from .pipeline import SolveOptions, place_tiles

    t0 = time.perf_counter()
    options = SolveOptions(grid=grid, rotations=rotations, mirrored=mirrored, seed=seed, overlap=overlap)
    placement, search, table, _ = place_tiles(tileset, options)
    verdict = run_verdict(placement, table, threshold=options.confidence_threshold, grid_given=grid is not None,
                          shape_evidence=search.shape_evidence)
    return {"inferred_grid": tuple(placement.shape), "grid_evidence": search.shape_evidence,
            "verdict": verdict.as_dict(), "seconds": round(time.perf_counter() - t0, 1)}
