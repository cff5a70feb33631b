"""stitch: put unreferenced raster tiles back in place and write a georeferenced mosaic."""

__version__ = "0.1.0"
