"""Bad input never costs data: the error matrix, atomic outputs, interrupts, fuzzed parsers.

Every row runs the CLI as a user would and checks the exact exit code, a
one-line message naming the file or option, no traceback, no partial output,
and every input file byte-identical afterwards.
"""

import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import rasterio
from hypothesis import given, settings
from hypothesis import strategies as st
from typer.testing import CliRunner

from conftest import checksums, skimage_image, write_raster
from stitch.cli import app
from stitch.errors import StitchError
from stitch.mosaic import CAUTION
from stitch.puzzles import cut_raster

runner = CliRunner()


def _run(args, inputs):
    before = checksums(inputs)
    r = runner.invoke(app, [str(a) for a in args])
    assert checksums(inputs) == before, "an input file changed"
    assert "Traceback" not in r.output
    return r


def _last_line(r):
    lines = [ln for ln in r.output.strip().splitlines() if ln.startswith("error:")]
    assert len(lines) == 1, r.output
    return lines[0]


def _tiles(folder, n=4, size=28, dtype=None):
    folder.mkdir(parents=True, exist_ok=True)
    img = skimage_image("coffee")
    for k in range(n):
        t = img[:, 100:100 + size, 100 + size * k:100 + size * (k + 1)]
        write_raster(folder / f"t{k}.tif", t.astype(dtype) if dtype else t)
    return folder


def _no_outputs(folder):
    left = [p.name for p in Path(folder).iterdir() if p.name.startswith(".") or p.suffix in (".tif", ".tfw")]
    return not [n for n in left if "partial" in n or n.startswith("m.")]


CASES = {}


def case(name):
    def deco(fn):
        CASES[name] = fn
        return fn
    return deco


def _with_gcps(tmp, text):
    """A tile folder and the options that bring in a control file holding ``text``."""
    f = tmp / "gcp.csv"
    f.write_text(text)
    return _tiles(tmp / "in"), ["--gcps", f, "--crs", "EPSG:32630"]


@case("empty folder")
def _(tmp):
    (tmp / "in").mkdir()
    return tmp / "in", [], 1, "no tiles in"


@case("non-raster files only")
def _(tmp):
    d = tmp / "in"
    d.mkdir()
    (d / "notes.docx").write_text("x")
    (d / "readme.pdf").write_text("x")
    return d, [], 1, "no tiles in"


@case("truncated TIFF")
def _(tmp):
    d = _tiles(tmp / "in")
    data = (d / "t1.tif").read_bytes()
    (d / "t1.tif").write_bytes(data[: len(data) // 3])
    return d, [], 1, "t1.tif"


@case("file with a raster ending that is not a raster")
def _(tmp):
    d = _tiles(tmp / "in")
    (d / "fake.png").write_text("this is not a PNG")
    return d, [], 1, "fake.png"


@case("mixed tile sizes")
def _(tmp):
    d = _tiles(tmp / "in")
    write_raster(d / "small.tif", skimage_image("coffee")[:, :20, :20])
    return d, [], 1, "small.tif (20x20 px"


@case("mixed band counts")
def _(tmp):
    d = _tiles(tmp / "in")
    write_raster(d / "gray.tif", skimage_image("camera")[:, :28, :28])
    return d, [], 1, "gray.tif (28x28 px, 1 band"


@case("mixed data types")
def _(tmp):
    d = _tiles(tmp / "in")
    write_raster(d / "wide.tif", skimage_image("coffee")[:, :28, :28].astype(np.uint16))
    return d, [], 1, "wide.tif (28x28 px, 3 bands, uint16)"


@case("a single tile")
def _(tmp):
    return _tiles(tmp / "in", n=1), [], 1, "single tile"


@case("all tiles blank")
def _(tmp):
    d = tmp / "in"
    d.mkdir()
    for k in range(4):
        write_raster(d / f"b{k}.tif", np.zeros((1, 16, 16), np.uint8))
    return d, [], 1, "every tile"


@case("all tiles noise-like open water")
def _(tmp):
    # Open water as a sensor sees it: one level plus independent noise, no
    # ground detail on any tile.
    d = tmp / "in"
    d.mkdir()
    rng = np.random.default_rng(3)
    for k in range(6):
        write_raster(d / f"w{k}.tif", np.clip(40 + rng.normal(0, 2, (3, 24, 24)), 0, 255).astype(np.uint8))
    return d, [], 1, "shows ground detail"


@case("header claims enormous dimensions")
def _(tmp):
    d = _tiles(tmp / "in")
    with rasterio.open(d / "huge.tif", "w", driver="GTiff", width=100_000, height=100_000, count=1, dtype="uint8",
                       tiled=True, sparse_ok=True) as dst:
        pass
    return d, [], 1, "huge.tif' claims 100000x100000 pixels"


@case("grid too small")
def _(tmp):
    return _tiles(tmp / "in"), ["--grid", "1x3"], 1, "--grid 1x3 holds 3 tiles"


@case("invalid CRS")
def _(tmp):
    return _tiles(tmp / "in"), ["--bounds", 0, 0, 1, 1, "--crs", "EPSG:0"], 1, "--crs 'EPSG:0'"


@case("control file with a missing column")
def _(tmp):
    return (*_with_gcps(tmp, "tile,col,row,x\nt0.tif,1,1,3\n"), 1, "gcp.csv' lacks column(s) y")


@case("control file with non-numeric values")
def _(tmp):
    return (*_with_gcps(tmp, "tile,col,row,x,y\nt0.tif,1,one,3,4\n"), 1, "gcp.csv line 2")


@case("control point on an unknown tile")
def _(tmp):
    text = "tile,col,row,x,y\nnope.tif,1,1,3,4\nt0.tif,5,5,9,9\n"
    return (*_with_gcps(tmp, text), 1, "names tile 'nope.tif', which is not in the tile folder")


@case("control point outside its tile")
def _(tmp):
    text = "tile,col,row,x,y\nt0.tif,1000.5,3,3,4\nt1.tif,5,5,9,9\nt2.tif,1,9,4,4\n"
    return (*_with_gcps(tmp, text), 1, "lies at column 1000.5, row 3 of tile 't0.tif', outside its 28x28 pixels")


@case("grid far larger than the tile count")
def _(tmp):
    return _tiles(tmp / "in"), ["--grid", "1x1000000"], 1, "more than 10 x the tile count"


@case("pin far outside any grid, no --grid")
def _(tmp):
    return _tiles(tmp / "in"), ["--pin", "t0.tif=50,50"], 1, "the pins span 51x51 cells"


@case("pin names no tile")
def _(tmp):
    return _tiles(tmp / "in"), ["--pin", "nope.tif=0,0"], 1, "--pin names tile 'nope.tif'"


@case("population beyond memory")
def _(tmp):
    return _tiles(tmp / "in"), ["--population", "100000000"], 1, "--population 100000000 needs about"


@case("time limit not a number")
def _(tmp):
    return _tiles(tmp / "in"), ["--time-limit", "nan"], 1, "--time-limit must be a positive number"


@case("CRS as a bare number")
def _(tmp):
    return _tiles(tmp / "in"), ["--bounds", 0, 0, 1, 1, "--crs", "32630"], 1, "write the authority too, as EPSG:32630"


@case("CRS that is no CRS")
def _(tmp):
    return (_tiles(tmp / "in"), ["--bounds", 0, 0, 1, 1, "--crs", "foo"], 1,
            "--crs 'foo' is not a CRS GDAL knows (the WKT could not be parsed); give an EPSG code")


@case("bounds in degrees with a UTM zone")
def _(tmp):
    return (_tiles(tmp / "in"), ["--bounds", -4.01, 52.36, -4.0, 52.37, "--crs", "EPSG:32630"], 1,
            "look like longitude and latitude, but EPSG:32630 is in metres")


@case("a CRS and nothing to place the mosaic with")
def _(tmp):
    return _tiles(tmp / "in"), ["--crs", "EPSG:32630"], 1, "--crs EPSG:32630 alone does not put the mosaic on the map"


@case("control points at one map position")
def _(tmp):
    text = "tile,col,row,x,y\nt0.tif,1,1,500,600\nt0.tif,20,20,500,600\n"
    return (*_with_gcps(tmp, text), 1, "they sit at one map position")


@case("control points with x and y swapped")
def _(tmp):
    # Map x falls with the rows and map y grows with the columns: a mirror.
    text = "tile,col,row,x,y\nt0.tif,0,0,100,200\nt0.tif,0,28,72,200\nt0.tif,28,0,100,228\n"
    return (*_with_gcps(tmp, text), 1, "mirrored mosaic")


@case("a control point repeated with other coordinates")
def _(tmp):
    text = ("tile,col,row,x,y\nt0.tif,0,0,0,0\nt0.tif,28,0,28,0\nt0.tif,0,28,0,-28\n"
            "t0.tif,0,0,5000,5000\n")
    return (*_with_gcps(tmp, text), 1, "the control points contradict each other")


@case("control coordinates beyond any map")
def _(tmp):
    return (*_with_gcps(tmp, "tile,col,row,x,y\nt0.tif,1,1,1e300,4\nt0.tif,5,5,9,9\n"), 1, "beyond any map coordinate")


@case("collinear control points")
def _(tmp):
    return (*_with_gcps(tmp, "tile,col,row,x,y\nt0.tif,1,1,1,1\nt0.tif,2,2,2,2\nt0.tif,3,3,3,3\n"), 1, "one line")


@case("output folder does not exist")
def _(tmp):
    return _tiles(tmp / "in"), {"output": tmp / "missing" / "m.tif"}, 1, "does not exist; create it first"


@case("output folder is a file")
def _(tmp):
    (tmp / "afile").write_text("x")
    return _tiles(tmp / "in"), {"output": tmp / "afile" / "m.tif"}, 1, "does not exist"


@case("output is an existing folder")
def _(tmp):
    (tmp / "out.tif").mkdir()
    return _tiles(tmp / "in"), {"output": tmp / "out.tif"}, 1, "is a folder; give a file name"


@case("output inside the tile folder with a tile-like name")
def _(tmp):
    d = _tiles(tmp / "in")
    return d, {"output": d / "t9.tif"}, 1, "inside the tile folder"


@case("existing output without --overwrite")
def _(tmp):
    (tmp / "m.tif").write_bytes(b"keep me")
    return _tiles(tmp / "in"), [], 1, "won't be replaced without --overwrite"


def _anchored(tmp, **change):
    src = write_raster(tmp / "src.tif", skimage_image("coffee")[:, :112, :112],
                       transform=rasterio.transform.from_origin(431000, 5800000, 0.5, 0.5), crs="EPSG:32630")
    cut = cut_raster(src, tmp / "in", 28, shuffle=True, strip_georef=True, keep_georef=2, seed=1)
    with rasterio.open(tmp / "in" / cut.georeferenced[1], "r+") as dst:
        if "crs" in change:
            dst.crs = change["crs"]
        if "shift" in change:
            dst.transform = dst.transform @ rasterio.Affine.translation(change["shift"], 0)
    (tmp / "src.tif").unlink()
    return tmp / "in"


@case("anchors in different CRSs")
def _(tmp):
    return _anchored(tmp, crs="EPSG:32631"), [], 1, "different CRSs"


@case("anchors on different grids")
def _(tmp):
    return _anchored(tmp, shift=3), [], 1, "not on one tile grid"


@pytest.mark.parametrize("name", list(CASES))
def test_error_matrix(tmp_path, name):
    folder, extra, code, message = CASES[name](tmp_path)
    output = tmp_path / "m.tif"
    if isinstance(extra, dict):
        output, extra = extra["output"], []
    existing = output.read_bytes() if output.is_file() else None
    was_folder = output.is_dir()
    r = _run(["solve", folder, "-o", output, *extra], tmp_path if folder.parent == tmp_path else folder)
    assert r.exit_code == code, r.output
    line = _last_line(r)
    assert message in line, line
    # One clause per reason: no full stop before the advice, no raw GDAL line.
    assert ".;" not in line and ".:" not in line, line
    assert "ERROR 1" not in r.output and "OGR Error" not in r.output, r.output
    if existing is not None:
        assert output.read_bytes() == existing
    elif was_folder:
        assert output.is_dir() and not any(output.iterdir())
    elif output.parent.is_dir():
        assert not output.exists()
    assert not list(tmp_path.rglob(f"*{'stitch-partial'}*"))


@pytest.mark.parametrize("extra", [
    ["--bounds", "0", "0", "1", "1", "--crs", "EPSG:0"],
    ["--gcps", "GCP", "--crs", "EPSG:32630"],
    ["--pin", "nope.tif=0,0"],
    ["--grid", "1x1000000"],
    ["--population", "100000000"],
], ids=["CRS", "control file", "pin", "grid", "population"])
def test_bad_options_are_refused_before_any_pixel_is_read(tmp_path, monkeypatch, extra):
    """A mistake costs seconds, not a whole search: these are refused before
    the tiles are read (reading them here would fail the test)."""
    import stitch.pipeline

    def no_reading(*args, **kwargs):
        raise AssertionError("tiles were read before the options were checked")

    monkeypatch.setattr(stitch.pipeline, "read_tileset", no_reading)
    d = _tiles(tmp_path / "in")
    gcp = tmp_path / "gcp.csv"
    gcp.write_text("tile,col,row,x,y\nt0.tif,99,1,3,4\n")
    r = runner.invoke(app, ["solve", str(d), "-o", str(tmp_path / "m.tif"),
                            *[str(gcp) if a == "GCP" else a for a in extra]])
    assert r.exit_code == 1, r.output
    assert r.output.strip().splitlines()[-1].startswith("error:"), r.output


def test_a_broken_world_file_is_named(tmp_path):
    """GDAL ignores a world file it cannot parse (here five lines, one of
    them text); stitch says which one instead of staying silent."""
    d = _tiles(tmp_path / "in", n=4)
    (d / "t2.tfw").write_text("1\n0\n0\nabc\n5\n")
    r = _run(["solve", d, "-o", tmp_path / "m.tif"], d)
    assert r.exit_code == 0, r.output
    assert "ignoring world file t2.tfw" in r.output


def test_an_upper_case_output_gets_a_world_file_gdal_finds(tmp_path):
    d = _tiles(tmp_path / "in", n=4)
    r = _run(["solve", d, "-o", tmp_path / "UP.TIF", "--origin", "500000", "4100000", "--pixel-size", "1",
              "--crs", "EPSG:32633"], d)
    assert r.exit_code == 0, r.output
    assert (tmp_path / "UP.TFW").is_file()
    import rasterio  # GDAL reads a PNG copy's georeferencing from the sidecar it looks for

    with rasterio.open(tmp_path / "UP.TIF") as src:
        transform = src.transform
    from rasterio.shutil import copy

    copy(tmp_path / "UP.TIF", tmp_path / "COPY.PNG", driver="PNG")
    (tmp_path / "COPY.PNG.aux.xml").unlink(missing_ok=True)
    (tmp_path / "COPY.PGW").write_bytes((tmp_path / "UP.TFW").read_bytes())
    with rasterio.open(tmp_path / "COPY.PNG") as png:
        assert png.transform.almost_equals(transform)


def test_non_raster_files_are_skipped_with_a_note(tmp_path):
    """Every file that is neither a tile nor a tile's sidecar is named; world
    files, .prj and GDAL's .aux.xml beside tiles are not."""
    d = _tiles(tmp_path / "in", n=4)
    (d / "field notes.docx").write_text("x")
    (d / "notes.txt").write_text("x")
    (d / "t0.tfw").write_text("1\n0\n0\n-1\n0.5\n-0.5\n")
    (d / "t0.tif.aux.xml").write_text("<PAMDataset/>")
    r = _run(["solve", d, "-o", tmp_path / "m.tif"], d)
    assert r.exit_code == 0, r.output
    assert "note: skipped 2 file(s) that are not rasters: field notes.docx, notes.txt\n" in r.output
    summary = (tmp_path / "m_report" / "summary.json").read_text()
    assert "skipped 2 file(s) that are not rasters: field notes.docx, notes.txt" in summary


def test_quiet_keeps_the_caution(tmp_path):
    d = _tiles(tmp_path / "in", n=4)
    r = _run(["solve", d, "-o", tmp_path / "m.tif", "-q"], d)
    assert r.exit_code == 0, r.output
    assert r.output.strip().splitlines() == [f"caution: {CAUTION}"]


def test_two_tiles_solve(tmp_path):
    """Two neighbours (t0 left of t1 in coffee, CC0), stored in reverse name
    order of their places would pass for either: the mosaic must be the
    source strip."""
    d = tmp_path / "in"
    d.mkdir()
    strip = skimage_image("coffee")[:, 100:128, 100:156]
    write_raster(d / "b.tif", strip[:, :, :28])  # the left tile, named to sort second
    write_raster(d / "a.tif", strip[:, :, 28:])
    r = _run(["solve", d, "-o", tmp_path / "m.tif"], d)
    assert r.exit_code == 0, r.output
    assert "placed 2 tiles" in r.output
    with rasterio.open(tmp_path / "m.tif") as out:
        np.testing.assert_array_equal(out.read(), strip)


def test_identical_and_duplicate_tiles_warn(tmp_path):
    d = tmp_path / "in"
    d.mkdir()
    t = skimage_image("coffee")[:, 100:128, 100:128]
    for k in range(4):
        write_raster(d / f"same{k}.tif", t)
    r = _run(["solve", d, "-o", tmp_path / "m.tif"], d)
    assert r.exit_code == 0, r.output
    assert "warning: all tiles are identical" in r.output


def test_duplicate_files_warn_they_are_interchangeable(tmp_path):
    d = _tiles(tmp_path / "in", n=4)
    shutil.copy(d / "t1.tif", d / "t1 copy.tif")
    r = _run(["solve", d, "-o", tmp_path / "m.tif"], d)
    assert r.exit_code == 0, r.output
    assert "2 tiles have identical edges and are interchangeable (t1 copy.tif, t1.tif)" in r.output


def test_mosaic_in_tile_folder_is_never_read_back(tmp_path):
    d = _tiles(tmp_path / "in", n=4)
    assert _run(["solve", d, "-o", d / "my_mosaic.tif"], tmp_path / "nothing").exit_code == 0
    again = runner.invoke(app, ["solve", str(d), "-o", str(tmp_path / "second.tif")])
    assert again.exit_code == 0, again.output
    assert "placed 4 tiles" in again.output


def _mosaic_part_tiles(folder):
    """Tiles named as a processing chain may name them: mosaic_part_N.tif."""
    folder.mkdir(parents=True)
    img = skimage_image("coffee")
    for k in range(4):
        write_raster(folder / f"mosaic_part_{k}.tif", img[:, 100:128, 100 + 28 * k:128 + 28 * k])
    return folder


@pytest.mark.parametrize("target", ["output", "report", "world file"])
def test_overwrite_never_replaces_a_tile(tmp_path, target):
    """An output or report file that would land on a tile is refused before
    anything is read, even with --overwrite, and every tile stays as it was."""
    d = _mosaic_part_tiles(tmp_path / "in")
    if target == "output":
        args = ["-o", d / "mosaic_part_2.tif"]
    elif target == "world file":  # mosaic_part_2.tiff would write mosaic_part_2.tfw, the tile's world file
        (d / "mosaic_part_2.tfw").write_text("1\n0\n0\n-1\n500000.5\n4099999.5\n")
        args = ["-o", d / "mosaic_part_2.tiff"]
    else:  # a report folder that is the tile folder, holding a tile named preview.png
        write_raster(d / "preview.png", skimage_image("coffee")[:, 100:128, 300:328], driver="PNG")
        args = ["-o", tmp_path / "m.tif", "--report", d]
    r = _run(["solve", d, *args, "--overwrite"], d)
    assert r.exit_code == 1, r.output
    line = _last_line(r)
    assert ("one of the tiles" in line or "sidecar of tile" in line) and "mosaic_part_2" in line or "preview.png" in line, line
    assert not (tmp_path / "m.tif").exists()


def test_verbose_shows_the_traceback(tmp_path):
    """Without -v one line; with -vv the traceback (in a real process, as a
    user sees it)."""
    (tmp_path / "in").mkdir()
    cmd = [sys.executable, "-m", "stitch", "solve", str(tmp_path / "in"), "-o", str(tmp_path / "m.tif")]
    quiet = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    loud = subprocess.run(cmd + ["-vv"], capture_output=True, text=True, timeout=120)
    assert quiet.returncode == 1 and "Traceback" not in quiet.stderr
    assert loud.returncode == 1
    assert "Traceback (most recent call last)" in loud.stderr and "TileSetError" in loud.stderr


def test_write_failure_midway_leaves_nothing(tmp_path, monkeypatch, tiles_dir):
    """A full disk while writing the mosaic: exit 1, no mosaic, no temporary file."""
    import rasterio.io

    calls = {"n": 0}
    real_write = rasterio.io.DatasetWriter.write

    def failing(self, *args, **kwargs):
        calls["n"] += 1
        if calls["n"] > 10:
            raise rasterio.errors.RasterioIOError("No space left on device")
        return real_write(self, *args, **kwargs)

    monkeypatch.setattr(rasterio.io.DatasetWriter, "write", failing)
    r = _run(["solve", tiles_dir, "-o", tmp_path / "m.tif"], tiles_dir)
    assert r.exit_code == 1
    assert "No space left on device" in _last_line(r)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["coffee_utm.tif", "key.csv", "tiles"]


@pytest.mark.parametrize("signum, code, word", [
    (signal.SIGINT, 130, "interrupted"),   # Ctrl-C
    (signal.SIGTERM, 143, "terminated"),   # a scheduler or kill
    (signal.SIGHUP, 129, "terminated"),    # a closed terminal
], ids=["SIGINT", "SIGTERM", "SIGHUP"])
def test_signals_leave_no_partial_output(tmp_path, signum, code, word):
    """Ctrl-C, SIGTERM or SIGHUP while the search runs: one line, exit 128 +
    the signal number (common practice, no source), nothing written, no lock
    file left."""
    # 784 tiles of 16 px with quarter turns: a search of well over 6 s.
    src = write_raster(tmp_path / "src.tif", skimage_image("astronaut")[:, :448, :448])
    cut_raster(src, tmp_path / "t", 16, shuffle=True, rotations=90, seed=1)
    out = tmp_path / "out"
    out.mkdir()
    proc = subprocess.Popen([sys.executable, "-m", "stitch", "solve", str(tmp_path / "t"), "-o", str(out / "m.tif"),
                             "--rotations", "90", "--generations", "500", "--population", "150"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            # a shell's background job ignores SIGINT, and a run under nohup
                            # ignores SIGHUP, and so would the child: as from a terminal
                            preexec_fn=lambda: [signal.signal(s, signal.SIG_DFL) for s in (signal.SIGINT,
                                                                                          signal.SIGHUP)])
    time.sleep(6)
    proc.send_signal(signum)
    stdout, stderr = proc.communicate(timeout=60)
    assert proc.returncode == code, (stdout, stderr)
    assert stderr.strip().splitlines()[-1].startswith(word)
    assert "Traceback" not in stderr
    assert list(out.iterdir()) == []


# Fuzzing: parsers raise only the project's own errors.

@settings(max_examples=150, deadline=None)
@given(st.binary(max_size=200))
def test_fuzz_world_file_reader(tmp_path_factory, data):
    from stitch.georef import read_world_file

    f = tmp_path_factory.mktemp("w") / "x.tfw"
    f.write_bytes(data)
    try:
        read_world_file(f)
    except StitchError:
        pass


@settings(max_examples=150, deadline=None)
@given(st.text(max_size=300))
def test_fuzz_control_csv_reader(tmp_path_factory, text):
    from stitch.control import read_gcps

    f = tmp_path_factory.mktemp("g") / "g.csv"
    f.write_text("tile,col,row,x,y\n" + text, encoding="utf-8", errors="surrogatepass") if False else \
        f.write_bytes(("tile,col,row,x,y\n" + text).encode("utf-8", "replace"))
    try:
        read_gcps(f)
    except StitchError:
        pass


@settings(max_examples=200, deadline=None)
@given(st.text(max_size=40))
def test_fuzz_grid_and_pin_options(text):
    """The CLI parsers: usage errors (exit 2) or accepted, never a crash."""
    import typer

    from stitch.cli import _parse_grid, _parse_pin

    for parse in (_parse_grid, _parse_pin):
        try:
            parse(text)
        except typer.BadParameter:
            pass


@settings(max_examples=100, deadline=None)
@given(st.lists(st.floats(allow_nan=True, allow_infinity=True), min_size=4, max_size=4))
def test_fuzz_bounds(values):
    from stitch.georef import GeorefSpec

    try:
        GeorefSpec(bounds=tuple(values), crs="EPSG:4326")
    except StitchError:
        pass


def test_same_seed_same_bytes_across_thread_counts(tmp_path, tiles_dir):
    """NUMBA_NUM_THREADS=1 and 2 give byte-identical placement.csv and identical pixels."""
    results = []
    for threads in ("1", "2"):
        env = dict(os.environ, NUMBA_NUM_THREADS=threads, OMP_NUM_THREADS=threads, OPENBLAS_NUM_THREADS=threads)
        out = tmp_path / f"m{threads}.tif"
        subprocess.run([sys.executable, "-m", "stitch", "solve", str(tiles_dir), "-o", str(out), "--seed", "3", "-q"],
                       env=env, check=True, timeout=300)
        with rasterio.open(out) as src:
            results.append(((tmp_path / f"m{threads}_report" / "placement.csv").read_bytes(), src.read()))
    assert results[0][0] == results[1][0]
    np.testing.assert_array_equal(results[0][1], results[1][1])


@pytest.mark.parametrize(
    "target, stage",
    [
        pytest.param("stitch.pipeline.score_seams", "scoring", id="Ctrl-C while scoring seams"),
        pytest.param("stitch.pipeline.search_placement", "search", id="Ctrl-C while searching"),
        pytest.param("stitch.mosaic.orient", "writing", id="Ctrl-C while writing the mosaic"),
        pytest.param("stitch.report.preview_png", "report", id="Ctrl-C while writing the report"),
    ],
)
@pytest.mark.parametrize("inside_kernel", [False, True], ids=["in Python", "inside a compiled kernel"])
def test_interrupt_at_each_stage_exits_130_and_leaves_nothing(tmp_path, monkeypatch, tiles_dir, target, stage,
                                                              inside_kernel):
    import importlib

    module, name = target.rsplit(".", 1)
    real = getattr(importlib.import_module(module), name)
    calls = {"n": 0}

    def interrupted(*args, **kwargs):
        calls["n"] += 1
        if calls["n"] > 3 or stage != "writing":
            if not inside_kernel:
                raise KeyboardInterrupt
            try:  # how a numba kernel reports a Ctrl-C that arrived while it ran
                raise KeyboardInterrupt
            except KeyboardInterrupt:
                raise SystemError("CPUDispatcher(<function greedy>) returned a result with an exception set")
        return real(*args, **kwargs)

    monkeypatch.setattr(target, interrupted)
    out = tmp_path / "out"
    out.mkdir()
    r = _run(["solve", tiles_dir, "-o", out / "m.tif"], tiles_dir)
    assert r.exit_code == 130, r.output
    assert r.output.strip().splitlines()[-1].startswith("interrupted")
    assert list(out.iterdir()) == []


@settings(max_examples=25, deadline=None)
@given(rows=st.integers(2, 4), cols=st.integers(2, 4), size=st.sampled_from([12, 16, 20]),
       dtype=st.sampled_from(["uint8", "uint16", "int16", "float32"]), bands=st.sampled_from([1, 3, 4]),
       seed=st.integers(0, 1000))
def test_random_round_trips(tmp_path_factory, rows, cols, size, dtype, bands, seed):
    """Cut, shuffle, solve on small grids of open data (skimage astronaut, CC0).

    Tiny tiles need not come back perfect; what must hold is that every tile
    is placed once and the mosaic shows each tile where, and turned as,
    placement.csv says.
    """
    from stitch.layout import read_placement_csv
    from stitch.pipeline import SolveOptions, solve
    from stitch.puzzles import score_placement

    tmp = tmp_path_factory.mktemp("rt")
    img = skimage_image("astronaut")[:, 100:100 + rows * size, 150:150 + cols * size].astype(np.float64)
    img = np.concatenate([img, img[:1]])[:bands] if bands == 4 else img[:bands]
    scale = {"uint8": 1, "uint16": 257, "int16": 100, "float32": 0.01}[dtype]
    src = write_raster(tmp / "src.tif", (img * scale).astype(dtype))
    cut = cut_raster(src, tmp / "t", size, shuffle=True, seed=seed, key_path=tmp / "k.csv")
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = solve(tmp / "t", tmp / "m.tif", options=SolveOptions(grid=(rows, cols), seed=seed))
    placement = read_placement_csv(result.outputs["report_placement"])
    scores = score_placement(placement, cut.key)
    assert scores.missing == 0 and sorted(placement.names) == sorted(cut.key.names)
    from stitch.orientation import orient
    from stitch.tiles import read_tile

    with rasterio.open(result.outputs["mosaic"]) as out:
        assert out.dtypes[0] == dtype and out.count == bands
        mosaic = out.read()
    for i, name in enumerate(placement.names):
        r, c = placement.rows[i], placement.cols[i]
        want = orient(read_tile(tmp / "t" / name), placement.rotations[i], placement.mirrored[i])
        np.testing.assert_array_equal(mosaic[:, r * size:(r + 1) * size, c * size:(c + 1) * size], want)
