"""A run's outputs: a full disk, a second run on the same output, a failed
report with --overwrite, leftovers of a killed run. Nothing lost in any case.

The tiles are cut from scikit-image's astronaut (public domain, a NASA
photograph, per its docstring) so that the mosaic is large enough for
overviews.
"""

import json
import resource
import subprocess
import sys

import pytest
from typer.testing import CliRunner

from conftest import checksums, skimage_image, write_raster
from stitch import report
from stitch.cli import app
from stitch.errors import OutputError
from stitch.files import output_lock
from stitch.puzzles import cut_raster

runner = CliRunner()


@pytest.fixture
def tiles(tmp_path):
    src = write_raster(tmp_path / "src.tif", skimage_image("astronaut"))
    cut_raster(src, tmp_path / "t", 64, shuffle=True, seed=3)  # 64 tiles, a 512 px mosaic
    return tmp_path / "t"


def _solve_limited(tiles, out, limit_bytes, *extra):
    """``stitch solve`` in a child process whose files may not grow beyond
    ``limit_bytes`` (RLIMIT_FSIZE, as ``ulimit -f`` sets; Python ignores
    SIGXFSZ, so writes past it fail with EFBIG as on a full disk)."""
    def limit():
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit_bytes, limit_bytes))
    return subprocess.run([sys.executable, "-m", "stitch", "solve", str(tiles), "-o", str(out), *extra],
                          capture_output=True, text=True, preexec_fn=limit, timeout=300)


def _error_lines(stderr):
    return [ln for ln in stderr.splitlines() if ln.startswith("error:")]


@pytest.mark.parametrize("extra", [[], ["--cog"]], ids=["GeoTIFF", "COG"])
def test_a_full_disk_while_writing_ends_in_one_line_and_leaves_nothing(tmp_path, tiles, extra):
    out = tmp_path / "out"
    out.mkdir()
    before = checksums(tiles)
    r = _solve_limited(tiles, out / "m.tif", 100_000, *extra)
    assert r.returncode == 1, r.stderr
    assert "Traceback" not in r.stderr
    (line,) = _error_lines(r.stderr)
    assert "cannot write mosaic" in line and "m.tif" in line
    assert list(out.iterdir()) == []  # no mosaic, no temporary file, no report, no lock
    assert checksums(tiles) == before


def test_overviews_are_not_built_without_room(tmp_path, tiles):
    """The base image fits under the limit, its overviews would not: refused
    with the sizes, before GDAL runs out of room (it once crashed there)."""
    first = tmp_path / "first"
    first.mkdir()
    assert runner.invoke(app, ["solve", str(tiles), "-o", str(first / "m.tif"), "-q"]).exit_code == 0
    size = (first / "m.tif").stat().st_size
    out = tmp_path / "out"
    out.mkdir()
    r = _solve_limited(tiles, out / "m.tif", size + 20_000)
    assert r.returncode == 1, r.stderr
    (line,) = _error_lines(r.stderr)
    assert "overviews" in line and "file-size limit" in line
    assert list(out.iterdir()) == []


def test_a_second_run_on_the_same_output_refuses_and_the_first_keeps_its_outputs(tmp_path, tiles):
    out = tmp_path / "m.tif"
    assert runner.invoke(app, ["solve", str(tiles), "-o", str(out), "-q"]).exit_code == 0
    kept = checksums(tmp_path / "m_report") | {"m.tif": out.read_bytes().hex()[:64]}
    mosaic = out.read_bytes()
    with output_lock(out):  # run A is still writing
        r = runner.invoke(app, ["solve", str(tiles), "-o", str(out), "--overwrite"])
    assert r.exit_code == 1, r.output
    assert "another stitch run is writing" in r.output
    assert out.read_bytes() == mosaic
    assert checksums(tmp_path / "m_report") | {"m.tif": out.read_bytes().hex()[:64]} == kept


def test_a_failed_report_with_overwrite_leaves_the_old_set_intact(tmp_path, tiles, monkeypatch):
    out = tmp_path / "m.tif"
    assert runner.invoke(app, ["solve", str(tiles), "-o", str(out), "-q", "--seed", "1"]).exit_code == 0
    old = checksums(tmp_path)

    real = report.write_text_atomic

    def full_disk(path, text, **kwargs):  # the page is the last report file written
        if path.name == "index.html":
            raise OutputError(f"cannot write {str(path)!r}: No space left on device")
        return real(path, text, **kwargs)

    monkeypatch.setattr(report, "write_text_atomic", full_disk)
    r = runner.invoke(app, ["solve", str(tiles), "-o", str(out), "-q", "--seed", "2", "--overwrite"])
    assert r.exit_code == 1, r.output
    assert "No space left on device" in r.output
    assert checksums(tmp_path) == old  # the old mosaic, world file and report, byte for byte
    assert not list(tmp_path.rglob("*stitch-partial*"))


def test_leftovers_of_a_killed_run_are_removed_and_named(tmp_path, tiles):
    stale = tmp_path / ".m.tif.0badc0de.stitch-partial"
    stale.write_bytes(b"half a mosaic")
    r = runner.invoke(app, ["solve", str(tiles), "-o", str(tmp_path / "m.tif")])
    assert r.exit_code == 0, r.output
    assert not stale.exists()
    assert "removed 1 temporary file(s) left by an interrupted run" in r.output
    summary = json.loads((tmp_path / "m_report" / "summary.json").read_text())
    assert summary["grid"] == [8, 8]


def test_room_is_checked_against_free_space_and_the_file_size_limit(tmp_path, monkeypatch):
    """_room_for, without filling a disk: a 10 MiB file needing its own size
    again (share 1) plus 1 MiB of slack, against what shutil.disk_usage and
    RLIMIT_FSIZE report (both stubbed)."""
    import resource
    import shutil
    from collections import namedtuple

    from stitch.mosaic import _room_for

    tmp = tmp_path / "m.tif.partial"
    tmp.write_bytes(b"\0" * (10 * 2**20))
    usage = namedtuple("usage", "total used free")
    monkeypatch.setattr(shutil, "disk_usage", lambda p: usage(0, 0, 5 * 2**20))
    with pytest.raises(OutputError) as err:
        _room_for(tmp, tmp_path / "m.tif", share=1.0, what="overviews")
    assert str(err.value) == (f"cannot write mosaic {str(tmp_path / 'm.tif')!r}: overviews need about 11 MB and "
                              "5 MB are free; free some space or write elsewhere")
    monkeypatch.setattr(shutil, "disk_usage", lambda p: usage(0, 0, 11 * 2**20))
    _room_for(tmp, tmp_path / "m.tif", share=1.0, what="overviews")  # exactly enough
    monkeypatch.setattr(resource, "getrlimit", lambda which: (16 * 2**20, resource.RLIM_INFINITY))
    with pytest.raises(OutputError, match=r"would pass this process's file-size limit \(16.0 MB, ulimit -f\)"):
        _room_for(tmp, tmp_path / "m.tif", share=1.0, what="overviews")  # grows the file to 21 MiB
    _room_for(tmp, tmp_path / "m.tif", share=1.0, what="the COG", new_file=True)  # a new 11 MiB file fits
    monkeypatch.setattr(resource, "getrlimit", lambda which: (11 * 2**20, resource.RLIM_INFINITY))
    _room_for(tmp, tmp_path / "m.tif", share=1.0, what="the COG", new_file=True)  # exactly at the limit is allowed
    with pytest.raises(OutputError) as err:
        _room_for(tmp, tmp_path / "m.tif", share=1.0, what="overviews")
    assert str(err.value) == (f"cannot write mosaic {str(tmp_path / 'm.tif')!r}: overviews would pass this "
                              "process's file-size limit (11.0 MB, ulimit -f); raise the limit")
    monkeypatch.setattr(resource, "getrlimit", lambda which: (resource.RLIM_INFINITY, resource.RLIM_INFINITY))
    monkeypatch.setattr(shutil, "disk_usage", lambda p: usage(0, 0, 13 * 2**20))
    with pytest.raises(OutputError, match="need about 15 MB and 13 MB are free"):  # 1.4 x 10 MiB + 1 MiB
        _room_for(tmp, tmp_path / "m.tif", share=1.4, what="the COG", new_file=True)


@pytest.mark.parametrize("dtype, tile_nodata, holes, nodata, marked", [
    ("uint8", None, False, None, "none"),
    ("uint8", None, True, None, "internal mask band"),
    ("uint8", 255, True, 255, "nodata 255"),
    ("int16", -9999, False, -9999, "none"),
    ("float32", None, True, "nan", "nodata nan"),
    ("float32", None, False, None, "none"),
])
def test_how_holes_are_marked(dtype, tile_nodata, holes, nodata, marked):
    """The tiles' own nodata when they declare one; NaN for float holes; for
    integer holes without nodata an internal mask band (no value of the type
    is set aside); summary.json's holes.marked_by says which."""
    import math

    from stitch.mosaic import choose_nodata, hole_marking

    got = choose_nodata(dtype, tile_nodata, holes)
    assert (math.isnan(got) if nodata == "nan" else got == nodata), got
    assert hole_marking(dtype, tile_nodata, holes) == marked
