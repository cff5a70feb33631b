"""Review outputs: tile footprints, a preview with the doubtful tiles marked,
the search's convergence plot, and one self-contained HTML page.

Colours follow the Okabe-Ito colour-blind-safe palette: vermillion outlines
for tiles that need a look, blue markers for pinned tiles, grey hatching for
holes.
"""

from __future__ import annotations

import base64
import html
import io
import json
import math

import numpy as np
import rasterio
from PIL import Image, ImageDraw, ImageFont
from rasterio.enums import Resampling
from shapely.geometry import Polygon, mapping
from shapely.geometry.polygon import orient as orient_ring

from .files import readable_path
from .georef import describe_extent
from .mosaic import mosaic_size

__all__ = ["convergence_png", "footprints", "index_html", "preview_png", "tiles_geojson"]

VERMILLION = (213, 94, 0)
BLUE = (0, 114, 178)
SKY = (86, 180, 233)
GREY = (150, 150, 150)
BLACK = (0, 0, 0)
WHITE = (255, 255, 255)

#: Longest side of the preview, in pixels.
PREVIEW_MAX = 2000


def footprints(placement, transform, width, height, sizes=None, step=None):
    """Shapely polygons of every placed tile in the mosaic's coordinates (index -> polygon).

    ``sizes`` (per tile file, see :attr:`stitch.tiles.TileSet.sizes`) gives
    partial edge tiles their own extent inside their cell; ``step`` (default
    the tile size) is where cells start, less for tiles that overlap.
    """
    sx, sy = (width, height) if step is None else step
    out = {}
    for i in np.flatnonzero(placement.placed):
        c0, r0 = placement.cols[i] * sx, placement.rows[i] * sy
        w, h = (width, height) if sizes is None else (int(sizes[i, 0]), int(sizes[i, 1]))
        if placement.rotations[i] % 2:
            w, h = h, w
        corners = [(c0, r0), (c0, r0 + h), (c0 + w, r0 + h), (c0 + w, r0)]
        out[int(i)] = Polygon([transform @ c for c in corners])
    return out


def tiles_geojson(result, *, native=False):
    """GeoJSON FeatureCollection of tile footprints with their review properties.

    Parameters
    ----------
    result : stitch.pipeline.SolveResult
    native : bool
        Keep the mosaic's CRS (with a ``crs`` member, as GeoJSON did before
        RFC 7946) instead of WGS 84 longitude/latitude.

    Notes
    -----
    RFC 7946 requires WGS 84 longitude/latitude, so by default coordinates are
    transformed to EPSG:4326 with PROJ (through rasterio). A mosaic in pixel
    space keeps pixel coordinates (x = column, y = -row) and says so in a
    ``stitch:coordinates`` member; such a file is not RFC 7946 GeoJSON.
    """
    from rasterio.warp import transform as warp

    p, ts, g = result.placement, result.tileset, result.georeference
    shapes = footprints(p, g.transform, ts.width, ts.height, ts.sizes, ts.step)
    threshold = result.options.confidence_threshold
    features = []
    for i, poly in shapes.items():
        poly = orient_ring(poly, sign=1.0)  # counter-clockwise exterior (RFC 7946, section 3.1.6)
        if g.crs is not None and not native:
            xs, ys = poly.exterior.coords.xy
            lon, lat = warp(g.crs, "EPSG:4326", list(xs), list(ys))
            poly = orient_ring(Polygon(zip(lon, lat)), sign=1.0)
        elif g.crs is None:
            poly = Polygon([(x, -y) for x, y in poly.exterior.coords]) if g.transform.is_identity else poly
            poly = orient_ring(poly, sign=1.0)
        conf = float(p.confidence[i]) if np.isfinite(p.confidence[i]) else None
        sides = result.side_scores[i] if result.side_scores is not None else [math.nan] * 4
        features.append({
            "type": "Feature",
            "geometry": mapping(poly),
            "properties": {
                "tile": p.names[i], "row": int(p.rows[i]), "col": int(p.cols[i]),
                "rotation": int(p.rotations[i]) * 90, "mirrored": bool(p.mirrored[i]),
                "confidence": conf,
                "seam_top": _num(sides[0]), "seam_right": _num(sides[1]),
                "seam_bottom": _num(sides[2]), "seam_left": _num(sides[3]),
                "pinned": bool(i in result.pinned), "blank": bool(ts.blank[i]),
                "low_confidence": conf is None or conf < threshold,
                "review": (str(result.review[i]) or None) if result.review is not None else None,
            },
        })
    doc = {"type": "FeatureCollection", "features": features}
    if g.crs is None:
        doc["stitch:coordinates"] = "mosaic pixels (x = column, y = -row); no CRS"
    elif native:
        doc["crs"] = {"type": "name", "properties": {"name": g.crs.to_string()}}
    return json.dumps(doc, indent=1, allow_nan=False) + "\n"


def _num(v):
    return None if v is None or not np.isfinite(v) else round(float(v), 4)


def _display(array, valid):
    """(bands, rows, cols) as RGB uint8 for viewing: 8-bit as is, others
    stretched 2-98 % per band over the ``valid`` pixels (GDAL's dataset mask)."""
    bands = array[:3] if array.shape[0] >= 3 else np.repeat(array[:1], 3, axis=0)
    valid = np.asarray(valid, bool).copy()
    if array.dtype == np.uint8:
        out = bands.copy()
        out[:, ~valid] = 0
        return np.moveaxis(out, 0, -1), valid
    if array.dtype.kind == "f":
        valid &= ~np.all(np.isnan(array), axis=0)
    out = np.zeros(bands.shape, np.uint8)
    for k in range(3):
        b = bands[k].astype(np.float64)
        v = b[valid & np.isfinite(b)]
        if v.size == 0:
            continue
        lo, hi = np.percentile(v, [2, 98])
        out[k] = np.clip((b - lo) / (hi - lo if hi > lo else 1) * 255, 0, 255).astype(np.uint8)
    out[:, ~valid] = 0
    return np.moveaxis(out, 0, -1), valid


def _font(size=14):
    try:
        return ImageFont.load_default(size=size)
    except TypeError:  # Pillow < 10.1 has only the bitmap font
        return ImageFont.load_default()


def _overlap_text(facts):
    """The overlap line of the page, from ``summary.json``'s ``inputs.overlap``."""
    if not facts:
        return "not looked for"
    merged = "; each shared strip is taken from the tile right of or below it" if facts["pixels"] else ""
    return facts["description"] + merged


def preview_png(result):
    """PNG bytes: the mosaic at most :data:`PREVIEW_MAX` px, tile grid, marks, legend."""
    p, ts = result.placement, result.tileset
    rows, cols = p.shape
    full_w, full_h = mosaic_size(ts, p)
    f = min(1.0, PREVIEW_MAX / max(full_w, full_h))
    w, h = max(1, int(round(full_w * f))), max(1, int(round(full_h * f)))
    with rasterio.open(readable_path(result.outputs["mosaic"])) as src:
        data = src.read(out_shape=(src.count, h, w), resampling=Resampling.average)
        valid = src.dataset_mask(out_shape=(h, w)) > 0
    rgb, _ = _display(data, valid)
    legend_h = 28
    img = Image.new("RGB", (w, h + legend_h), WHITE)
    img.paste(Image.fromarray(rgb), (0, 0))
    draw = ImageDraw.Draw(img, "RGBA")
    # Cells start every step (the tile size less any overlap).
    cw, chh = ts.step[0] * w / full_w, ts.step[1] * h / full_h
    tiles, _ = p.grid()
    for r in range(rows):  # holes: grey hatching
        for c in range(cols):
            if tiles[r, c] < 0:
                x0, y0 = c * cw, r * chh
                draw.rectangle([x0, y0, x0 + cw, y0 + chh], fill=GREY + (140,))
                for k in range(-int(chh), int(cw), 6):
                    draw.line([x0 + max(k, 0), y0 + max(-k, 0), x0 + min(k + chh, cw), y0 + min(chh, cw - k)],
                              fill=WHITE + (160,))
    for c in range(cols + 1):  # tile grid
        draw.line([c * cw, 0, c * cw, h], fill=WHITE + (90,))
    for r in range(rows + 1):
        draw.line([0, r * chh, w, r * chh], fill=WHITE + (90,))
    line = max(2, int(round(min(cw, chh) / 12)))
    flagged = set(result.flagged)
    for i in np.flatnonzero(p.placed):
        x0, y0 = p.cols[i] * cw, p.rows[i] * chh
        if p.names[i] in flagged:
            draw.rectangle([x0 + line / 2, y0 + line / 2, x0 + cw - line / 2, y0 + chh - line / 2],
                           outline=VERMILLION + (255,), width=line)
        if i in result.pinned:
            rad = max(3, min(cw, chh) / 6)
            cx, cy = x0 + cw / 2, y0 + chh / 2
            draw.ellipse([cx - rad, cy - rad, cx + rad, cy + rad], fill=BLUE + (230,), outline=WHITE + (255,))
    font = _font(13)
    y = h + 7
    x = 6
    for label, kind, colour in (("needs a look", "box", VERMILLION), ("pinned", "dot", BLUE),
                                ("hole", "fill", GREY)):
        if kind == "box":
            draw.rectangle([x, y, x + 14, y + 14], outline=colour, width=3)
        elif kind == "dot":
            draw.ellipse([x, y, x + 14, y + 14], fill=colour)
        else:
            draw.rectangle([x, y, x + 14, y + 14], fill=colour)
        draw.text((x + 20, y), label, fill=BLACK, font=font)
        x += 20 + int(draw.textlength(label, font=font)) + 18
    buf = io.BytesIO()
    img.save(buf, format="PNG")
    return buf.getvalue()


def convergence_png(best, mean, *, size=(720, 360)):
    """PNG bytes: total seam cost of the best placement and the population mean per generation."""
    w, h = size
    img = Image.new("RGB", (w, h), WHITE)
    draw = ImageDraw.Draw(img)
    font = _font(13)
    left, right, top, bottom = 80, 20, 30, 50
    draw.text((left, 8), "total seam cost per generation (lower is better)", fill=BLACK, font=font)
    pw, ph = w - left - right, h - top - bottom
    draw.rectangle([left, top, left + pw, top + ph], outline=BLACK)
    if len(best) == 0:
        draw.text((left + 10, top + ph / 2), "no evolutionary search ran (greedy placement)", fill=BLACK, font=font)
    else:
        values = np.array(list(best) + list(mean), float)
        lo, hi = float(values.min()), float(values.max())
        span = hi - lo if hi > lo else 1.0
        n = len(best)

        def xy(k, v):
            return left + (k / max(n - 1, 1)) * pw, top + ph - (v - lo) / span * ph

        for series, colour in ((mean, SKY), (best, BLUE)):
            pts = [xy(k, v) for k, v in enumerate(series)]
            if len(pts) == 1:
                pts = pts * 2
            draw.line(pts, fill=colour, width=3)
        for v in (lo, hi):
            draw.text((6, xy(0, v)[1] - 7), f"{v:,.0f}" if abs(v) >= 100 else f"{v:.3g}", fill=BLACK, font=font)
        draw.text((left, top + ph + 6), "1", fill=BLACK, font=font)
        draw.text((left + pw - 30, top + ph + 6), str(n), fill=BLACK, font=font)
        draw.text((left + pw / 2 - 30, top + ph + 6), "generation", fill=BLACK, font=font)
        y = h - 20
        for label, colour, x in (("best", BLUE, left), ("population mean", SKY, left + 90)):
            draw.line([x, y + 7, x + 24, y + 7], fill=colour, width=3)
            draw.text((x + 30, y), label, fill=BLACK, font=font)
    buf = io.BytesIO()
    img.save(buf, format="PNG")
    return buf.getvalue()


def index_html(summary, preview, convergence, flagged_rows):
    """One self-contained HTML page: images embedded, no network."""
    def img(data, alt):
        return f'<img alt="{alt}" src="data:image/png;base64,{base64.b64encode(data).decode()}">'

    rows = "\n".join(
        f"<tr><td>{html.escape(r['tile'])}</td><td>{r['row']}</td><td>{r['col']}</td><td>{r['rotation']}</td>"
        f"<td>{'yes' if r['mirrored'] else 'no'}</td><td>{r['confidence']}</td><td>{html.escape(r['why'])}</td></tr>"
        for r in flagged_rows
    ) or '<tr><td colspan="7">no tile flagged</td></tr>'
    g = summary["georeference"]
    ev = summary.get("grid_inference")
    inference = ""
    if ev:
        inference = (f"; runner-up {ev['runner_up'][0]} x {ev['runner_up'][1]}, margin {ev['margin']:.1%}"
                     if ev["runner_up"] else "; no other grid tried is a real alternative")
    v = summary["verdict"]
    facts = [
        ("verdict", f"{v['level']}: {v['confident_tiles']:.0%} of the tiles rest on confident seams, "
                    f"{v['buddy_seams']:.0%} of the seams join best buddies"
                    + (f" ({'; '.join(v['reasons'])})" if v["reasons"] else "")),
        ("tiles", f"{summary['inputs']['tiles']} ({summary['inputs']['tile_size'][0]} x "
                  f"{summary['inputs']['tile_size'][1]} px, {summary['inputs']['bands']} band(s), "
                  f"{summary['inputs']['dtype']})"),
        ("grid", f"{summary['grid'][0]} x {summary['grid'][1]} ({summary['grid_source']}{inference})"),
        ("georeference", f"{g['source']}" + (f" — {g['crs']}" if g['crs'] else "")),
        ("extent", describe_extent(g)),
        ("run", f"started {summary['run']['started']}, stitch {summary['run']['stitch']}"),
        ("search", f"{summary['search']['strategy']}, {summary['search']['generations']} generations, "
                   f"seed {summary['options']['seed']}"),
        ("overlap", _overlap_text(summary["inputs"].get("overlap"))),
        ("seam measure", summary["seam_measure"]
         + (" (shared strips of overlapping tiles)" if summary["seam_measure"] == "overlap"
            else " (chosen by auto)" if summary["options"]["measure"] == "auto" else "")),
        ("flagged tiles", str(len(summary["flagged_tiles"]))),
    ]
    facts_html = "\n".join(f"<tr><th>{html.escape(k)}</th><td>{html.escape(v)}</td></tr>" for k, v in facts)
    warnings_html = "".join(f"<li>{html.escape(w)}</li>" for w in summary["warnings"]) or "<li>none</li>"
    return f"""<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<title>stitch review: {html.escape(str(summary['outputs'].get('mosaic', '')))}</title>
<style>
body {{ font-family: system-ui, sans-serif; margin: 1.5em auto; max-width: 1100px; color: #222; }}
.caution {{ border-left: 6px solid #D55E00; background: #fdf0e6; padding: .6em 1em; }}
table {{ border-collapse: collapse; margin: .5em 0 1.5em; }}
th, td {{ border: 1px solid #bbb; padding: .25em .6em; text-align: left; }}
img {{ max-width: 100%; border: 1px solid #999; }}
pre {{ background: #f4f4f4; padding: 1em; overflow-x: auto; font-size: .85em; }}
</style>
</head>
<body>
<h1>Mosaic review</h1>
<p class="caution"><strong>Caution.</strong> {html.escape(summary['caution'])}</p>
<h2>Run</h2>
<table id="facts">
{facts_html}
</table>
<h2>Tiles that need a look</h2>
<table id="flagged">
<thead><tr><th>tile</th><th>row</th><th>col</th><th>rotation</th><th>mirrored</th><th>confidence</th><th>why</th></tr></thead>
<tbody>
{rows}
</tbody>
</table>
<h2>Preview</h2>
<p>Vermillion outlines: tiles that need a look. Blue dots: pinned tiles. Grey hatching: holes.</p>
{img(preview, "mosaic preview")}
<h2>Search convergence</h2>
{img(convergence, "search convergence")}
<h2>Warnings</h2>
<ul>{warnings_html}</ul>
<h2>Summary</h2>
<pre>{html.escape(json.dumps(summary, indent=2))}</pre>
</body>
</html>
"""
