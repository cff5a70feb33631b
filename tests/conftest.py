"""Shared fixtures: tiny rasters written into tmp_path, open sample data.

Open data used here ships inside installed packages (no network):

* scikit-image's bundled images (``skimage.data``; ``camera`` and ``coffee``
  are CC0/public domain per their docstrings);
* matplotlib's bundled sample DEM ``jacksboro_fault_dem.npz`` (int16
  elevations), via ``matplotlib.cbook.get_sample_data``.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np
import pytest
import rasterio
from rasterio.transform import from_origin


def write_raster(path, array, *, transform=None, crs=None, nodata=None, driver="GTiff"):
    """Write a (bands, rows, cols) or (rows, cols) array as a raster file."""
    array = np.asarray(array)
    if array.ndim == 2:
        array = array[None]
    profile = dict(driver=driver, width=array.shape[2], height=array.shape[1], count=array.shape[0],
                   dtype=array.dtype.name, nodata=nodata)
    if transform is not None:
        profile.update(transform=transform, crs=crs)
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(array)
    return Path(path)


def skimage_image(name):
    """A scikit-image bundled image as (bands, rows, cols) uint8."""
    from skimage import data

    img = getattr(data, name)()
    return img[None] if img.ndim == 2 else np.moveaxis(img, -1, 0)


def jacksboro_dem():
    """matplotlib's bundled sample DEM: int16 elevations, 344 x 403."""
    from matplotlib import cbook

    with cbook.get_sample_data("jacksboro_fault_dem.npz") as dem:
        return np.asarray(dem["elevation"], dtype=np.int16)


def checksums(folder):
    """SHA-256 of every file below ``folder`` (inputs must never change)."""
    folder = Path(folder)
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


@pytest.fixture
def utm_raster(tmp_path):
    """A georeferenced 280 x 280 RGB GeoTIFF cut from skimage's coffee (CC0)."""
    img = skimage_image("coffee")[:, :280, 100:380]
    return write_raster(tmp_path / "coffee_utm.tif", img, transform=from_origin(431000.0, 5800000.0, 0.5, 0.5),
                        crs="EPSG:32630")


@pytest.fixture
def tiles_dir(tmp_path, utm_raster):
    """Shuffled 28 px tiles of ``utm_raster`` with one anchor tile kept."""
    from stitch.puzzles import cut_raster

    out = tmp_path / "tiles"
    cut_raster(utm_raster, out, 28, shuffle=True, strip_georef=True, keep_georef=1, seed=5,
               key_path=tmp_path / "key.csv")
    return out


@pytest.fixture(autouse=True)
def _edge_to_edge_sets_have_no_overlap(request, monkeypatch):
    """Every tile set the other tests cut meets edge to edge: the overlap
    search (run by every solve and inspect) must find none in any of them."""
    if request.module.__name__.endswith("test_overlap"):
        yield
        return
    import stitch.overlap

    real, found = stitch.overlap.find_overlap, []

    def recorded(*args, **kwargs):
        finding = real(*args, **kwargs)
        found.append(finding)
        return finding

    # solve and inspect both search through stitch.overlap.with_overlap.
    monkeypatch.setattr(stitch.overlap, "find_overlap", recorded)
    yield
    wrong = [f.describe() for f in found if f.overlap and f.source == "found"]
    assert not wrong, f"an overlap was found in tiles cut edge to edge: {wrong}"
