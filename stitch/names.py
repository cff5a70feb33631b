"""Tile names that survived: positions, and for caches coordinates.

A tile cache stores each tile under a name that says where it lies, and a
scrambled cache usually keeps a few of them. Three kinds of names are read:

``z/x/y``
    The last three parts of the tile's path: zoom folder, column folder,
    row file (``12/2047/1362.png``), with the tile matrix's row counted from
    the top (XYZ, as web maps count) or from the bottom (TMS: row
    ``2**z - 1 - y`` from the top). The zoom is taken from the path, so the
    folder given may be the cache's root, a zoom folder or a column folder.
quadkeys
    A file named by its quadtree key, one digit 0-3 per zoom level
    (``0231.png``): column and row interleaved bit by bit, rows from the top.
``<base>_<row>_<col>``
    Exports cut by tilers (``ortho_3_12.tif``), numbered from 0 or 1 at the
    upper left.

``z/x/y`` names and quadkeys are georeferencing: with the tile matrix set
(OGC Two Dimensional Tile Matrix Set 2.0, OGC 17-083r4; WebMercatorQuad by
default, any other by identifier from morecantile, a maintained
implementation of the standard) a tile's name gives its exact bounds, so a
named tile becomes an anchor (:class:`stitch.tiles.TileGeoref`) like a tile
whose GeoTIFF tags survived. ``<base>_<row>_<col>`` names give cells only:
they pin the named tiles relative to each other.

:func:`find_names` reads the names (pure: no file is opened), refusing ones
that contradict each other; :func:`with_names` attaches the finding to a
tile set; after the search :meth:`NameFinding.offset` says how the
placement's cells map to the scheme's, and :func:`restored_names` names
every placed tile, for :func:`stitch.restore.restore_tiles`.
"""

from __future__ import annotations

import re
from collections import Counter
from dataclasses import dataclass, field, replace
from pathlib import Path, PurePosixPath

from affine import Affine

from .errors import GeoreferenceError, OptionError, TileSetError

__all__ = ["DEFAULT_TILE_MATRIX_SET", "SCHEMES", "NameFinding", "find_names", "quadkey", "quadkey_cell",
           "flipped_rows", "restored_names", "tile_matrix_set", "with_names"]

#: ``--tile-scheme`` values: ``auto`` reads whichever names are there.
SCHEMES = ("auto", "xyz", "tms", "quadkey", "rowcol", "none")

#: Tile matrix set of ``z/x/y`` names and quadkeys unless told otherwise.
DEFAULT_TILE_MATRIX_SET = "WebMercatorQuad"

#: The file a TMS cache's root holds (OSGeo Tile Map Service
#: Specification): rows count from the bottom there.
TMS_RESOURCE = "tilemapresource.xml"

#: Largest row or column number read from a ``<base>_<row>_<col>`` name; a
#: longer number is a date or a time of day (``IMG_20230101_120000``), not
#: a cell (our rule: no tiler export we know of has 100,000 rows).
MAX_ROWCOL = 99_999

#: Largest grid, as a multiple of the tile count, that ``<base>_<row>_<col>``
#: names may span and still be cells of one grid (as ``--grid`` allows).
MAX_SPAN_FACTOR = 10

_ZXY = re.compile(r"^\d{1,2}$"), re.compile(r"^\d{1,9}$"), re.compile(r"^(\d{1,9})\.[A-Za-z0-9]+$")
_QUADKEY = re.compile(r"^[0-3]{1,30}$")
_ROWCOL = re.compile(r"^(?:(?P<base>.*?)[_-])?(?P<row>\d{1,6})[_-](?P<col>\d{1,6})$")
_NUMBERED = re.compile(r"^\d+$")


def tile_matrix_set(identifier=DEFAULT_TILE_MATRIX_SET):
    """The tile matrix set of this OGC identifier (from morecantile).

    Raises
    ------
    OptionError
        morecantile does not know the identifier.
    """
    import morecantile

    try:
        return morecantile.tms.get(identifier)
    except Exception:  # morecantile's own InvalidIdentifier, by version
        known = ", ".join(morecantile.tms.list())
        raise OptionError(f"--tile-matrix-set {identifier!r} is not a tile matrix set morecantile knows; "
                          f"give one of {known}") from None


def quadkey(zoom, col, row):
    """Quadtree key of the tile at ``col, row`` (row from the top) of ``zoom``.

    Examples
    --------
    >>> quadkey(3, 3, 5)
    '213'
    """
    digits = []
    for z in range(zoom, 0, -1):
        mask = 1 << (z - 1)
        digits.append(str((1 if col & mask else 0) + (2 if row & mask else 0)))
    return "".join(digits)


def quadkey_cell(key):
    """``(zoom, col, row)`` of a quadtree key, the inverse of :func:`quadkey`.

    Examples
    --------
    >>> quadkey_cell("213")
    (3, 3, 5)
    """
    col = row = 0
    for digit in key:
        d = int(digit)
        col, row = 2 * col + (d & 1), 2 * row + (d >> 1)
    return len(key), col, row


@dataclass(frozen=True)
class NameFinding:
    """What the tiles' surviving names say.

    Attributes
    ----------
    scheme : str or None
        ``"xyz"``, ``"tms"``, ``"quadkey"``, ``"rowcol"``, or None when no
        name survived (or ``--tile-scheme none``).
    cells : dict
        Tile index -> ``(row, col)`` in the scheme's grid, rows counted from
        the top (TMS rows already turned over).
    zoom : int or None
        Zoom level of ``z/x/y`` names and quadkeys.
    tile_matrix_set : str or None
        Identifier of the tile matrix set they refer to.
    base : str
        Prefix of ``<base>_<row>_<col>`` names (``""`` for ``3_12.tif``).
    start : int or None
        What ``<base>_<row>_<col>`` numbering starts at: 0 when a 0 is seen,
        1 when the lowest row and column are both 1, else None (not known).
    widths : (int, int)
        Digits of the row and column numbers (zero padding), kept when
        naming tiles back.
    separator : str
        ``"_"`` or ``"-"`` between base, row and column.
    rows_from : str
        How XYZ against TMS was decided: ``"given"``, ``"tilemapresource.xml"``,
        ``"seams"`` or ``"assumed"`` (one row of names survived: XYZ, the web
        maps' order, assumed).
    notes : tuple of str
        What was seen and not used, for the run's notes.
    """

    scheme: str | None = None
    cells: dict = field(default_factory=dict)
    zoom: int | None = None
    tile_matrix_set: str | None = None
    base: str = ""
    start: int | None = None
    widths: tuple = (0, 0)
    separator: str = "_"
    rows_from: str = ""
    notes: tuple = ()

    def __bool__(self):
        return bool(self.cells)

    @property
    def georeferences(self):
        """Whether the names put tiles on the map (``z/x/y``, quadkeys),
        whether or not the row order of ``z/x/y`` names is settled yet."""
        return self.scheme in ("xyz", "tms", "quadkey")

    def tile_range(self):
        """``(row_min, row_max, col_min, col_max)`` of the named tiles, in
        the scheme's own numbering (TMS rows from the bottom)."""
        rows = [self._own_row(r) for r, _ in self.cells.values()]
        cols = [c for _, c in self.cells.values()]
        return min(rows), max(rows), min(cols), max(cols)

    def _own_row(self, row):
        if self.scheme == "tms":
            return tile_matrix_set(self.tile_matrix_set).matrix(self.zoom).matrixHeight - 1 - row
        return row

    def describe(self, n_tiles):
        """One line: the scheme, how many names survived, what they imply."""
        if not self:
            return "no tile names survived"
        n = len(self.cells)
        share = f"{n} of {n_tiles} tiles"
        r0, r1, c0, c1 = self.tile_range()
        if self.georeferences:
            kind = {"xyz": "z/x/y (XYZ, rows from the top)", "tms": "z/x/y (TMS, rows from the bottom)",
                    "quadkey": "quadkey"}[self.scheme]
            if self.scheme in ("xyz", "tms") and not self.rows_from:
                kind = "z/x/y (rows from the top or the bottom: solve tells XYZ from TMS by the seams)"
            how = {"assumed": "; one row of names: XYZ assumed, give --tile-scheme tms if rows count from the "
                              "bottom", "seams": "; XYZ or TMS told by the seams",
                   "tilemapresource.xml": "; TMS from tilemapresource.xml",
                   "tiles' own georeferencing": "; XYZ or TMS told by a named tile's world file or tags"}.get(
                self.rows_from, "")
            return (f"tile names {kind}: {share} keep theirs, {self.tile_matrix_set} zoom {self.zoom}, "
                    f"columns {c0}-{c1}, rows {r0}-{r1}{how}")
        start = "numbered from " + (str(self.start) if self.start is not None else "0 or 1 (not known)")
        return (f"tile names {self.base or ''}{self.separator}<row>{self.separator}<col>: {share} keep theirs, "
                f"rows {r0}-{r1}, columns {c0}-{c1}, {start}")

    def facts(self, n_tiles):
        """A JSON-ready summary (summary.json ``inputs.tile_names``)."""
        d = {"scheme": self.scheme, "named": len(self.cells), "description": self.describe(n_tiles)}
        if self:
            r0, r1, c0, c1 = self.tile_range()
            d.update(rows=[r0, r1], cols=[c0, c1])
        if self.georeferences:
            d.update(zoom=self.zoom, tile_matrix_set=self.tile_matrix_set, rows_from=self.rows_from)
        elif self.scheme == "rowcol":
            d.update(base=self.base, start=self.start)
        if self.notes:
            d["notes"] = list(self.notes)
        return d

    def offset(self, placement):
        """``(rows, cols)`` to add to a placement's cells to get the
        scheme's: the same for every named tile, since they are pinned
        relative to each other.

        Raises
        ------
        GeoreferenceError
            Named tiles do not sit where their names put them relative to
            each other (they were not pinned), naming two of them.
        """
        offsets = {}
        for i, (r, c) in self.cells.items():
            if placement.rows[i] >= 0:
                offsets.setdefault((r - int(placement.rows[i]), c - int(placement.cols[i])), []).append(i)
        if not offsets:
            raise GeoreferenceError("no named tile was placed; the names cannot be carried over")
        if len(offsets) > 1:
            (a, *_), (b, *_) = sorted(offsets.values(), key=len, reverse=True)[:2]
            raise GeoreferenceError(f"tiles {placement.names[a]!r} and {placement.names[b]!r} are not placed as "
                                    "their names say; check their names")
        return next(iter(offsets))

    def tile_georef(self, tileset, i):
        """The georeferencing the name of tile ``i`` gives (upper-left
        corner and pixel size from the tile's bounds in the matrix set)."""
        from rasterio.crs import CRS

        from .tiles import TileGeoref

        tms = tile_matrix_set(self.tile_matrix_set)
        r, c = self.cells[i]
        left, top, right, bottom = _bounds(tms, self.zoom, r, c)
        transform = Affine((right - left) / tileset.width, 0.0, left, 0.0, (bottom - top) / tileset.height, top)
        epsg = tms.crs.to_epsg()
        crs = CRS.from_epsg(epsg) if epsg else CRS.from_wkt(tms.crs.to_wkt())
        return TileGeoref(transform, crs, f"tile name {tileset.names[i]} ({self.tile_matrix_set} zoom {self.zoom})",
                          from_name=True)


def _bounds(tms, zoom, row, col):
    """``(left, top, right, bottom)`` of a tile, row from the top, as
    OGC 17-083r4 defines them for a top-left corner of origin."""
    import morecantile

    b = tms.xy_bounds(morecantile.Tile(col, row, zoom))
    return b.left, b.top, b.right, b.bottom


def _read_zxy(name, folder):
    """``(zoom, col, row)`` from a path ending in ``z/x/y.ext``, or None."""
    parts = (Path(folder).resolve() / name).parts[-3:]
    if len(parts) < 3 or not _ZXY[0].match(parts[0]) or not _ZXY[1].match(parts[1]):
        return None
    m = _ZXY[2].match(parts[2])
    return (int(parts[0]), int(parts[1]), int(m.group(1))) if m else None


def _read_rowcol(name):
    """``(base, sep, row, col, row digits, col digits)`` or None."""
    stem = PurePosixPath(name).stem
    m = _ROWCOL.match(stem)
    if not m:
        return None
    row, col = m.group("row"), m.group("col")
    sep = stem[len(m.group("base") or "")] if m.group("base") is not None else "_"
    return m.group("base") or "", sep, int(row), int(col), len(row), len(col)


def _has_tms_resource(folder, name):
    """Whether a ``tilemapresource.xml`` sits at the root of the tree that
    holds the named tile ``name`` (``root/z/x/y.ext``) or in ``folder``."""
    root = Path(folder).resolve()
    return (root / name).parents[2].joinpath(TMS_RESOURCE).is_file() or (root / TMS_RESOURCE).is_file()


def _refuse_doubles(names, cells, what):
    seen = {}
    for i, cell in cells.items():
        if cell in seen:
            raise TileSetError(f"tiles {names[seen[cell]]!r} and {names[i]!r} both name {what(cell)}; one "
                               "of them was renamed: remove or rename it, or give --tile-scheme none")
        seen[cell] = i


def find_names(folder, names, *, scheme="auto", tile_matrix_set_id=DEFAULT_TILE_MATRIX_SET):
    """Read the position the tiles' names still give.

    Parameters
    ----------
    folder : path-like
        The tile folder (``z/x/y`` is read from the resolved path, so the
        zoom may be the folder's own name).
    names : sequence of str
        Tile file names relative to ``folder``.
    scheme : {"auto", "xyz", "tms", "quadkey", "rowcol", "none"}
        ``auto`` reads ``z/x/y`` paths first, then quadkeys, then
        ``<base>_<row>_<col>``; XYZ against TMS is settled later
        (:func:`with_names`) when it is not given.
    tile_matrix_set_id : str
        OGC identifier of the tile matrix set ``z/x/y`` and quadkeys refer to.

    Returns
    -------
    NameFinding
        For ``auto`` with ``z/x/y`` names, ``scheme`` is ``"xyz"`` and
        ``rows_from`` empty until :func:`with_names` settles it.

    Raises
    ------
    TileSetError
        Names from more than one zoom level, two tiles naming one cell, or a
        cell outside the tile matrix.
    OptionError
        An unknown scheme, or a scheme given that no name follows.
    """
    if scheme not in SCHEMES:
        raise OptionError(f"--tile-scheme must be one of {', '.join(SCHEMES)}, not {scheme!r}")
    if scheme == "none":
        return NameFinding()
    notes = []
    tms = None
    if scheme in ("auto", "xyz", "tms", "quadkey"):
        tms = tile_matrix_set(tile_matrix_set_id)
        zooms = range(tms.minzoom, tms.maxzoom + 1)
        zxy = {i: z for i, n in enumerate(names) if (z := _read_zxy(n, folder)) is not None and z[0] in zooms}
        if zxy and scheme in ("auto", "xyz", "tms"):
            finding = _from_zxy(names, zxy, tms, tile_matrix_set_id)
            if scheme != "auto":
                rows_from = "given"
                if scheme == "tms":
                    finding = flipped_rows(finding)
                finding = replace(finding, scheme=scheme, rows_from=rows_from)
            elif _has_tms_resource(folder, names[next(iter(zxy))]):
                finding = replace(flipped_rows(finding), rows_from=TMS_RESOURCE)
            return finding
        keys = {i: PurePosixPath(n).stem for i, n in enumerate(names) if _QUADKEY.match(PurePosixPath(n).stem)}
        if keys and scheme in ("auto", "quadkey"):
            finding, why = _from_quadkeys(names, keys, tms, tile_matrix_set_id, given=scheme == "quadkey")
            if finding is not None:
                return finding
            notes.append(why)
    if scheme in ("auto", "rowcol"):
        finding, why = _from_rowcol(names, given=scheme == "rowcol")
        if finding is not None:
            return replace(finding, notes=tuple(notes))
        if why:
            notes.append(why)
    if scheme != "auto":
        example = {"xyz": "12/2047/1362.png", "tms": "12/2047/2733.png", "quadkey": "0231.png",
                   "rowcol": "ortho_3_12.tif"}[scheme]
        raise OptionError(f"--tile-scheme {scheme}: no tile name follows it (as {example}); "
                          f"{notes[-1] + '; ' if notes else ''}give --tile-scheme auto or none")
    return NameFinding(notes=tuple(notes))


def _from_zxy(names, zxy, tms, tms_id):
    zoom_of = Counter(z for z, _, _ in zxy.values())
    if len(zoom_of) > 1:
        shown = ", ".join(f"zoom {z} ({names[next(i for i, v in zxy.items() if v[0] == z)]})"
                          for z in sorted(zoom_of))
        raise TileSetError(f"tiles under z/x/y paths come from more than one zoom level: {shown}; a mosaic "
                           "holds one zoom: solve each zoom folder apart")
    (zoom,) = zoom_of
    m = tms.matrix(zoom)
    for i, (_, x, y) in zxy.items():
        if x >= m.matrixWidth or y >= m.matrixHeight:
            raise TileSetError(f"tile {names[i]!r} names column {x}, row {y} of zoom {zoom}, outside "
                               f"{tms.id}'s {m.matrixWidth}x{m.matrixHeight} tiles there; check its path or "
                               "--tile-matrix-set")
    cells = {i: (y, x) for i, (_, x, y) in zxy.items()}
    _refuse_doubles(names, cells, lambda cell: f"zoom {zoom} column {cell[1]}, row {cell[0]}")
    return NameFinding("xyz", cells, zoom, tms_id)


def flipped_rows(finding):
    """The other reading of ``z/x/y`` names: XYZ read as TMS, or TMS as XYZ
    (the row turned over: ``matrixHeight - 1 - row``)."""
    tms = tile_matrix_set(finding.tile_matrix_set)
    height = tms.matrix(finding.zoom).matrixHeight
    other = "tms" if finding.scheme == "xyz" else "xyz"
    return replace(finding, scheme=other, cells={i: (height - 1 - r, c) for i, (r, c) in finding.cells.items()})


def _from_quadkeys(names, keys, tms, tms_id, *, given):
    """Quadkey names, or (None, why not)."""
    lengths = Counter(len(k) for k in keys.values())
    stems = [PurePosixPath(n).stem for n in names]
    numbered = [s for i, s in enumerate(stems) if i not in keys and _NUMBERED.match(s) and len(s) in lengths]
    if numbered and not given:
        return None, (f"names such as {stems[next(iter(keys))]!r} look like quadkeys, but {numbered[0]!r} beside "
                      "them is a plain number: read as a numbering, not as quadkeys")
    if not tms.is_quadtree:
        return None, f"quadkey names need a quadtree tile matrix set, and {tms_id} is not one"
    if len(lengths) > 1:
        shown = ", ".join(f"zoom {z} ({names[next(i for i, k in keys.items() if len(k) == z)]})"
                          for z in sorted(lengths))
        raise TileSetError(f"quadkey names come from more than one zoom level: {shown}; a mosaic holds one "
                           "zoom: solve each zoom apart")
    cells = {}
    for i, k in keys.items():
        zoom, col, row = quadkey_cell(k)
        cells[i] = (row, col)
    _refuse_doubles(names, cells, lambda cell: f"quadkey {quadkey(zoom, cell[1], cell[0])}")
    return NameFinding("quadkey", cells, zoom, tms_id, rows_from="given"), ""


def _from_rowcol(names, *, given):
    """``<base>_<row>_<col>`` names, or (None, why not)."""
    read = {i: r for i, n in enumerate(names) if (r := _read_rowcol(n)) is not None}
    if not read:
        return None, ""
    bases = Counter((b, s) for b, s, *_ in read.values())
    if len(bases) > 1:
        (b1, s1), (b2, s2) = [k for k, _ in bases.most_common(2)]
        why = (f"names of two exports are mixed ({b1}{s1}<row>{s1}<col> and {b2}{s2}<row>{s2}<col>); "
               "their cells are not used")
        if given:
            raise TileSetError(f"--tile-scheme rowcol: {why}: solve each export apart")
        return None, why
    (base, sep), = bases
    rows = [r for _, _, r, _, _, _ in read.values()]
    cols = [c for _, _, _, c, _, _ in read.values()]
    big = max(max(rows), max(cols))
    span = (max(rows) - min(rows) + 1) * (max(cols) - min(cols) + 1)
    if big > MAX_ROWCOL or span > MAX_SPAN_FACTOR * max(len(names), 2):
        example = names[next(iter(read))]
        why = (f"names such as {example!r} end in two numbers, but they span {max(rows) - min(rows) + 1} x "
               f"{max(cols) - min(cols) + 1} cells for {len(names)} tiles: read as dates or counters, not cells")
        if given:
            raise TileSetError(f"--tile-scheme rowcol: {why}")
        return None, why
    cells = {i: (r[2], r[3]) for i, r in read.items()}
    _refuse_doubles(names, cells, lambda cell: f"row {cell[0]}, column {cell[1]}")
    start = 0 if 0 in rows or 0 in cols else (1 if min(rows) == 1 and min(cols) == 1 else None)
    # Zero padding is kept when a name shows it (``03``); else numbers are written as they are.
    padded = [any(r[k] > len(str(r[k - 2])) for r in read.values()) for k in (4, 5)]
    widths = tuple(max(r[k] for r in read.values()) if pad else 0 for k, pad in zip((4, 5), padded))
    return NameFinding("rowcol", cells, base=base, start=start, widths=widths, separator=sep,
                       rows_from="given"), ""


def with_names(tileset, finding):
    """``tileset`` with the finding attached, and for ``z/x/y`` names and
    quadkeys each named tile's georeferencing from its name.

    A named tile that also kept GeoTIFF tags or a world file must agree with
    its name (to :data:`stitch.georef.ANCHOR_TOLERANCE_PX`). ``z/x/y`` names
    whose row order (XYZ or TMS) is not settled are attached without
    georeferencing anything.

    Raises
    ------
    GeoreferenceError
        A tile's name and its own georeferencing disagree, naming both.
    """
    if not finding or (finding.scheme in ("xyz", "tms") and not finding.rows_from):
        # No names, or z/x/y rows whose order is not settled yet
        # (stitch.pipeline.place_named settles it): nothing to georeference.
        return replace(tileset, tile_names=finding)
    georefs = list(tileset.georefs)
    if finding.georeferences:
        for i in finding.cells:
            named = finding.tile_georef(tileset, i)
            own = georefs[i]
            if own is not None and not own.from_name:  # not another reading's
                _check_agree(tileset.names[i], named, own, (tileset.width, tileset.height))
            georefs[i] = named
    return replace(tileset, georefs=tuple(georefs), tile_names=finding)


def _check_agree(name, named, own, size):
    """A tile's name and its own georeferencing put its corners in the same
    places (upper left and lower right, in pixels of the name's)."""
    from .georef import ANCHOR_TOLERANCE_PX

    if own.crs is not None and own.crs != named.crs:
        raise GeoreferenceError(f"tile {name!r}: its name puts it in {named.crs.to_string()}, its {own.source} in "
                                f"{own.crs.to_string()}; one of them is wrong: fix or remove the {own.source}, or "
                                "give --tile-scheme none")
    worst = 0.0
    for corner in ((0, 0), size):
        col, row = ~named.transform * (own.transform * corner)
        worst = max(worst, float(((col - corner[0]) ** 2 + (row - corner[1]) ** 2) ** 0.5))
    if worst > ANCHOR_TOLERANCE_PX:
        dx, dy = own.transform.c - named.transform.c, own.transform.f - named.transform.f
        raise GeoreferenceError(f"tile {name!r}: its {own.source} puts it {dx:+.3f}, {dy:+.3f} map units "
                                f"({worst:.2f} px) from where its name does ({named.source}); one of them is "
                                "wrong: fix or remove the world file or tags, or give --tile-scheme none")


def restored_names(placement, finding, suffixes):
    """What each placed tile is called in the scheme: index -> relative path.

    Parameters
    ----------
    placement : stitch.layout.Placement
    finding : NameFinding
        With the names pinned (:meth:`NameFinding.offset` holds).
    suffixes : sequence of str
        Each tile's file ending, kept (``.png``).
    """
    dr, dc = finding.offset(placement)
    out = {}
    width = height = None
    if finding.georeferences:
        matrix = tile_matrix_set(finding.tile_matrix_set).matrix(finding.zoom)
        width, height = matrix.matrixWidth, matrix.matrixHeight
    for i in range(len(placement.names)):
        if placement.rows[i] < 0:
            continue
        r, c = int(placement.rows[i]) + dr, int(placement.cols[i]) + dc
        if r < 0 or c < 0 or (width is not None and (c >= width or r >= height)):
            where = f"zoom {finding.zoom}'s {width}x{height} tiles" if width is not None else "the numbering"
            raise GeoreferenceError(f"tile {placement.names[i]!r} is placed at column {c}, row {r}, outside "
                                    f"{where}; its cell cannot be named: check the flagged tiles, or pin them")
        ext = suffixes[i]
        if finding.scheme == "xyz":
            out[i] = f"{finding.zoom}/{c}/{r}{ext}"
        elif finding.scheme == "tms":
            out[i] = f"{finding.zoom}/{c}/{height - 1 - r}{ext}"
        elif finding.scheme == "quadkey":
            out[i] = f"{quadkey(finding.zoom, c, r)}{ext}"
        else:
            s = finding.separator
            base = f"{finding.base}{s}" if finding.base else ""
            out[i] = f"{base}{r:0{finding.widths[0]}d}{s}{c:0{finding.widths[1]}d}{ext}"
    return out
