"""Regenerate demo_tiles/: the fictional Larkmoor Fen survey block.

Larkmoor Fen is invented: a drone survey of farmland with a meandering drain,
a farm track, hedgerows and a copse, rendered procedurally at 0.25 m per
pixel in WGS 84 / UTM zone 30N (EPSG:32630). The orthophoto is cut into 8 x 10
tiles of 64 px, the tiles get scrambled names and lose their georeferencing,
except two that keep their GeoTIFF tags, so the demo's mosaic comes out
georeferenced. ``answer_key.csv`` holds the true placement and
``control_points.csv`` five surveyed points (``tile,col,row,x,y``) for trying
``--gcps``.

Run from the repository root::

    python demo_tiles/make_demo.py
"""

import sys
import tempfile
from pathlib import Path

import numpy as np
import rasterio
from rasterio.transform import from_origin
from scipy import ndimage
from scipy.spatial import cKDTree

ROWS, COLS, TILE = 8, 10, 64
ORIGIN = (431_200.0, 5_802_400.0)  # fictional block, upper-left corner
PIXEL = 0.25
SEED = 20261201


def landscape(height, width, rng):
    """An RGB uint8 orthophoto of invented farmland.

    Detail (fields, copses, tracks) grows with the area, so a large block looks
    like more farmland rather than a few huge fields.
    """
    yy, xx = np.mgrid[0:height, 0:width].astype(float)
    scale = max(1.0, height * width / (512 * 640))

    # Fields: a Voronoi patchwork, each with its own crop colour and row direction.
    n_fields = int(round(14 * scale))
    centres = rng.uniform([0, 0], [height, width], size=(n_fields, 2))
    _, field = cKDTree(centres).query(np.column_stack([yy.ravel(), xx.ravel()]))
    field = field.reshape(height, width)
    palette = np.array([
        [118, 140, 62], [150, 160, 80], [184, 168, 104], [96, 122, 58], [160, 130, 90],
        [132, 150, 72], [170, 176, 120], [110, 100, 70], [140, 160, 96], [190, 180, 130],
    ], float)
    colour = palette[rng.integers(0, len(palette), n_fields)][field]
    angle = rng.uniform(0, np.pi, n_fields)[field]
    spacing = rng.uniform(5, 11, n_fields)[field]
    rows = np.sin((xx * np.cos(angle) + yy * np.sin(angle)) * 2 * np.pi / spacing)
    colour *= (1 + 0.07 * rows)[..., None]

    # Hedgerows along field boundaries.
    edges = ndimage.morphological_gradient(field, size=3) > 0
    hedge = ndimage.binary_dilation(edges, iterations=2)
    colour[hedge] = colour[hedge] * 0.35 + np.array([40, 70, 30]) * 0.65

    # A meandering drain with muddy banks.
    centre = width * 0.35 + 60 * np.sin(yy[:, 0] / 70.0) + 25 * np.sin(yy[:, 0] / 23.0 + 1.0)
    dist = np.abs(xx - centre[:, None])
    bank = dist < 14
    water = dist < 8
    colour[bank] = colour[bank] * 0.3 + np.array([120, 105, 80]) * 0.7
    colour[water] = np.array([52, 78, 92]) + 10 * np.sin(yy[water] / 4.0)[:, None]

    # Farm tracks crossing the block (one on the demo's block).
    offsets = [0.6] + (list(rng.uniform(0.05, 0.95, int(round(np.sqrt(scale))) - 1)) if scale > 1 else [])
    for k, off in enumerate(offsets):
        slope = 0.25 if k == 0 else rng.uniform(-0.6, 0.6)
        track = np.abs(yy - (off * height + slope * (xx - width / 2))) < 5
        colour[track & ~water] = np.array([196, 186, 160])

    # Copses: clustered tree crowns with shadows.
    boxes = [(0.1, 0.65, 0.4, 0.95)]
    for _ in range(int(round(scale)) - 1):
        y0, x0 = rng.uniform(0, 0.85), rng.uniform(0, 0.85)
        boxes.append((y0, x0, y0 + 0.12, x0 + 0.12))
    for by0, bx0, by1, bx1 in boxes:
        copse = rng.uniform([height * by0, width * bx0], [height * by1, width * bx1], size=(70, 2))
        for cy, cx in copse:
            r = rng.uniform(5, 11)
            y0, y1 = max(0, int(cy - r) - 1), min(height, int(cy + r) + 6)
            x0, x1 = max(0, int(cx - r) - 1), min(width, int(cx + r) + 6)
            wy, wx = yy[y0:y1, x0:x1], xx[y0:y1, x0:x1]
            crown = (wy - cy) ** 2 + (wx - cx) ** 2 < r * r
            shadow = (wy - cy - 4) ** 2 + (wx - cx - 4) ** 2 < r * r
            win = colour[y0:y1, x0:x1]
            win[shadow & ~crown] *= 0.55
            win[crown] = np.array([48, 86, 40]) * rng.uniform(0.8, 1.2)

    # Two barns.
    for by, bx, bh, bw in ((height * 0.75, width * 0.8, 26, 40), (height * 0.82, width * 0.72, 18, 22)):
        roof = (np.abs(yy - by) < bh / 2) & (np.abs(xx - bx) < bw / 2)
        colour[roof] = np.where((yy[roof] < by)[:, None], [150, 70, 60], [120, 55, 48])

    # Sensor-like texture and a gentle illumination falloff.
    colour += rng.normal(0, 4, colour.shape)
    colour += ndimage.gaussian_filter(rng.normal(0, 12, (height, width)), 6)[..., None]
    colour *= (1 - 0.08 * ((xx / width - 0.5) ** 2 + (yy / height - 0.5) ** 2))[..., None]
    return np.clip(colour, 0, 255).astype(np.uint8)


def main(out_dir=Path(__file__).parent):
    from stitch.puzzles import cut_raster

    rng = np.random.default_rng(SEED)
    img = landscape(ROWS * TILE, COLS * TILE, rng)
    out_dir = Path(out_dir)
    for old in out_dir.glob("tile_*.tif"):
        old.unlink()
    with tempfile.TemporaryDirectory() as tmp:
        src = Path(tmp) / "larkmoor_fen.tif"
        profile = dict(driver="GTiff", width=img.shape[1], height=img.shape[0], count=3, dtype="uint8",
                       crs="EPSG:32630", transform=from_origin(*ORIGIN, PIXEL, PIXEL), photometric="rgb")
        with rasterio.open(src, "w", **profile) as dst:
            dst.write(np.moveaxis(img, -1, 0))
        result = cut_raster(src, out_dir, TILE, shuffle=True, strip_georef=True, keep_georef=2, seed=SEED,
                            overwrite=True)
    write_control_points(result.key, out_dir / "control_points.csv")
    print(f"wrote {len(result.key.names)} tiles; georeferenced: {', '.join(result.georeferenced)}")


def write_control_points(key, path):
    """Five points at tile-pixel centres spread over the block, with their true coordinates."""
    transform = from_origin(*ORIGIN, PIXEL, PIXEL)
    lines = ["tile,col,row,x,y"]
    for (r, c), (u, v) in [((0, 0), (10.5, 12.5)), ((0, COLS - 1), (50.5, 8.5)), ((ROWS - 1, 0), (5.5, 60.5)),
                           ((ROWS - 1, COLS - 1), (60.5, 40.5)), ((ROWS // 2, COLS // 2), (32.5, 32.5))]:
        i = [k for k in range(len(key.names)) if key.rows[k] == r and key.cols[k] == c][0]
        x, y = transform @ (c * TILE + u, r * TILE + v)
        lines.append(f"{key.names[i]},{u},{v},{x:.3f},{y:.3f}")
    Path(path).write_text("\n".join(lines) + "\n")


if __name__ == "__main__":
    main(*sys.argv[1:])
