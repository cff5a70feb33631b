"""The one family of errors and warnings stitch raises.

Every message names the file or option at fault and says what to do, so the
CLI can print it as a single line.
"""

__all__ = [
    "GeoreferenceError",
    "NotGeoreferencedWarning",
    "OptionError",
    "OutputError",
    "OutputExistsError",
    "PlacementFileError",
    "RasterReadError",
    "StitchError",
    "TileSetError",
]


class StitchError(Exception):
    """Base class of every error stitch raises on purpose."""


class TileSetError(StitchError, ValueError):
    """The tile folder cannot be used as it is (empty, mixed sizes, ...)."""


class RasterReadError(StitchError, OSError):
    """A raster file could not be opened or read."""


class OptionError(StitchError, ValueError):
    """An option value is impossible (a grid too small, a bad CRS, ...)."""


class GeoreferenceError(StitchError, ValueError):
    """Georeferencing sources are missing, degenerate or disagree."""


class PlacementFileError(StitchError, ValueError):
    """A placement CSV does not follow the documented contract."""


class OutputError(StitchError, OSError):
    """An output could not be written."""


class OutputExistsError(OutputError, FileExistsError):
    """An output exists and ``overwrite`` was not given."""


class NotGeoreferencedWarning(UserWarning):
    """The mosaic is written in pixel space because no georeferencing was found."""
