"""The whole job in one call: tiles in, georeferenced mosaic and report out.

``read -> score seams -> search placement -> georeference -> write -> report``;
each arrow is one module. :func:`place_tiles` runs the pure middle (no files
written), :func:`solve` the whole path.
"""

from __future__ import annotations

import logging
import time
import warnings
from dataclasses import asdict, dataclass, field, replace
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from .errors import GeoreferenceError, NotGeoreferencedWarning, OptionError, TileSetError
from .files import check_outputs, output_lock, remove_stale_partials, staged
from .control import fit_control, read_gcps
from .georef import (
    PIXEL_SPACE,
    Georeference,
    GeorefSpec,
    anchor_cells,
    from_anchors,
    from_bounds,
    from_origin,
    map_units,
    parse_crs,
    pixel_size,
    prj_path,
    world_file_path,
)
from .layout import Placement, allowed_orientations, normalize_frame
from .measures import overlap as overlap_measure
from .overlap import overlap_strips, with_overlap
from .partial import partial_edges, partial_grid
from .mosaic import mosaic_size, write_mosaic
from .names import DEFAULT_TILE_MATRIX_SET, find_names, flipped_rows, with_names
from .report import check_report, report_paths, write_report
from .restore import check_restore_dir, restore_tiles, write_restore_list
from .confidence import review_labels, run_verdict, side_confidence, tile_confidence
from .search import Pins, SearchSettings, search_placement
from .seams import DEFAULT_MEASURE, score_seams
from .tiles import MAX_TILE_PIXELS, RASTER_SUFFIXES, find_tiles, is_own_output, read_tileset, skipped_note

__all__ = ["SolveOptions", "SolveResult", "default_report_dir", "place_named", "place_tiles", "read_names", "solve"]

log = logging.getLogger(__name__)


@dataclass(frozen=True)
class SolveOptions:
    """Every setting of a solve run.

    Attributes
    ----------
    grid : (rows, cols) or None
        Grid shape; inferred when None.
    rotations : {0, 180, 90}
        Turns a tile may need: none, half turns, or any quarter turn.
    mirrored : bool
        Tiles may also be mirrored left-right.
    measure : str
        Seam measure name (see :func:`stitch.seams.available_measures`), or
        ``"auto"``: MGC or prediction, whichever gives more best buddies.
    candidates : int
        Candidates kept per tile side.
    search : SearchSettings
    seed : int
        Seeds every random choice.
    recursive : bool
        Read tiles in sub-folders too.
    georef : GeorefSpec
        Georeferencing given by the user (overrides anchor tiles).
    confidence_threshold : float
        Tiles below it are flagged for review.
    cog : bool
        Write the mosaic as a Cloud Optimized GeoTIFF.
    max_tile_pixels : int
        Tiles whose header claims more pixels are refused before reading.
    pins : tuple of (name, row, col)
        Tiles whose grid cell is known; they never move. Without pins, tiles
        that kept georeferencing are pinned relative to each other.
    overlap : int or None
        Pixels each tile shares with each neighbour; found in the pixels when
        None (:func:`stitch.overlap.find_overlap`), 0 for tiles that meet edge
        to edge.
    tile_scheme : str
        Which surviving tile names to read (:data:`stitch.names.SCHEMES`):
        ``"auto"`` any, ``"none"`` no name is trusted.
    tile_matrix_set : str
        OGC identifier of the tile matrix set ``z/x/y`` names and quadkeys
        refer to.
    restore : path-like or None
        Folder to write the tiles into under their recovered names.
    """

    grid: tuple[int, int] | None = None
    rotations: int = 0
    mirrored: bool = False
    measure: str = DEFAULT_MEASURE
    candidates: int = 16
    search: SearchSettings = field(default_factory=SearchSettings)
    seed: int = 0
    recursive: bool = False
    georef: GeorefSpec = field(default_factory=GeorefSpec)
    confidence_threshold: float = 0.5
    pins: tuple = ()
    cog: bool = False
    max_tile_pixels: int = MAX_TILE_PIXELS
    overlap: int | None = None
    tile_scheme: str = "auto"
    tile_matrix_set: str = DEFAULT_TILE_MATRIX_SET
    restore: object = None

    def __post_init__(self):
        if self.overlap is not None and self.overlap < 0:
            raise OptionError(f"--overlap must be 0 or more pixels, got {self.overlap}")
        if self.grid is not None and (len(self.grid) != 2 or min(self.grid) < 1):
            raise OptionError(f"--grid must be ROWSxCOLS with both at least 1, got {self.grid}")
        if not 0 <= self.confidence_threshold <= 1:
            raise OptionError("the confidence threshold must lie in [0, 1]")
        if self.candidates < 2:
            raise OptionError("keep at least 2 candidates per side")
        for pin in self.pins:
            if len(pin) != 3 or int(pin[1]) < 0 or int(pin[2]) < 0:
                raise OptionError(f"--pin must be NAME=ROW,COL with ROW, COL >= 0, got {pin!r}")
            if self.grid is not None and (int(pin[1]) >= self.grid[0] or int(pin[2]) >= self.grid[1]):
                raise OptionError(f"--pin {pin[0]}={pin[1]},{pin[2]} lies outside --grid {self.grid[0]}x{self.grid[1]}")

    def as_dict(self):
        d = asdict(self)
        g = d["georef"]
        if g.get("crs") is not None:
            g["crs"] = str(g["crs"])
        if d["restore"] is not None:
            d["restore"] = str(d["restore"])
        return d


@dataclass(frozen=True, eq=False)
class SolveResult:
    """What a solve run produced.

    Attributes
    ----------
    placement : stitch.layout.Placement
        With per-tile confidence.
    georeference : stitch.georef.Georeference
    tileset : stitch.tiles.TileSet
    search : stitch.search.SearchResult
    options : SolveOptions
    outputs : dict
        Role -> path of every file written.
    timings : dict
        Seconds per stage.
    warnings : tuple of str
    control : stitch.control.GcpFit or None
        The ground control fit, with residuals, when control points were used.
    side_scores : ndarray, shape (n_tiles, 4) or None
        Seam confidence on the top, right, bottom and left of each tile.
    pinned : frozenset of int
        Indices of tiles that were pinned.
    measure : str
        Seam measure that scored the seams (the one ``"auto"`` chose).
    verdict : stitch.confidence.Verdict or None
        What the run as a whole is worth.
    review : ndarray of str or None
        Per tile: ``""`` (confident), ``"interchangeable"`` (flagged, but other
        flagged tiles look just like it) or ``"doubtful"``.
    started : str
        When the run began (ISO 8601, UTC).
    overlap : stitch.overlap.OverlapFinding or None
        The overlap the tiles were placed and merged with, and its evidence.
    restored : tuple of stitch.restore.RestoredTile
        The tiles written back under their recovered names (``--restore``).
    """

    placement: Placement
    georeference: object
    tileset: object
    search: object
    options: SolveOptions
    outputs: dict = field(default_factory=dict)
    timings: dict = field(default_factory=dict)
    warnings: tuple = ()
    control: object = None
    side_scores: np.ndarray | None = None
    pinned: frozenset = frozenset()
    measure: str = ""
    verdict: object = None
    review: np.ndarray | None = None
    started: str = ""
    overlap: object = None
    restored: tuple = ()

    @property
    def facts(self):
        """Where the mosaic lies: :meth:`stitch.georef.Georeference.facts`."""
        return self.georeference.facts(*mosaic_size(self.tileset, self.placement))

    @property
    def flagged(self):
        """Names of placed tiles below the confidence threshold."""
        p = self.placement
        low = p.placed & (np.nan_to_num(p.confidence, nan=0.0) < self.options.confidence_threshold)
        return [p.names[i] for i in np.flatnonzero(low)]


def _inside(path, folder):
    try:
        Path(path).resolve().relative_to(Path(folder).resolve())
        return True
    except ValueError:
        return False


#: The restore list's file in the report folder (``--restore``).
RESTORE_LIST = "restore.csv"

#: Largest grid, as a multiple of the tile count (a larger one is a typo).
MAX_GRID_FACTOR = 10

#: Most memory the evolutionary search's populations may take (an estimate).
MAX_SEARCH_BYTES = 4 * 2**30


def check_before_reading(tiles_dir, options):
    """Validate options against the folder before any pixel is read.

    The CRS, the control file (its tiles exist, its points lie inside them),
    the pins (their tiles exist), the grid (at most :data:`MAX_GRID_FACTOR`
    times the tile count, and holding the pins) and the search's population
    (its memory), so that a mistake costs seconds, not a whole search.
    """
    spec = options.georef
    parse_crs(spec.crs)
    folder = Path(tiles_dir)
    paths = find_tiles(folder, recursive=options.recursive)
    names = {p.relative_to(folder).as_posix(): p for p in paths}
    n = len(names)
    if n == 0:
        return  # read_tileset says why
    for name, row, col in options.pins:
        if name not in names:
            raise OptionError(f"--pin names tile {name!r}, which is not in {str(folder)!r}")
    # Names that contradict each other stop the run before any pixel is read.
    find_names(folder, sorted(names), scheme=options.tile_scheme, tile_matrix_set_id=options.tile_matrix_set)
    limit = MAX_GRID_FACTOR * max(n, 2)
    if options.grid is not None and options.grid[0] * options.grid[1] > limit:
        r, c = options.grid
        raise OptionError(f"--grid {r}x{c} has {r * c} cells for {n} tiles (more than {MAX_GRID_FACTOR} x the tile "
                          "count); check the grid")
    if options.pins and options.grid is None:
        rows = max(int(r) for _, r, _ in options.pins) + 1
        cols = max(int(c) for _, _, c in options.pins) + 1
        if rows * cols > limit:
            raise OptionError(f"the pins span {rows}x{cols} cells, more than a grid of {n} tiles can hold "
                              f"(at most {MAX_GRID_FACTOR} x the tile count); check them or give --grid")
    cells = options.grid[0] * options.grid[1] if options.grid is not None else n
    population = options.search.population
    need = 4 * population * cells * 8  # tiles and orientations of parents and children, int64
    if need > MAX_SEARCH_BYTES:
        most = max(1, MAX_SEARCH_BYTES // (4 * cells * 8))
        raise OptionError(f"--population {population} needs about {need / 2**30:.0f} GB for {cells} cells; "
                          f"give at most {most} (0 chooses by tile count)")
    if spec.gcps is not None:
        _check_control_file(spec.gcps, names)


def _check_control_file(path, tiles):
    """Every control point names a tile of the folder and lies inside it."""
    import rasterio

    sizes = {}
    for k, p in enumerate(read_gcps(path), start=1):
        if p.tile not in tiles:
            raise GeoreferenceError(f"control point {k} in {Path(path).name} names tile {p.tile!r}, which is not in "
                                    "the tile folder; check the name")
        if p.tile not in sizes:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                with rasterio.open(tiles[p.tile]) as src:
                    sizes[p.tile] = (src.width, src.height)
        w, h = sizes[p.tile]
        if not (0 <= p.col <= w and 0 <= p.row <= h):
            raise GeoreferenceError(f"control point {k} in {Path(path).name} lies at column {p.col:g}, row "
                                    f"{p.row:g} of tile {p.tile!r}, outside its {w}x{h} pixels; col and row are "
                                    "pixel/line inside the tile")


def _refuse_inputs(paths, tiles_dir, recursive):
    """Refuse outputs that would replace a tile (``--overwrite`` never
    replaces an input): an existing raster among the folder's tiles that
    stitch did not write."""
    folder = Path(tiles_dir)
    for path in paths:
        path = Path(path)
        if not path.is_file():
            continue
        inside = path.resolve().parent == folder.resolve() or (recursive and _inside(path, folder))
        if not inside:
            continue
        if path.suffix.lower() in RASTER_SUFFIXES:
            if not is_own_output(path):
                raise OptionError(f"{str(path)!r} is one of the tiles in {str(folder)!r}; writing there would "
                                  "destroy an input (--overwrite never replaces tiles): choose another output or "
                                  "report folder")
            continue
        # A world file or .prj beside a tile belongs to that tile.
        owners = [path.with_suffix(e) for ext in RASTER_SUFFIXES for e in (ext, ext.upper())]
        owner = next((o for o in owners if o.is_file() and not is_own_output(o)), None)
        if owner is not None:
            raise OptionError(f"{str(path)!r} is the sidecar of tile {owner.name!r} in {str(folder)!r}; writing "
                              "there would destroy an input (--overwrite never replaces it): choose another output")


def _duplicate_notes(tileset):
    """Warnings for tiles whose four edges are identical (interchangeable)."""
    dups = tileset.duplicate_groups()
    if not dups:
        return []
    if len(dups) == 1 and len(dups[0]) == int((~tileset.blank).sum()):
        msg = "all tiles are identical: any placement is as good as another"
    else:
        shown = "; ".join(", ".join(g[:3]) for g in dups[:3])
        msg = f"{sum(len(g) for g in dups)} tiles have identical edges and are interchangeable ({shown})"
    warnings.warn(msg, UserWarning, stacklevel=3)
    return [msg]


def default_report_dir(output):
    """``OUT_report/`` beside the mosaic ``OUT.tif``."""
    output = Path(output)
    return output.with_name(output.stem + "_report")


def _pins(tileset, options):
    """Pins from --pin (absolute cells) or from anchor tiles (relative cells)."""
    if options.pins:
        index = {name: i for i, name in enumerate(tileset.names)}
        tiles, rows, cols, cells = [], [], [], set()
        for name, row, col in options.pins:
            if name not in index:
                raise OptionError(f"--pin names tile {name!r}, which is not in {str(tileset.folder)!r}")
            if (int(row), int(col)) in cells or index[name] in tiles:
                raise OptionError(f"--pin {name}={row},{col} repeats a tile or a cell")
            cells.add((int(row), int(col)))
            tiles.append(index[name])
            rows.append(int(row))
            cols.append(int(col))
        return Pins(tuple(tiles), tuple(rows), tuple(cols), absolute=True)
    cells = anchor_cells(tileset)
    named = tileset.tile_names
    if not cells and named and not named.georeferences:
        # <base>_<row>_<col> names: cells relative to each other.
        (r0, c0), *_ = named.cells.values()
        cells = [(i, r - r0, c - c0) for i, (r, c) in named.cells.items()]
    if not cells:
        return Pins()
    t, r, c = zip(*cells)
    return Pins(t, r, c, absolute=False)


#: What helps when the tiles themselves carry no seam evidence.
NO_EVIDENCE_ADVICE = ("pin the tiles whose cells you know (--pin NAME=ROW,COL) with --grid ROWSxCOLS, keep or "
                      "restore their georeferencing, or add the neighbouring tiles that show ground detail")


def place_tiles(tileset, options=None, *, progress=None):
    """Score seams and search a placement; no files are written.

    Returns
    -------
    (Placement, SearchResult, SeamTable, Pins)
    """
    options = options or SolveOptions()
    n = len(tileset)
    if options.grid is not None and options.grid[0] * options.grid[1] < n:
        r, c = options.grid
        raise OptionError(f"--grid {r}x{c} holds {r * c} tiles but the folder has {n}; give a larger grid")
    orientations = allowed_orientations(options.rotations, options.mirrored, square=tileset.is_square)
    measure = options.measure
    if tileset.overlap:
        if measure != DEFAULT_MEASURE:
            raise OptionError(f"--seam {measure} compares edges that meet, but the tiles overlap by "
                              f"{tileset.overlap} px and are placed by their shared strips; drop --seam, or give "
                              "--overlap 0 if they do not overlap")
        measure = overlap_measure
    shared = overlap_strips(tileset, tileset.overlap) if tileset.overlap else None
    edges, outer = partial_edges(tileset, orientations, edges=shared)
    table = score_seams(edges, orientations=orientations, measure=measure, k=options.candidates,
                        blank=tileset.blank, progress=progress)
    pins = _pins(tileset, options)
    # A complete partial column and row fix the grid (their counts).
    from_edges = partial_grid(tileset, orientations) if options.grid is None else None
    shape = options.grid or from_edges
    # The table carries the orientations it was scored for; the search and
    # the frame take them from it.
    result = search_placement(table, shape=shape, settings=options.search, rng=options.seed,
                              progress=progress, pins=pins, holes=shape is None)
    if from_edges is not None:
        result = replace(result, shape_evidence=_edge_evidence(from_edges, tileset))
    raw = Placement.from_grid(tileset.names, result.tiles, result.orientations)
    if pins.absolute:
        placement = raw  # the pins fix the frame and the cells
    else:
        anchors = [i for i, g in enumerate(tileset.georefs) if g is not None]
        if tileset.tile_names:  # named tiles are as their cache stored them: upright
            anchors = sorted(set(anchors) | set(tileset.tile_names.cells))
        placement = normalize_frame(raw, orientations=table.orientations, fit=shape, anchors=anchors, outer=outer)
    conf = tile_confidence(placement, table, result.agreement)
    conf[tileset.blank] = 0.0
    return placement.with_confidence(conf), result, table, pins


def read_names(tileset, options=None):
    """``tileset`` with what its surviving file names say attached
    (:func:`stitch.names.find_names`, :func:`stitch.names.with_names`):
    ``z/x/y`` names and quadkeys georeference their tiles, ``<base>_<row>_<col>``
    names pin them relative to each other."""
    options = options or SolveOptions()
    finding = find_names(tileset.folder, tileset.names, scheme=options.tile_scheme,
                         tile_matrix_set_id=options.tile_matrix_set)
    return with_names(tileset, finding)


#: The search cost by which one reading of ``z/x/y`` rows (XYZ or TMS) must
#: beat the other for the choice not to be called thin (a share of it).
ROW_ORDER_MARGIN = 0.01


def place_named(tileset, options=None, *, progress=None):
    """:func:`place_tiles`, settling first whether ``z/x/y`` rows count from
    the top (XYZ) or the bottom (TMS) when neither the user nor a
    ``tilemapresource.xml`` said so.

    A named tile that kept a world file or GeoTIFF tags agrees with one
    reading only, which is taken. Otherwise named tiles in two or more rows are placed both ways, and the reading
    whose placement costs less wins (the wrong one pins tiles upside down
    relative to each other, and its seams break; compared per seam, as the
    two grids may differ). With one row of names the
    seams cannot tell: XYZ, the web maps' order, is assumed (the finding's
    ``rows_from`` says ``"assumed"``); a thin lead is added to its notes.

    Returns
    -------
    (TileSet, (Placement, SearchResult, SeamTable, Pins))
        The tile set as read with the reading chosen, and what
        :func:`place_tiles` returns for it.
    """
    options = options or SolveOptions()
    named = tileset.tile_names
    if not named or named.scheme not in ("xyz", "tms") or named.rows_from:
        return tileset, place_tiles(tileset, options, progress=progress)
    rows = {r for r, _ in named.cells.values()}
    if len(rows) < 2:
        ts = with_names(tileset, replace(named, rows_from="assumed"))
        return ts, place_tiles(ts, options, progress=progress)
    # A named tile's world file or tags may rule one reading out.
    read, refused = [], None
    for reading in (named, flipped_rows(named)):
        try:
            read.append(with_names(tileset, replace(reading, rows_from="seams")))
        except GeoreferenceError as exc:
            refused = exc
    if not read:
        raise refused
    if len(read) == 1:
        (ts,) = read
        ts = replace(ts, tile_names=replace(ts.tile_names, rows_from="tiles' own georeferencing"))
        return ts, place_tiles(ts, options, progress=progress)
    tried = [(ts, place_tiles(ts, options, progress=progress)) for ts in read]
    costs = [_cost_per_seam(placed[1]) for _, placed in tried]
    best = int(np.argmin(costs))
    margin = (costs[1 - best] - costs[best]) / max(abs(costs[best]), 1e-12)
    ts, placed = tried[best]
    scheme = ts.tile_names.scheme.upper()
    log.info("z/x/y rows read as %s: cost per seam %.6g against %.6g", scheme, costs[best], costs[1 - best])
    if margin < ROW_ORDER_MARGIN:
        thin = (f"the seams barely tell whether z/x/y rows count from the top (XYZ) or the bottom (TMS): "
                f"{scheme} costs {margin:.2%} less; give --tile-scheme xyz or tms if you know it")
        ts = replace(ts, tile_names=replace(ts.tile_names, notes=ts.tile_names.notes + (thin,)))
    return ts, placed


def _cost_per_seam(result):
    """A search result's cost per seam between placed tiles: the readings'
    grids may differ (a wrong one can leave a row of holes, and fewer seams
    cost less in total), so totals are not comparable, means are."""
    t = result.tiles >= 0
    seams = int((t[:, :-1] & t[:, 1:]).sum() + (t[:-1] & t[1:]).sum())
    return result.cost / max(seams, 1)


def _doubtful_anchors(placement, tileset, pins, threshold):
    """Names of anchor tiles (pinned by their surviving georeferencing) whose
    seams do not hold where the anchors put them."""
    if pins.absolute or not pins.tiles:
        return []
    return [tileset.names[i] for i in pins.tiles
            if not tileset.blank[i] and np.nan_to_num(placement.confidence[i], nan=0.0) < threshold]


def _edge_evidence(shape, tileset):
    """Grid evidence (as :meth:`stitch.search.shapes.ShapeChoice.evidence`)
    when the partial edge tiles fixed the grid."""
    return {"source": "partial edge tiles", "search_frame": list(shape), "runner_up": None, "margin": None,
            "thin": False, "trusted_segment": None, "shapes_tried": 1,
            "partial_tiles": int(tileset.partial.sum())}


def _check_crs_alone(spec, tileset):
    """A ``--crs`` with no bounds, origin or control points can only name the
    CRS of anchor tiles that lack one (a world file without a ``.prj``).
    Refuse it otherwise, before the search: alone it places nothing, and
    beside anchors of another CRS it contradicts them."""
    if spec.crs is None or not spec.is_empty or (tileset.tile_names and tileset.tile_names.georeferences):
        return
    crs = parse_crs(spec.crs)
    anchors = [(name, g) for name, g in zip(tileset.names, tileset.georefs) if g is not None]
    if not anchors:
        raise OptionError(f"--crs {spec.crs} alone does not put the mosaic on the map: add --bounds, --origin or "
                          "--gcps, or keep one tile's GeoTIFF tags or world file")
    other = [(name, g.crs) for name, g in anchors if g.crs is not None and g.crs != crs]
    if other:
        name, theirs = other[0]
        raise OptionError(f"--crs {spec.crs} disagrees with anchor tile {name!r} ({theirs.to_string()}); "
                          "drop --crs, or reproject the tile")


def _override_note(given, anchored, by="georeferencing from the command line"):
    """How far georeferencing given on the command line moves the mosaic
    from where its anchor tiles put it."""
    what = f"{by} overrides {anchored.source}"
    if given.crs is not None and anchored.crs is not None and given.crs != anchored.crs:
        return f"{what}, which are in {anchored.crs.to_string()}, not {given.crs.to_string()}"
    a, g = anchored.transform, given.transform
    dx, dy = g.c - a.c, g.f - a.f
    px = float(np.hypot(*(~a * (g.c, g.f))))
    (gw, gh), (aw, ah) = pixel_size(g), pixel_size(a)
    return (f"{what}: it moves the mosaic's upper-left corner by {dx:+.6g}, {dy:+.6g} {map_units(given.crs)} "
            f"({px:.3g} px of theirs), with pixels of {gw:.6g} x {gh:.6g} against their {aw:.6g} x {ah:.6g}")


def _georeference(options, placement, tileset):
    """Georeference and, for control points, the fit (or None)."""
    spec = options.georef
    anchored = from_anchors(placement, tileset)
    named = tileset.tile_names
    if anchored is not None and named and named.georeferences and anchored.source.startswith("tile name"):
        anchored = replace(anchored, source=f"{anchored.source} ({named.scheme.upper()}, {named.tile_matrix_set} "
                                            f"zoom {named.zoom})")
    if anchored is not None and anchored.crs is None and spec.is_empty and spec.crs is not None:
        # World files without a .prj: --crs names their CRS.
        return Georeference(anchored.transform, parse_crs(spec.crs), f"{anchored.source} (CRS from --crs)"), None
    if spec.gcps is not None:
        fit = fit_control(read_gcps(spec.gcps), placement, tileset.width, tileset.height,
                          similarity=spec.similarity, step=tileset.step)
        crs = parse_crs(spec.crs)
        g = Georeference(fit.transform, crs,
                         f"{len(fit.residuals_map)} ground control points, {fit.method}, "
                         f"RMSE {fit.rmse_map:.4g} {map_units(crs)} ({fit.rmse_px:.3g} px)")
        if anchored is not None:
            log.warning("%s", _override_note(g, anchored, by="ground control"))
        return g, fit
    if spec.bounds is not None:
        g = from_bounds(spec.bounds, *mosaic_size(tileset, placement), spec.crs)
    elif spec.origin is not None:
        g = from_origin(spec.origin, spec.pixel_size, spec.crs)
    else:
        return anchored, None
    if anchored is not None:
        log.warning("%s", _override_note(g, anchored))
    return g, None


def solve(tiles_dir, output, *, options=None, report_dir=None, overwrite=False, progress=None):
    """Rebuild a georeferenced mosaic from a folder of tiles.

    Parameters
    ----------
    tiles_dir : path-like
        Folder of GeoTIFF, PNG or JPEG tiles of one size.
    output : path-like
        Mosaic GeoTIFF to write; a world file and .prj are written beside it (see
        :func:`stitch.mosaic.write_mosaic`).
    options : SolveOptions, optional
    report_dir : path-like, optional
        Report folder; default ``<output stem>_report`` beside the mosaic.
    overwrite : bool, optional
        Replace existing outputs.
    progress : callable, optional
        Called as ``progress(stage, done, total, detail="")`` with stage
        ``"read"``, ``"seams"``, ``"search"`` or ``"write"``.

    Returns
    -------
    SolveResult

    Examples
    --------
    Four tiles of scikit-image's coins (public domain, from memory), no
    georeferencing left, placed by their seams and put on the map with
    ``bounds``; the run names its outputs and its verdict (the package
    docstring has a round trip with an anchor tile):

    >>> import tempfile, warnings
    >>> from pathlib import Path
    >>> import rasterio
    >>> from skimage import data
    >>> from stitch.georef import GeorefSpec
    >>> tmp = Path(tempfile.mkdtemp())
    >>> (tmp / "tiles").mkdir()
    >>> coins = data.coins()[100:164, 100:164]
    >>> for name, (r, c) in {"d.tif": (0, 0), "a.tif": (0, 1), "c.tif": (1, 0), "b.tif": (1, 1)}.items():
    ...     tile = coins[32 * r:32 * (r + 1), 32 * c:32 * (c + 1)]
    ...     with warnings.catch_warnings():
    ...         warnings.simplefilter("ignore")
    ...         with rasterio.open(tmp / "tiles" / name, "w", driver="GTiff", width=32, height=32, count=1,
    ...                            dtype="uint8") as dst:
    ...             dst.write(tile, 1)
    >>> spec = GeorefSpec(bounds=(500000, 4099936, 500064, 4100000), crs="EPSG:32633")
    >>> result = solve(tmp / "tiles", tmp / "mosaic.tif", options=SolveOptions(georef=spec))
    >>> sorted(result.outputs)[:3], result.placement.shape
    (['mosaic', 'prj', 'report_convergence'], (2, 2))
    >>> with rasterio.open(result.outputs["mosaic"]) as out:
    ...     bool((out.read(1) == coins).all()), out.transform.c, out.transform.f, out.crs.to_epsg()
    (True, 500000.0, 4100000.0, 32633)
    """
    options = options or SolveOptions()
    output = Path(output)
    report_dir = Path(report_dir) if report_dir is not None else default_report_dir(output)
    if output.suffix.lower() not in (".tif", ".tiff"):
        raise OptionError(f"output {str(output)!r} must end in .tif or .tiff (a GeoTIFF is written)")
    if _inside(output, tiles_dir) and "mosaic" not in output.stem.lower():
        raise OptionError(
            f"output {str(output)!r} is inside the tile folder and could pass for a tile; write it elsewhere "
            "or put 'mosaic' in its name"
        )
    planned = [output, world_file_path(output), prj_path(output), *report_paths(report_dir).values()]
    _refuse_inputs(planned, tiles_dir, options.recursive)
    check_outputs([output, world_file_path(output), prj_path(output)], overwrite=overwrite)
    check_report(report_dir, overwrite=overwrite)
    if options.restore is not None:
        check_restore_dir(options.restore, tiles_dir, overwrite=overwrite)
        if report_dir.is_dir():  # else check_report has checked where it will be made
            check_outputs([report_dir / RESTORE_LIST], overwrite=overwrite)
    check_before_reading(tiles_dir, options)
    # The run owns its output until it ends: a second run on it refuses now
    # rather than racing this one.
    with output_lock(output):
        remove_stale_partials(planned)
        return _solve(tiles_dir, output, options, report_dir, overwrite, progress)


def _solve(tiles_dir, output, options, report_dir, overwrite, progress):
    """The body of :func:`solve`, holding the output's lock."""
    timings, notes = {}, []
    started = datetime.now(timezone.utc).isoformat(timespec="seconds")
    t0 = time.perf_counter()
    tileset = read_tileset(tiles_dir, recursive=options.recursive, exclude=[output], progress=progress,
                           max_tile_pixels=options.max_tile_pixels)
    if len(tileset) < 2:
        raise TileSetError(f"{str(tiles_dir)!r} holds a single tile; there is nothing to put together")
    if tileset.blank.all():
        raise TileSetError(f"every tile in {str(tiles_dir)!r} is blank (constant or all nodata); "
                           "no seam can be matched: " + NO_EVIDENCE_ADVICE)
    if tileset.structureless().all() and not (options.grid and options.pins):
        raise TileSetError(f"no tile in {str(tiles_dir)!r} shows ground detail (all are constant or noise-like, "
                           "as open water or haze): no seam can be matched: " + NO_EVIDENCE_ADVICE)
    tileset, found = with_overlap(tileset, given=options.overlap, seed=options.seed)
    if found.overlap:
        notes.append(found.describe())
    tileset = read_names(tileset, options)
    _check_crs_alone(options.georef, tileset)
    if tileset.skipped:
        notes.append(skipped_note(tileset.skipped))
    notes.extend(_duplicate_notes(tileset))
    timings["read"] = time.perf_counter() - t0

    t0 = time.perf_counter()
    tileset, (placement, search, table, pins) = place_named(tileset, options, progress=progress)
    named = tileset.tile_names
    if named:
        notes.append(named.describe(len(tileset)))
        assumed = ["one row of z/x/y names survived, so the seams cannot tell whether rows count from the top "
                   "(XYZ) or the bottom (TMS): XYZ assumed; give --tile-scheme tms if this cache counts rows from "
                   "the bottom"] if named.rows_from == "assumed" else []
        for msg in assumed + list(named.notes):
            warnings.warn(msg, UserWarning, stacklevel=2)
            notes.append(msg)
        named.offset(placement)  # the named tiles sit as their names say, or this says which do not
    elif named is not None and named.notes:
        notes.extend(named.notes)
    sides = side_confidence(placement, table, search.agreement)
    sides[tileset.blank] = np.where(np.isnan(sides[tileset.blank]), np.nan, 0.0)  # blank tiles: no evidence
    verdict = run_verdict(placement, table, threshold=options.confidence_threshold,
                          grid_given=options.grid is not None, shape_evidence=search.shape_evidence)
    review = review_labels(placement, tileset.edges, options.confidence_threshold)
    timings["place"] = time.perf_counter() - t0

    georef, fit = _georeference(options, placement, tileset)
    if fit is not None and fit.outliers:
        unit = map_units(georef.crs)
        names = ", ".join(f"{fit.label(i)}, {fit.residuals_map[i]:.3g} {unit}" for i in fit.outliers)
        msg = f"control point(s) {names} lie more than 3 x the RMSE of the others off the fit; check them"
        warnings.warn(msg, UserWarning, stacklevel=2)
        notes.append(msg)
    if georef is None:
        georef = PIXEL_SPACE
        msg = ("no georeferencing found: the mosaic is in pixel space; add --bounds, --origin or --gcps with "
               "--crs, or keep one tile's GeoTIFF tags or world file")
        warnings.warn(msg, NotGeoreferencedWarning, stacklevel=2)
        notes.append(msg)
    if tileset.blank.any():
        notes.append(f"{int(tileset.blank.sum())} blank tile(s) placed with no evidence; check them")
    doubtful = _doubtful_anchors(placement, tileset, pins, options.confidence_threshold)
    by_name = [n for n in doubtful if named and tileset.names.index(n) in named.cells]
    doubtful = [n for n in doubtful if n not in by_name]
    for tiles, why in (
            (by_name, "sit where their names put them, but their edges do not fit there (confidence below the "
                      "threshold): check that their names are right; a renamed tile moves the tiles around it"),
            (doubtful, "sit where their surviving georeferencing puts them, but their edges do not fit there "
                       "(confidence below the threshold): check their GeoTIFF tags or world files; one tile off "
                       "moves the whole mosaic")):
        if tiles:
            msg = f"{'tile' if tiles is by_name else 'anchor tile'}(s) {', '.join(tiles)} {why}"
            warnings.warn(msg, UserWarning, stacklevel=2)
            notes.append(msg)
    ev = search.shape_evidence
    if ev is not None and ev["thin"]:
        r, c = ev["runner_up"]
        msg = (f"the {placement.shape[0]}x{placement.shape[1]} grid was inferred with a thin margin over "
               f"{r}x{c} ({ev['margin']:.1%} ahead on {ev['margin_of']}); give --grid ROWSxCOLS if you know it")
        warnings.warn(msg, UserWarning, stacklevel=2)
        notes.append(msg)

    # The mosaic, world file and report land as one set: each is written
    # under a temporary name, and all are renamed once every one is
    # complete. A failure leaves the old set (with --overwrite) intact and
    # nothing of this run behind.
    report_existed = report_dir.exists()
    try:
        with staged(overwrite=overwrite):
            t0 = time.perf_counter()
            outputs = write_mosaic(tileset, placement, georef, output, overwrite=overwrite, cog=options.cog,
                                   progress=progress)
            timings["write"] = time.perf_counter() - t0
            outputs.update({f"report_{k}": v for k, v in report_paths(report_dir).items()})
            result = SolveResult(placement, georef, tileset, search, options, dict(outputs), timings, tuple(notes),
                                 fit, sides, frozenset(pins.tiles), table.measure, verdict, review, started, found)
            write_report(result, report_dir, overwrite=overwrite)
            if options.restore is not None:
                restored = restore_tiles(tileset, placement, options.restore, threshold=options.confidence_threshold,
                                         overwrite=overwrite)
                outputs["restore_list"] = write_restore_list(restored, report_dir / RESTORE_LIST,
                                                             overwrite=overwrite)
                outputs["restore"] = Path(options.restore)
                result = replace(result, outputs=dict(outputs), restored=tuple(restored))
    except BaseException:
        if not report_existed and report_dir.is_dir() and not any(report_dir.iterdir()):
            report_dir.rmdir()
        raise
    return result
