"""The report folder: what was placed where, how sure, and how the run went.

* ``placement.csv``: the documented contract (see :mod:`stitch.layout`);
* ``summary.json``: inputs, settings, seed, library versions, timings,
  georeferencing (with control residuals), flagged tiles and warnings;
* ``tiles.geojson``: tile footprints with review properties
  (:func:`stitch.review.tiles_geojson`);
* ``preview.png``, ``convergence.png`` and ``index.html``
  (:mod:`stitch.review`).
"""

from __future__ import annotations

import json
import platform
import shlex
import sys
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path

import numpy as np

from . import __version__
from .confidence import grid_source
from .errors import OutputError
from .files import check_outputs, write_bytes_atomic, write_text_atomic
from .layout import write_placement_csv
from .mosaic import CAUTION, hole_marking
from .review import convergence_png, index_html, preview_png, tiles_geojson

__all__ = ["REPORT_FILES", "check_report", "flagged_rows", "library_versions", "report_paths", "summary_dict", "write_report"]

#: Files the report folder holds, by role.
REPORT_FILES = {
    "placement": "placement.csv",
    "summary": "summary.json",
    "footprints": "tiles.geojson",
    "preview": "preview.png",
    "convergence": "convergence.png",
    "page": "index.html",
}


def report_paths(folder):
    """Paths of every report file in ``folder``."""
    folder = Path(folder)
    return {role: folder / name for role, name in REPORT_FILES.items()}


def library_versions():
    """Versions of the libraries a result depends on."""
    out = {"python": platform.python_version()}
    for name in ("stitch", "numpy", "rasterio", "scikit-image", "shapely", "numba", "typer"):
        try:
            out[name] = version(name)
        except PackageNotFoundError:
            out[name] = None
    import rasterio

    out["gdal"] = rasterio.__gdal_version__
    return out


def _jsonable(value):
    if isinstance(value, dict):
        return {str(k) if not isinstance(k, tuple) else "x".join(map(str, k)): _jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_jsonable(v) for v in value]
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, Path):
        return str(value)
    if isinstance(value, float) and not np.isfinite(value):
        return None
    return value


def _control(fit):
    if fit is None:
        return None
    return {"method": fit.method, "rmse_map": fit.rmse_map, "rmse_px": fit.rmse_px,
            "points": [{"tile": p.tile, "col": p.col, "row": p.row, "x": p.x, "y": p.y, "dx": float(dx),
                        "dy": float(dy), "residual_map": float(m), "residual_px": float(px)}
                       for p, (dx, dy), m, px in zip(fit.points, fit.residuals_xy, fit.residuals_map,
                                                     fit.residuals_px)],
            "residuals_map": fit.residuals_map.tolist(), "residuals_px": fit.residuals_px.tolist(),
            "outliers": list(fit.outliers)}


def summary_dict(result):
    """Everything a reviewer needs to know about a run, as plain data."""
    p = result.placement
    g = result.georeference
    holes = int(p.shape[0] * p.shape[1] - p.placed.sum())
    return _jsonable({
        "caution": CAUTION,
        "run": {"started": result.started, "command_line": shlex.join(sys.argv), "stitch": __version__},
        "inputs": {"tiles_dir": str(result.tileset.folder), "tiles": len(result.tileset),
                   "tile_size": [result.tileset.width, result.tileset.height],
                   "bands": result.tileset.count, "dtype": result.tileset.dtype,
                   "nodata": result.tileset.nodata,
                   "overlap": result.overlap.facts() if result.overlap is not None else None,
                   "tile_names": (result.tileset.tile_names.facts(len(result.tileset))
                                  if result.tileset.tile_names is not None else None),
                   "blank_tiles": [result.tileset.names[i] for i in np.flatnonzero(result.tileset.blank)]},
        "options": result.options.as_dict(),
        "grid": list(p.shape),
        "grid_source": grid_source(result.options.grid is not None, result.search.shape_evidence),
        "grid_inference": result.search.shape_evidence,
        "verdict": result.verdict.as_dict() if result.verdict is not None else None,
        "holes": {"cells": holes, "marked_by": hole_marking(result.tileset.dtype, result.tileset.nodata, holes > 0)},
        "seam_measure": result.measure,
        "shape_scores": result.search.shape_scores,
        "search": {"strategy": result.search.strategy, "generations": result.search.generations,
                   "cost": result.search.cost, "best_cost": list(result.search.best_history),
                   "mean_cost": list(result.search.mean_history)},
        "georeference": {"source": g.source, "crs": g.crs.to_string() if g.crs else None,
                         **result.facts, "control": _control(result.control)},
        "flagged_tiles": result.flagged,
        "interchangeable_tiles": ([p.names[i] for i in np.flatnonzero(result.review == "interchangeable")]
                                  if result.review is not None else []),
        "outputs": result.outputs,
        "timings_s": {k: round(v, 4) for k, v in result.timings.items()},
        "warnings": list(result.warnings),
        "versions": library_versions(),
    })


def check_report(folder, *, overwrite=False):
    """Refuse early if the report cannot be written (see :func:`stitch.files.check_outputs`)."""
    folder = Path(folder)
    if folder.is_dir():
        check_outputs(report_paths(folder).values(), overwrite=overwrite)
    elif folder.exists():
        raise OutputError(f"report path {str(folder)!r} is a file; give a folder with --report")
    else:
        check_outputs([folder], overwrite=overwrite)


def write_report(result, folder, *, overwrite=False):
    """Write the report files into ``folder`` (created if missing).

    Returns
    -------
    dict
        Role -> written path.
    """
    folder = Path(folder)
    paths = report_paths(folder)
    check_report(folder, overwrite=overwrite)
    folder.mkdir(exist_ok=True)
    summary = summary_dict(result)
    write_placement_csv(result.placement, paths["placement"], overwrite=overwrite,
                        review=None if result.review is None else list(result.review))
    write_text_atomic(paths["summary"], json.dumps(summary, indent=2) + "\n", overwrite=overwrite)
    write_text_atomic(paths["footprints"], tiles_geojson(result), overwrite=overwrite)
    preview = preview_png(result)
    convergence = convergence_png(result.search.best_history, result.search.mean_history)
    write_bytes_atomic(paths["preview"], preview, overwrite=overwrite)
    write_bytes_atomic(paths["convergence"], convergence, overwrite=overwrite)
    write_text_atomic(paths["page"], index_html(summary, preview, convergence, flagged_rows(result)),
                      overwrite=overwrite)
    return paths


def flagged_rows(result):
    """Rows of the flagged-tile table, each with the reason."""
    p, ts = result.placement, result.tileset
    threshold = result.options.confidence_threshold
    rows = []
    for name in result.flagged:
        i = p.names.index(name)
        why = ["blank tile: no evidence"] if ts.blank[i] else []
        if result.review is not None and result.review[i] == "interchangeable":
            why.append("interchangeable: other flagged tiles look just like it, any would do here")
        sides = result.side_scores[i] if result.side_scores is not None else np.full(4, np.nan)
        weak = [label for label, v in zip(("top", "right", "bottom", "left"), sides)
                if np.isfinite(v) and v < threshold / 2]
        if weak:
            why.append("weak seams: " + ", ".join(weak))
        why.append(f"confidence below {threshold}")
        rows.append({"tile": name, "row": int(p.rows[i]), "col": int(p.cols[i]), "rotation": int(p.rotations[i]) * 90,
                     "mirrored": bool(p.mirrored[i]), "confidence": f"{p.confidence[i]:.3f}", "why": "; ".join(why)})
    return sorted(rows, key=lambda r: float(r["confidence"]))  # most doubtful first

