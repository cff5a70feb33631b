"""The ``stitch`` command: a thin layer over the library.

Each command parses its options, makes one library call and turns the
library's :class:`~stitch.errors.StitchError` into exit code 1 with one line;
usage errors exit 2; tracebacks only with ``-v``.
"""

from __future__ import annotations

import json
import logging
import signal
import sys
import threading
import warnings
from contextlib import contextmanager
from pathlib import Path
from typing import Annotated, Optional

import typer

from . import __version__
from .errors import StitchError
from .measures import DEFAULT_MEASURE
from .names import DEFAULT_TILE_MATRIX_SET, SCHEMES
from .orientation import TURN_MODES
from .tiles import MAX_TILE_PIXELS


class _Command(typer.core.TyperCommand):
    """A command whose usage line names its arguments as the help lists them
    (``stitch solve [OPTIONS] TILES_DIR``), without typer's braces."""

    def collect_usage_pieces(self, ctx):
        pieces = [self.options_metavar] if self.options_metavar else []
        for param in self.get_params(ctx):
            if param.param_type_name == "argument":
                pieces.append(param.metavar or param.name.upper())
        return pieces


# Plain help (rich_markup_mode=None): typer's boxed help labels every flag
# "<bool>", and a flag takes no value.
app = typer.Typer(
    name="stitch",
    help="Put raster tiles that lost their coordinates back in place and write a georeferenced mosaic.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
    context_settings={"help_option_names": ["-h", "--help"]},
)

log = logging.getLogger("stitch")

#: Exit code of ``solve --fail-if-doubtful`` when the verdict is doubtful.
DOUBTFUL_EXIT = 3

# Options shared by several commands, defined once.
Verbose = Annotated[int, typer.Option("--verbose", "-v", count=True, show_default=False, help="More detail; -vv for debug logging and tracebacks.")]
Quiet = Annotated[bool, typer.Option("--quiet", "-q", help="Only errors (and, after a solve, the caution).")]
Overwrite = Annotated[bool, typer.Option("--overwrite", help="Replace existing outputs.")]
Seed = Annotated[int, typer.Option("--seed", metavar="N", help="Seed of every random choice; the same seed gives the same result.")]


class Terminated(KeyboardInterrupt):
    """SIGTERM or SIGHUP (a scheduler, ``kill``, a closed terminal), raised
    like Ctrl-C so that every clean-up path runs; exits with 128 + signal."""

    def __init__(self, signum):
        super().__init__(signum)
        self.signum = signum
        self.name = signal.Signals(signum).name


class _LowerLevelFormatter(logging.Formatter):
    """``warning: ...`` like the run's other messages, not ``WARNING: ...``."""

    def format(self, record):
        record = logging.makeLogRecord(record.__dict__)
        record.levelname = record.levelname.lower()
        return super().format(record)


def _setup_logging(verbose, quiet):
    level = logging.ERROR if quiet else (logging.WARNING, logging.INFO, logging.DEBUG)[min(verbose, 2)]
    logging.basicConfig(level=level, stream=sys.stderr, force=True)
    for handler in logging.getLogger().handlers:
        handler.setFormatter(_LowerLevelFormatter("%(levelname)s: %(message)s"))
    logging.getLogger("rasterio").setLevel(max(level, logging.WARNING))
    logging.getLogger("numba").setLevel(logging.WARNING)


@contextmanager
def _errors(verbose, quiet=False):
    """Turn library errors into one line and exit code 1."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        warnings.filterwarnings("ignore", module="rasterio")
        warnings.filterwarnings("ignore", category=DeprecationWarning)
        try:
            yield
        except StitchError as exc:
            if verbose:
                raise
            typer.echo(f"error: {exc}", err=True)
            raise typer.Exit(code=1) from None
        except (KeyboardInterrupt, SystemError) as exc:
            # Ctrl-C while a compiled kernel runs surfaces when it returns, as
            # a SystemError raised while the KeyboardInterrupt was pending.
            cause = exc.__context__ or exc.__cause__ if isinstance(exc, SystemError) else exc
            if isinstance(exc, SystemError) and (verbose or not isinstance(cause, KeyboardInterrupt)):
                raise
            if isinstance(cause, Terminated):
                typer.echo(f"terminated by {cause.name}: no partial output was left", err=True)
                raise typer.Exit(code=128 + cause.signum) from None
            typer.echo("interrupted: no partial output was left", err=True)
            raise typer.Exit(code=130) from None
        finally:
            if not quiet:
                for w in caught:
                    if issubclass(w.category, UserWarning) and w.filename and "stitch" in w.filename:
                        typer.echo(f"warning: {w.message}", err=True)


def _parse_grid(value):
    if value is None:
        return None
    try:
        r, c = (int(v) for v in value.lower().split("x"))
    except ValueError:
        raise typer.BadParameter(f"expected ROWSxCOLS such as 8x10, not {value!r}", param_hint="--grid") from None
    if r < 1 or c < 1:
        raise typer.BadParameter(f"rows and columns must be at least 1, not {value!r}", param_hint="--grid")
    return r, c


@contextmanager
def _progress_bars(enabled):
    """rich progress bars on stderr, one per stage; a no-op callback when disabled."""
    if not enabled:
        yield None
        return
    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    labels = {"read": "reading tiles", "seams": "scoring seams", "search": "searching", "write": "writing mosaic"}
    with Progress(TextColumn("{task.description:<15}"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(),
                  TextColumn("{task.fields[detail]}"), console=Console(stderr=True), transient=False) as bars:
        tasks = {}

        def update(stage, done, total, detail=""):
            if stage not in tasks:
                tasks[stage] = bars.add_task(labels.get(stage, stage), total=total, detail="")
            bars.update(tasks[stage], completed=done, total=total, detail=detail)

        yield update


@contextmanager
def _deferred_interrupt(progress):
    """A progress callback at which Ctrl-C takes effect.

    A Ctrl-C that lands inside compiled code or a C callback can be lost or
    turned into another error; here the first one is only recorded, and the
    next progress report (every tile, seam chunk and generation) raises
    KeyboardInterrupt where the library can clean up. A second Ctrl-C stops
    at once. SIGTERM and SIGHUP (a scheduler, ``kill``, a closed terminal)
    are taken the same way and raise :class:`Terminated`. Outside the main
    thread nothing changes, nor for a signal that is ignored (``nohup``) or
    handled by someone else.
    """
    if threading.current_thread() is not threading.main_thread():
        yield progress
        return
    hits = []

    def interrupt():
        return KeyboardInterrupt() if hits[0] == signal.SIGINT else Terminated(hits[0])

    def on_signal(signum, frame):
        hits.append(signum)
        if len(hits) > 1:
            raise interrupt()

    def checked(stage, done, total, detail=""):
        if hits:
            raise interrupt()
        if progress is not None:
            progress(stage, done, total, detail)

    defaults = {signal.SIGINT: signal.default_int_handler}
    previous = {}
    for name in ("SIGINT", "SIGTERM", "SIGHUP"):
        signum = getattr(signal, name, None)
        if signum is not None and signal.getsignal(signum) is defaults.get(signum, signal.SIG_DFL):
            previous[signum] = signal.signal(signum, on_signal)
    try:
        yield checked
    finally:
        for signum, handler in previous.items():
            signal.signal(signum, handler)


def _parse_pin(value):
    name, sep, cell = value.rpartition("=")
    try:
        row, col = (int(v) for v in cell.split(","))
    except ValueError:
        raise typer.BadParameter(f"expected NAME=ROW,COL such as tile_0007.tif=0,3, not {value!r}",
                                 param_hint="--pin") from None
    if not sep or not name or row < 0 or col < 0:
        raise typer.BadParameter(f"expected NAME=ROW,COL with ROW, COL >= 0, not {value!r}", param_hint="--pin")
    return name, row, col


def _check_choice(value, choices, name):
    if value not in choices:
        raise typer.BadParameter(f"must be one of {', '.join(map(str, choices))}, not {value}", param_hint=name)
    return value


def _version(value):
    if value:
        typer.echo(f"stitch {__version__}")
        raise typer.Exit()


@app.callback()
def main_callback(
    version: Annotated[Optional[bool], typer.Option("--version", callback=_version, is_eager=True,
                                                    help="Show the version and exit.")] = None,
):
    """Rebuild georeferenced mosaics from tiles by how their edges continue."""


_SCHEME_HELP = (f"Which surviving tile names to trust: {', '.join(SCHEMES)}. auto reads z/x/y paths (XYZ or TMS, "
                "told by the seams), quadkeys and <base>_<row>_<col> names; named tiles are pinned, and z/x/y "
                "names and quadkeys also georeference the mosaic.")
_TMS_HELP = ("OGC tile matrix set of z/x/y names and quadkeys (OGC 17-083r4 identifier, e.g. WorldCRS84Quad).")


def _measure_help():
    from .seams import measure_names

    return (f"Seam measure: {', '.join(measure_names())}. auto: mgc or prediction, whichever gives more "
            f"best-buddy seams (mgc alone where prediction would take over ~5 s).")


def _grid_line(shape, ev):
    """One line on where the grid came from and how sure it is."""
    grid = f"{shape[0]}x{shape[1]} grid"
    if ev is None:
        return f"{grid} (given)"
    if ev.get("source") == "partial edge tiles":
        return f"{grid} fixed by the {ev['partial_tiles']} partial edge tiles (last column and row)"
    runner = (f"runner-up {ev['runner_up'][0]}x{ev['runner_up'][1]}, margin {ev['margin']:.1%} on {ev['margin_of']}"
              + (", thin: give --grid if you know it" if ev["thin"] else "")
              if ev["runner_up"] else f"{ev['shapes_tried']} grid(s) tried, none a real alternative")
    seg = ev["trusted_segment"]
    held = (f"; largest trusted segment {seg['tiles']} tiles over {seg['box'][0]}x{seg['box'][1]} cells"
            if seg else "")
    return f"{grid} inferred ({runner}{held})"


@app.command(cls=_Command, short_help="Place the tiles and write a georeferenced mosaic.")
def solve(
    tiles_dir: Annotated[Path, typer.Argument(metavar="TILES_DIR", help="Folder of GeoTIFF, PNG or JPEG tiles of one size.")],
    output: Annotated[Path, typer.Option("--output", "-o", metavar="OUT.tif", help="Mosaic GeoTIFF to write.")],
    grid: Annotated[Optional[str], typer.Option(metavar="ROWSxCOLS", help="Grid shape, e.g. 8x10; inferred when not given.")] = None,
    rotations: Annotated[int, typer.Option(metavar="0|180|90", help="Turns a tile may need: 0 none, 180 half turns, 90 any quarter turn (square tiles).")] = 0,
    mirrored: Annotated[bool, typer.Option("--mirrored", help="Tiles may also be mirrored left-right.")] = False,
    seam: Annotated[str, typer.Option(metavar="NAME", help=_measure_help())] = DEFAULT_MEASURE,
    search: Annotated[str, typer.Option(metavar="NAME", help="Search strategy: evolution or greedy (or one a plugin adds).")] = "evolution",
    population: Annotated[int, typer.Option(metavar="N", help="Placements per generation (0: by tile count).")] = 0,
    generations: Annotated[int, typer.Option(metavar="N", help="Most generations (0: by tile count).")] = 0,
    time_limit: Annotated[Optional[float], typer.Option(
        metavar="SECONDS", help="Seconds the whole placement search may take (grid inference included); "
             "the best placement found by then is used.")] = None,
    bounds: Annotated[Optional[tuple[float, float, float, float]], typer.Option(
        metavar="W S E N", help="Mosaic extent: west south east north, four numbers in --crs units.")] = None,
    origin: Annotated[Optional[tuple[float, float]], typer.Option(
        metavar="X Y", help="Map x and y of the mosaic's upper-left corner, in --crs units (with --pixel-size).")] = None,
    pixel_size: Annotated[Optional[float], typer.Option(metavar="SIZE", help="Ground size of a pixel in --crs units (with --origin).")] = None,
    pixel_size_y: Annotated[Optional[float], typer.Option(metavar="SIZE", help="Pixel height when it differs from --pixel-size.")] = None,
    gcps: Annotated[Optional[Path], typer.Option(
        metavar="FILE.csv", help="Ground control CSV with columns tile,col,row,x,y in any order (col, row: GDAL's "
                                 "pixel/line inside the tile; x, y in --crs).")] = None,
    similarity: Annotated[bool, typer.Option("--similarity", help="Fit control points with 4 parameters, not 6.")] = False,
    crs: Annotated[Optional[str], typer.Option(metavar="CRS", help="CRS of --bounds/--origin/--gcps, e.g. EPSG:32633.")] = None,
    pin: Annotated[Optional[list[str]], typer.Option(
        metavar="NAME=ROW,COL", help="Known cell of a tile, NAME=ROW,COL (row 0 at the top); repeat for more. Pinned tiles never move.")] = None,
    report: Annotated[Optional[Path], typer.Option(metavar="DIR", help="Report folder (default: OUT's stem + _report).")] = None,
    recursive: Annotated[bool, typer.Option("--recursive", help="Also read tiles in sub-folders.")] = False,
    cog: Annotated[bool, typer.Option("--cog", help="Write a Cloud Optimized GeoTIFF (GDAL's COG driver).")] = False,
    max_tile_pixels: Annotated[int, typer.Option(metavar="N", help="Refuse tiles whose header claims more pixels.")] = MAX_TILE_PIXELS,
    overlap: Annotated[Optional[int], typer.Option(metavar="PX", help="Pixels each tile repeats of its neighbours; found in the pixels when not given, 0 for none.")] = None,
    tile_scheme: Annotated[str, typer.Option(metavar="SCHEME", help=_SCHEME_HELP)] = "auto",
    tile_matrix_set: Annotated[str, typer.Option(metavar="ID", help=_TMS_HELP)] = DEFAULT_TILE_MATRIX_SET,
    restore: Annotated[Optional[Path], typer.Option(
        metavar="DIR", help="Also write the tiles into DIR under their recovered names (the z/x/y tree, quadkeys or "
                            "<base>_<row>_<col>), bytes unchanged; the report's restore.csv lists the flagged ones.")] = None,
    fail_if_doubtful: Annotated[bool, typer.Option(
        "--fail-if-doubtful", help=f"Exit with code {DOUBTFUL_EXIT} when the run's verdict is doubtful "
                                   "(the outputs are still written), for scripts.")] = False,
    seed: Seed = 0,
    overwrite: Overwrite = False,
    verbose: Verbose = 0,
    quiet: Quiet = False,
):
    """Put every tile back in its cell and write a georeferenced mosaic, world file and report."""
    from .georef import GeorefSpec, describe_extent
    from .mosaic import CAUTION
    from .pipeline import SolveOptions
    from .pipeline import solve as run
    from .search import SearchSettings, kernels_compiled
    from .tiles import skipped_note

    _setup_logging(verbose, quiet)
    _check_choice(rotations, sorted(TURN_MODES), "--rotations")
    shape = _parse_grid(grid)
    pins = tuple(_parse_pin(p) for p in pin or ())
    with _errors(verbose, quiet):
        size = None if pixel_size is None else (pixel_size, pixel_size_y or pixel_size)
        options = SolveOptions(
            grid=shape, rotations=rotations, mirrored=mirrored, measure=seam, seed=seed, recursive=recursive, pins=pins, cog=cog,
            max_tile_pixels=max_tile_pixels, overlap=overlap, tile_scheme=tile_scheme,
            tile_matrix_set=tile_matrix_set, restore=restore,
            search=SearchSettings(strategy=search, population=population, generations=generations,
                                  time_limit=time_limit),
            georef=GeorefSpec(bounds=bounds, origin=origin, pixel_size=size, crs=crs,
                              gcps=None if gcps is None else str(gcps), similarity=similarity),
        )
        if not quiet and sys.stderr.isatty() and not kernels_compiled():
            typer.echo("first run: compiling the search loops (about 15 s, once; later runs reuse them)", err=True)
        with _progress_bars(not quiet and sys.stderr.isatty()) as bars, _deferred_interrupt(bars) as progress:
            result = run(tiles_dir, output, options=options, report_dir=report, overwrite=overwrite,
                         progress=progress)
    exit_code = DOUBTFUL_EXIT if fail_if_doubtful and result.verdict.level == "doubtful" else 0
    if quiet:  # the caution goes with every result, on stderr with the errors
        typer.echo(f"caution: {CAUTION}", err=True)
        raise typer.Exit(code=exit_code)
    p = result.placement
    s = result.search
    how = f"{s.strategy}, {s.generations} generations" if s.strategy == "evolution" else s.strategy
    typer.echo(f"placed {int(p.placed.sum())} tiles in a {p.shape[0]}x{p.shape[1]} grid "
               f"({how}, seams by {result.measure}, seed {seed})")
    if s.shape_evidence is not None:
        typer.echo(_grid_line(p.shape, s.shape_evidence))
    if result.overlap is not None and result.overlap.overlap:
        typer.echo(f"{result.overlap.describe()}; shared strips merged once, from the tile right of or below")
    named = result.tileset.tile_names
    if named:
        typer.echo(named.describe(len(result.tileset)))
    g = result.georeference
    typer.echo(f"georeference: {g.source}" + (f" ({g.crs.to_string()})" if g.crs else ""))
    f = result.facts
    typer.echo(f"extent: {describe_extent(f)}")
    if result.control is not None:
        fit, unit = result.control, f['units']
        for i, ((dx, dy), m, px) in enumerate(zip(fit.residuals_xy, fit.residuals_map, fit.residuals_px)):
            typer.echo(f"  control point {fit.label(i)}: dX {dx:+.4g}, dY {dy:+.4g}, residual {m:.4g} {unit} "
                       f"({px:.3g} px)")
    for path in result.outputs.values():
        typer.echo(f"wrote {path}")
    if result.tileset.skipped:
        typer.echo(f"note: {skipped_note(result.tileset.skipped)}")
    flagged = result.flagged
    if flagged:
        shown = ", ".join(flagged[:8]) + (f" and {len(flagged) - 8} more" if len(flagged) > 8 else "")
        typer.echo(f"{len(flagged)} tile(s) need a look (confidence < {options.confidence_threshold}): {shown}")
    else:
        typer.echo("no tile flagged for review")
    if result.restored:
        low = sum(t.flagged for t in result.restored)
        anew = sum(not t.copied for t in result.restored)
        typer.echo(f"restored {len(result.restored)} tiles into {restore}" + (f", {anew} turned upright and "
                   "written anew" if anew else "") + (f"; {low} flagged: check them (restore.csv) before replacing "
                   "your cache" if low else ""))
    typer.echo(f"verdict: {result.verdict}")
    typer.echo(f"caution: {CAUTION}")
    raise typer.Exit(code=exit_code)


@app.command(cls=_Command, short_help="Cut a raster into tiles with an answer key.")
def cut(
    raster: Annotated[Path, typer.Argument(metavar="RASTER", help="Raster to cut (any GDAL-readable file).")],
    output: Annotated[Path, typer.Option("--output", "-o", metavar="DIR", help="Folder for the tiles.")],
    tile_size: Annotated[str, typer.Option(metavar="PX|WxH", help="Tile size in pixels: 256, or WIDTHxHEIGHT such as 256x128.")],
    shuffle: Annotated[bool, typer.Option("--shuffle", help="Position-free tile names in random order.")] = False,
    strip_georef: Annotated[bool, typer.Option("--strip-georef", help="Drop georeferencing from the tiles.")] = False,
    keep_georef: Annotated[int, typer.Option(metavar="N", help="With --strip-georef: this many tiles (random, upright) keep it.")] = 0,
    rotations: Annotated[int, typer.Option(metavar="0|180|90", help="Store tiles turned at random: 0, 180 (half turns) or 90 (quarter turns).")] = 0,
    mirrored: Annotated[bool, typer.Option("--mirrored", help="Store tiles mirrored left-right at random.")] = False,
    tile_format: Annotated[str, typer.Option("--format", metavar="tif|png|jpg", help="Tile format (jpg: 8-bit, quality 75).")] = "tif",
    key: Annotated[Optional[Path], typer.Option(metavar="FILE.csv", help="Answer key CSV (default: DIR/answer_key.csv).")] = None,
    skip_empty: Annotated[bool, typer.Option("--skip-empty", help="Do not write tiles that hold only nodata, as tilers skip them.")] = False,
    partial: Annotated[bool, typer.Option("--partial", help="Keep the raster's remainder as narrower and shorter tiles in the last column and row.")] = False,
    overlap: Annotated[int, typer.Option(metavar="PX", help="Pixels each tile repeats of its neighbours (tiles start every tile size - PX pixels).")] = 0,
    layout: Annotated[str, typer.Option(
        metavar="LAYOUT", help="Tile names: flat, xyz or tms (a z/x/y cache tree; the raster in EPSG:3857 on the "
                               "tile matrix), quadkey, or rowcol (<stem>_<row>_<col> from 0).")] = "flat",
    keep_names: Annotated[int, typer.Option(metavar="N", help="With --shuffle and a --layout: this many tiles (random) keep their names.")] = 0,
    tile_matrix_set: Annotated[str, typer.Option(metavar="ID", help=_TMS_HELP)] = DEFAULT_TILE_MATRIX_SET,
    seed: Seed = 0,
    overwrite: Overwrite = False,
    verbose: Verbose = 0,
    quiet: Quiet = False,
):
    """Cut a raster into tiles with an answer key, to measure stitch on your own data."""
    from .puzzles import cut_raster, parse_tile_size

    _setup_logging(verbose, quiet)
    _check_choice(rotations, sorted(TURN_MODES), "--rotations")
    with _errors(verbose, quiet):
        result = cut_raster(raster, output, parse_tile_size(tile_size), shuffle=shuffle, strip_georef=strip_georef,
                            keep_georef=keep_georef, rotations=rotations, mirrored=mirrored, fmt=tile_format, key_path=key,
                            seed=seed, overwrite=overwrite, skip_empty=skip_empty, partial=partial,
                            overlap=overlap, layout=layout, keep_names=keep_names,
                            tile_matrix_set_id=tile_matrix_set)
    if not quiet:
        k = result.key
        skipped = k.shape[0] * k.shape[1] - len(k.names)
        typer.echo(f"wrote {len(k.names)} tiles ({k.shape[0]}x{k.shape[1]}"
                   + (f", {skipped} holding only nodata skipped" if skipped else "") + f") to {result.folder}")
        if result.georeferenced and strip_georef:
            typer.echo(f"kept georeferencing on {', '.join(result.georeferenced)}")
        typer.echo(f"wrote answer key {result.key_path}")
        cols, rows = result.dropped
        if cols or rows:
            typer.echo(f"left out the raster's last {cols} column(s) and {rows} row(s), which fill no whole tile; "
                       "--partial keeps them as narrower and shorter edge tiles")


@app.command(cls=_Command, short_help="Compare a placement with an answer key.")
def score(
    placement: Annotated[Path, typer.Argument(metavar="PLACEMENT.csv", help="placement.csv written by solve.")],
    key: Annotated[Path, typer.Argument(metavar="KEY.csv", help="Answer key in the same format (from cut).")],
    frame: Annotated[str, typer.Option(metavar="auto|fixed|free", help="Forgive a global turn of the whole placement: auto (when tiles were turned), fixed (never) or free (always).")] = "auto",
    as_json: Annotated[bool, typer.Option("--json", help="Print JSON for scripts.")] = False,
    verbose: Verbose = 0,
):
    """Compare a placement with an answer key: direct, neighbour, perfect."""
    from .layout import read_placement_csv
    from .puzzles import score_placement

    _setup_logging(verbose, False)
    _check_choice(frame, ("auto", "fixed", "free"), "--frame")
    with _errors(verbose):
        scores = score_placement(read_placement_csv(placement), read_placement_csv(key), frame=frame)
    if as_json:
        typer.echo(json.dumps(scores.as_dict()))
        return
    typer.echo(f"direct comparison:     {scores.direct:.4f}  ({scores.tiles} tiles, cells as they stand)")
    typer.echo(f"shifted direct:        {scores.shifted_direct:.4f}  (after the best global shift)")
    typer.echo(f"neighbour comparison:  {scores.neighbor:.4f}  ({scores.adjacencies} adjacencies)")
    typer.echo(f"perfect reconstruction: {'yes' if scores.perfect else 'no'}")
    if scores.missing:
        typer.echo(f"missing from the placement: {scores.missing} tile(s)")


@app.command(cls=_Command, short_help="Check a tile folder before solving.")
def inspect(
    tiles_dir: Annotated[Path, typer.Argument(metavar="TILES_DIR", help="Folder of tiles to check.")],
    recursive: Annotated[bool, typer.Option("--recursive", help="Also read tiles in sub-folders.")] = False,
    grid: Annotated[Optional[str], typer.Option(metavar="ROWSxCOLS", help="Grid you would give solve.")] = None,
    rotations: Annotated[int, typer.Option(metavar="0|180|90", help="Turns a tile may need, as for solve.")] = 0,
    mirrored: Annotated[bool, typer.Option("--mirrored", help="Tiles may also be mirrored, as for solve.")] = False,
    overlap: Annotated[Optional[int], typer.Option(metavar="PX", help="Overlap you would give solve; found in the pixels when not given.")] = None,
    tile_scheme: Annotated[str, typer.Option(metavar="SCHEME", help=_SCHEME_HELP)] = "auto",
    tile_matrix_set: Annotated[str, typer.Option(metavar="ID", help=_TMS_HELP)] = DEFAULT_TILE_MATRIX_SET,
    infer: Annotated[bool, typer.Option(
        "--infer", help="Also place the tiles as solve would (nothing written; takes about as long) and report "
                        "the grid found, how sure its inference is and the run's verdict.")] = False,
    as_json: Annotated[bool, typer.Option("--json", help="Print JSON for scripts.")] = False,
    seed: Seed = 0,
    verbose: Verbose = 0,
):
    """Check a tile folder before solving (reads headers and edges; exit 1 if solve would fail)."""
    from .preflight import inspect_tiles

    _setup_logging(verbose, False)
    _check_choice(rotations, sorted(TURN_MODES), "--rotations")
    shape = _parse_grid(grid)
    with _errors(verbose):
        found = inspect_tiles(tiles_dir, recursive=recursive, rotations=rotations, mirrored=mirrored, grid=shape,
                              infer=infer, seed=seed, overlap=overlap, tile_scheme=tile_scheme,
                              tile_matrix_set=tile_matrix_set)
    if as_json:
        typer.echo(json.dumps(found.as_dict(), indent=2))
    else:
        if found.tiles:
            nodata = "no nodata declared" if found.nodata is None else f"nodata {found.nodata:g}"
            typer.echo(f"tiles: {found.tiles} of {found.tile_size[0]}x{found.tile_size[1]} px, {found.bands} band(s), "
                       f"{found.dtype}, {nodata}")
            typer.echo(f"blank tiles: {len(found.blank)}" + (f" ({', '.join(found.blank[:5])})" if found.blank else ""))
            typer.echo(f"groups of duplicate tiles: {len(found.duplicates)}")
            if found.overlap is not None:
                typer.echo(found.overlap["description"])
            if found.tile_names is not None:
                typer.echo(found.tile_names["description"])
            facts = []
            if found.anchors_agree is not None:
                facts.append("they agree" if found.anchors_agree else "they DISAGREE")
            if found.georeferenced:
                facts.append(found.anchor_crs or "no CRS: give it with --crs")
                px = found.anchor_pixel_size
                facts.append((f"pixel {px[0]:.6g} x {px[1]:.6g}" if px[0] != px[1] else f"pixel {px[0]:.6g}")
                             + f" {found.anchor_units}")
            typer.echo(f"georeferenced tiles: {len(found.georeferenced)}" + (f" ({'; '.join(facts)})" if facts else ""))
            typer.echo(f"grid shapes that hold them: {', '.join(found.grid_shapes[:12])}")
            turns = {0: "upright", 180: "half turns", 90: "quarter turns"}[rotations] + (", mirrored" if mirrored else "")
            cold = "" if found.kernels_compiled else " plus ~15 s once, to compile the search loops"
            typer.echo(f"estimated solve: ~{found.estimated_seconds:.0f} s{cold}, ~{found.estimated_memory_mb:.0f} MB "
                       f"({turns})")
        if found.inferred_grid is not None:
            typer.echo(f"placed as solve would, in {found.seconds:.0f} s: {_grid_line(found.inferred_grid, found.grid_evidence)}")
            v = found.verdict
            typer.echo(f"verdict: {v['level']}: {v['confident_tiles']:.0%} of the tiles rest on confident seams, "
                       f"{v['buddy_seams']:.0%} of the seams join best buddies")
        for note in found.notes:
            typer.echo(f"note: {note}")
        for problem in found.problems:
            typer.echo(f"problem: {problem}", err=True)
        typer.echo("ready to solve" if found.ok else "solve would fail; fix the problems above")
    if not found.ok:
        raise typer.Exit(code=1)


@app.command(cls=_Command, short_help="List seam measures and search strategies.")
def plugins():
    """List the seam measures and search strategies installed (built in and by plugins)."""
    from .search import available_searches
    from .seams import measure_names

    typer.echo(f"seam measures (--seam): {', '.join(measure_names())}")
    typer.echo(f"search strategies (--search): {', '.join(available_searches())}")


def main():
    """Console-script entry point."""
    app()
