"""stitch: put unreferenced raster tiles back in place and write a georeferenced mosaic.

A 96 px square of scikit-image's camera (CC0) in UTM zone 33N, cut into nine
shuffled tiles of which one keeps its GeoTIFF tags, comes back whole, with
the source's transform:

>>> import tempfile
>>> from pathlib import Path
>>> import numpy as np, rasterio
>>> from rasterio.transform import from_origin
>>> from skimage import data
>>> import stitch
>>> from stitch.puzzles import cut_raster
>>> tmp = Path(tempfile.mkdtemp())
>>> source = data.camera()[200:296, 200:296]
>>> with rasterio.open(tmp / "camera.tif", "w", driver="GTiff", width=96, height=96, count=1, dtype="uint8",
...                    crs="EPSG:32633", transform=from_origin(500000, 4100000, 1, 1)) as dst:
...     dst.write(source, 1)
>>> _ = cut_raster(tmp / "camera.tif", tmp / "tiles", 32, shuffle=True, strip_georef=True, keep_georef=1, seed=1)
>>> result = stitch.solve(tmp / "tiles", tmp / "mosaic.tif", options=stitch.SolveOptions(seed=1))
>>> result.placement.shape, result.georeference.transform == from_origin(500000, 4100000, 1, 1)
((3, 3), True)
>>> with rasterio.open(tmp / "mosaic.tif") as out:
...     bool((out.read(1) == source).all())
True
"""

__version__ = "0.1.0"

from .georef import GeorefSpec  # noqa: E402
from .pipeline import SolveOptions, SolveResult, solve  # noqa: E402
from .search import SearchSettings  # noqa: E402

__all__ = ["GeorefSpec", "SearchSettings", "SolveOptions", "SolveResult", "__version__", "solve"]
