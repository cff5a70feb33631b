"""Every raster type the trade uses: bands, data types, nodata, blank tiles.

Sources of the pixels: scikit-image's bundled CC0 images (``camera``,
``coffee``) and matplotlib's bundled sample DEM (int16 elevations).
"""

import numpy as np
import pytest

from conftest import jacksboro_dem, skimage_image, write_raster
from stitch.layout import allowed_orientations
from stitch.seams import score_seams
from stitch.tiles import read_tileset

T = 28


def _tile_folder(tmp_path, array, nodata=None, blank_value=None, blank_index=None):
    """Cut a (bands, H, W) array into 28-px GeoTIFF tiles; optionally make one tile blank."""
    d = tmp_path / "tiles"
    d.mkdir(parents=True)
    rows, cols = array.shape[1] // T, array.shape[2] // T
    for k in range(rows * cols):
        r, c = divmod(k, cols)
        t = array[:, r * T:(r + 1) * T, c * T:(c + 1) * T].copy()
        if blank_index is not None and k == blank_index:
            t[:] = blank_value
        write_raster(d / f"t{k:03d}.tif", t, nodata=nodata)
    return d


CASES = [
    pytest.param(lambda: skimage_image("camera")[:, :112, :112].astype(np.uint16) * 257, None, id="uint16 1-band"),
    pytest.param(lambda: jacksboro_dem()[None, :112, :112], None, id="int16 DEM"),
    pytest.param(lambda: jacksboro_dem()[None, :112, :112].astype(np.float32), -9999.0, id="float32 DEM nodata"),
    pytest.param(lambda: skimage_image("coffee")[:, :112, :112].astype(np.float64) / 255, None, id="float64 RGB"),
    pytest.param(lambda: np.concatenate([skimage_image("coffee")[:, :112, :112],
                                         skimage_image("coffee")[::-1, 100:212, 200:312]]), None, id="uint8 6-band"),
]


@pytest.mark.parametrize("make, nodata", CASES)
def test_scores_finite_and_blank_flagged(tmp_path, make, nodata):
    array = make()
    fill = nodata if nodata is not None else array.flat[0]
    folder = _tile_folder(tmp_path, array, nodata=nodata, blank_value=fill, blank_index=5)
    ts = read_tileset(folder)
    assert ts.dtype == array.dtype.name and ts.count == array.shape[0]
    assert ts.blank.tolist() == [k == 5 for k in range(16)]
    table = score_seams(ts.edges, orientations=allowed_orientations(90, True), blank=ts.blank)
    assert np.isfinite(table.candidate_costs[:, :2]).all()
    assert np.isfinite(table.second).all() and np.isfinite(table.fallback).all()
    assert table.dead.reshape(16, 4)[5].all() and not table.dead.reshape(16, 4)[np.arange(16) != 5].any()
    assert (table.best_buddies.reshape(16, 4)[5] == -1).all()
    blk = table.blocks[:, ~np.eye(16, dtype=bool)]
    assert np.isfinite(blk).all()


def test_nodata_border_does_not_count(tmp_path):
    """A nodata strip along a side: the values under it do not count. The
    same DEM with the strip written as -9999 (declared nodata) and as -5
    (declared nodata) gives identical seam costs, and every cost is finite.
    Source: matplotlib's bundled jacksboro DEM (elevations far above -5)."""
    tables = []
    for fill in (-9999.0, -5.0):
        dem = jacksboro_dem()[None, :112, :112].astype(np.float32)
        dem[:, :, 50:60] = fill  # a column band of nodata crossing four tiles
        folder = _tile_folder(tmp_path / str(fill), dem, nodata=fill)
        ts = read_tileset(folder)
        assert not ts.blank.any()
        tables.append(score_seams(ts.edges, orientations=(0,), blank=ts.blank))
    table = tables[0]
    np.testing.assert_array_equal(tables[0].blocks, tables[1].blocks)
    assert np.isfinite(table.candidate_costs[:, :2]).all()
    # Tiles whose right side is all nodata (column 55 falls in tile column 1: pixels 28..55)
    # are dead on that side and have no best buddy there.
    dead = table.dead.reshape(16, 4)
    assert dead[[1, 5, 9, 13], 1].all()
