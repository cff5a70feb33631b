"""Cut -> shuffle, strip -> solve -> score on open data shipped with packages.

Sources: scikit-image's bundled CC0 images ``camera`` and ``coffee`` (see the
``skimage.data`` docstrings) and matplotlib's bundled DEM
``jacksboro_fault_dem.npz``. The metrics are those of Cho, Avidan & Freeman
(CVPR 2010), implemented in :mod:`stitch.puzzles`.
"""

import numpy as np
import pytest
import rasterio
from rasterio.transform import from_origin

from conftest import jacksboro_dem, skimage_image, write_raster
from stitch.layout import read_placement_csv
from stitch.pipeline import SolveOptions, solve
from stitch.puzzles import cut_raster, score_placement

TILE = 28


def _roundtrip(tmp_path, array, *, rotate=0, seed=1, nodata=None):
    src = write_raster(tmp_path / "src.tif", array, transform=from_origin(1000.0, 2000.0, 1.0, 1.0),
                       crs="EPSG:32615", nodata=nodata)
    cut = cut_raster(src, tmp_path / "tiles", TILE, shuffle=True, strip_georef=True, rotate=rotate, seed=seed,
                     key_path=tmp_path / "key.csv")
    result = solve(tmp_path / "tiles", tmp_path / "out.tif", options=SolveOptions(rotations=rotate, seed=seed))
    solution = read_placement_csv(result.outputs["report_placement"])
    return score_placement(solution, cut.key), result


@pytest.mark.filterwarnings("ignore::stitch.errors.NotGeoreferencedWarning")
@pytest.mark.parametrize(
    "array",
    [
        pytest.param(skimage_image("camera")[:, :280, :280], id="skimage camera (CC0)"),
        pytest.param(skimage_image("coffee")[:, 60:340, 150:430], id="skimage coffee (CC0)"),
        pytest.param(jacksboro_dem()[:280, :280], id="matplotlib jacksboro DEM int16"),
    ],
)
def test_upright_10x10_is_perfect(tmp_path, array):
    scores, result = _roundtrip(tmp_path, array)
    assert (scores.direct, scores.neighbor, scores.perfect) == (1.0, 1.0, True)
    assert result.placement.shape == (10, 10)  # inferred, not given


@pytest.mark.filterwarnings("ignore::stitch.errors.NotGeoreferencedWarning")
def test_quarter_turns_small_set_is_perfect(tmp_path):
    scores, _ = _roundtrip(tmp_path, skimage_image("coffee")[:, 60:256, 150:346], rotate=90, seed=2)
    assert scores.perfect, scores


def test_mosaic_pixels_equal_source_with_anchor(tmp_path, utm_raster, tiles_dir):
    """With one intact tile, pixels, transform and CRS of the source come back."""
    result = solve(tiles_dir, tmp_path / "out.tif")
    with rasterio.open(utm_raster) as a, rasterio.open(result.outputs["mosaic"]) as b:
        assert b.crs == a.crs
        np.testing.assert_array_equal(b.read(), a.read())


@pytest.mark.filterwarnings("ignore::stitch.errors.NotGeoreferencedWarning")
def test_same_seed_same_outputs(tmp_path, tiles_dir):
    runs = []
    for k in range(2):
        r = solve(tiles_dir, tmp_path / f"out{k}.tif", options=SolveOptions(seed=7))
        with rasterio.open(r.outputs["mosaic"]) as src:
            runs.append((r.outputs["report_placement"].read_bytes(), src.read()))
    assert runs[0][0] == runs[1][0]
    np.testing.assert_array_equal(runs[0][1], runs[1][1])


@pytest.mark.filterwarnings("ignore::stitch.errors.NotGeoreferencedWarning")
def test_non_square_tiles_with_half_turns(tmp_path):
    """Non-square tiles may only need half turns (a quarter turn would change their shape)."""
    src = write_raster(tmp_path / "src.tif", skimage_image("astronaut")[:, :160, :252])
    cut = cut_raster(src, tmp_path / "tiles", (36, 20), shuffle=True, rotate=180, seed=4, key_path=tmp_path / "k.csv")
    result = solve(tmp_path / "tiles", tmp_path / "out.tif", options=SolveOptions(rotations=180, seed=4))
    scores = score_placement(read_placement_csv(result.outputs["report_placement"]), cut.key)
    assert scores.perfect, scores


@pytest.mark.filterwarnings("ignore::stitch.errors.NotGeoreferencedWarning")
def test_mirrored_and_turned_tiles(tmp_path):
    src = write_raster(tmp_path / "src.tif", skimage_image("coffee")[:, 100:268, 200:368])
    cut = cut_raster(src, tmp_path / "tiles", 28, shuffle=True, rotate=90, mirror=True, seed=6,
                     key_path=tmp_path / "k.csv")
    assert cut.key.mirrored.any() and cut.key.rotations.any()
    opts = SolveOptions(rotations=90, mirrored=True, seed=6)
    result = solve(tmp_path / "tiles", tmp_path / "out.tif", options=opts)
    scores = score_placement(read_placement_csv(result.outputs["report_placement"]), cut.key)
    assert scores.perfect, scores
