"""stitch: put unreferenced raster tiles back in place and write a georeferenced mosaic.

>>> import stitch
>>> result = stitch.solve("demo_tiles", "mosaic.tif", options=stitch.SolveOptions(seed=1))  # doctest: +SKIP
"""

__version__ = "0.1.0"

from .georef import GeorefSpec  # noqa: E402
from .pipeline import SolveOptions, SolveResult, solve  # noqa: E402
from .search import SearchSettings  # noqa: E402

__all__ = ["GeorefSpec", "SearchSettings", "SolveOptions", "SolveResult", "__version__", "solve"]
