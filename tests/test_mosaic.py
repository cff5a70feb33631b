"""The mosaic GeoTIFF's own structure: blocks, compression, overviews, holes.

Round trips elsewhere check that the mosaic's pixels are the source's; these
check how the file is laid out, against what GDAL reports through rasterio
(its documented reading of the TIFF tags), with tiles cut from
scikit-image's bundled ``camera`` (CC0, per its docstring) and ``retina``
(public domain, per its docstring).
"""

import numpy as np
import pytest
import rasterio
from rasterio.enums import Compression
from rasterio.transform import from_origin

from conftest import skimage_image, write_raster
from stitch.georef import Georeference
from stitch.layout import Placement
from stitch.mosaic import write_mosaic
from stitch.puzzles import cut_raster
from stitch.tiles import read_tileset

UTM = rasterio.crs.CRS.from_epsg(32630)


def _key_mosaic(tmp_path, image, tile, *, drop=None, nodata=None, **write):
    """Cut ``image`` into tiles, leave out the tile at cell ``drop``, and
    write the mosaic of the answer key (no search)."""
    src = write_raster(tmp_path / "src.tif", image, nodata=nodata)
    cut = cut_raster(src, tmp_path / "t", tile, seed=1)
    key = cut.key
    if drop is not None:
        gone = next(n for n, r, c in zip(key.names, key.rows, key.cols) if (r, c) == drop)
        (tmp_path / "t" / gone).unlink()
    ts = read_tileset(tmp_path / "t")
    order = [key.names.index(n) for n in ts.names]
    p = Placement(ts.names, key.shape, key.rows[order], key.cols[order], key.rotations[order], key.mirrored[order])
    g = Georeference(from_origin(431000.0, 5800000.0, 0.5, 0.5), UTM, "test")
    return write_mosaic(ts, p, g, tmp_path / "mosaic.tif", **write)["mosaic"]


@pytest.mark.parametrize("size, factors", [(512, [2]), (1024, [2, 4]), (384, [])])
def test_internal_overviews_halve_down_to_about_256_px_by_averaging(tmp_path, size, factors):
    """Factors 2, 4, ... while the overview keeps at least 256 px (a 512 px
    mosaic gets exactly one, a 384 px one none), resampled by averaging:
    each overview pixel is the mean of its 2 x 2 block of the full image
    (GDAL's AVERAGE, rounded to the integer type: within 1 grey level)."""
    image = skimage_image("retina")[:, :size, :size]
    out = _key_mosaic(tmp_path, image, size // 4)
    with rasterio.open(out) as dst:
        assert dst.overviews(1) == factors
        if factors:
            assert dst.tags(ns="rio_overview") == {"resampling": "average"}
            half = dst.read(out_shape=(3, size // 2, size // 2)).astype(float)
            means = image.reshape(3, size // 2, 2, size // 2, 2).mean(axis=(2, 4))
            assert np.abs(half - means).max() <= 1


def test_the_mosaic_is_tiled_in_256_px_blocks_and_deflate_compressed(tmp_path):
    """Tiled 256 x 256 blocks (so readers fetch only what they show),
    DEFLATE with horizontal differencing for integer pixels, RGB kept as
    RGB."""
    out = _key_mosaic(tmp_path, skimage_image("retina")[:, :600, :600], 200)
    with rasterio.open(out) as dst:
        assert dst.profile["tiled"] is True
        assert dst.block_shapes == [(256, 256)] * 3
        assert dst.compression == Compression.deflate
        assert dst.tags(ns="IMAGE_STRUCTURE").get("PREDICTOR") == "2"
        assert [c.name for c in dst.colorinterp] == ["red", "green", "blue"]
        assert (dst.read() == skimage_image("retina")[:, :600, :600]).all()


def test_a_hole_without_nodata_is_masked_and_zero_pixels_beside_it_stay_valid(tmp_path):
    """Integer tiles that declare no nodata: the missing tile's cell is 0 in
    GDAL's dataset mask, every other pixel 255 (also the black surround of
    retina, whose zeros are data). The mosaic is 400 px high, so the mask is
    cleared in a full and a partial 256 px block row."""
    image = skimage_image("retina")[:, 500:900, 500:900]
    out = _key_mosaic(tmp_path, image, 200, drop=(1, 0))
    with rasterio.open(out) as dst:
        assert dst.nodata is None
        mask = dst.dataset_mask()
        pixels = dst.read()
    expected = np.full((400, 400), 255, np.uint8)
    expected[200:, :200] = 0
    assert (mask == expected).all()
    assert (pixels[:, mask == 255] == image[:, mask == 255]).all()


def test_a_hole_with_the_tiles_nodata_is_filled_with_it_in_every_band(tmp_path):
    """Tiles that declare nodata 255: the missing tile's cell holds 255 in
    every band (the whole raster is filled before tiles are written, in a
    full and a partial 256 px block row), and placed pixels keep theirs."""
    image = skimage_image("retina")[:, 500:900, 500:900]
    out = _key_mosaic(tmp_path, image, 200, drop=(0, 1), nodata=255)
    with rasterio.open(out) as dst:
        assert dst.nodata == 255
        pixels = dst.read()
    hole = np.zeros((400, 400), bool)
    hole[:200, 200:] = True
    assert (pixels[:, hole] == 255).all()
    assert (pixels[:, ~hole] == image[:, ~hole]).all()
