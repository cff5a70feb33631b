"""Seam measures installed by other packages through entry-point metadata."""

import textwrap

import pytest
from typer.testing import CliRunner

from stitch.cli import app
from stitch.measures import available_measures, get_measure

runner = CliRunner()


@pytest.fixture
def tiny_measure(tmp_path, monkeypatch):
    """A distribution 'tiny-measure' registering measure 'tiny' under stitch.seams."""
    site = tmp_path / "site"
    dist = site / "tiny_measure-1.0.dist-info"
    dist.mkdir(parents=True)
    (dist / "METADATA").write_text("Metadata-Version: 2.1\nName: tiny-measure\nVersion: 1.0\n")
    (dist / "entry_points.txt").write_text("[stitch.seams]\ntiny = tiny_measure_mod:tiny\n")
    (site / "tiny_measure_mod.py").write_text(textwrap.dedent('''
        import numpy as np

        CALLS = []

        def tiny(left, right):
            """Absolute difference of boundary pixels: a measure without mask support."""
            CALLS.append(len(left))
            x = left[:, :, 1, :].reshape(len(left), -1)
            y = right[:, :, 1, :].reshape(len(right), -1)
            return np.abs(x[:, None, :] - y[None, :, :]).sum(-1)
    '''))
    monkeypatch.syspath_prepend(str(site))
    yield "tiny"


def test_entry_point_measure_is_listed_and_used_end_to_end(tmp_path, tiles_dir, tiny_measure):
    assert "tiny" in available_measures()
    assert runner.invoke(app, ["plugins"]).output.count("tiny") == 1
    r = runner.invoke(app, ["solve", str(tiles_dir), "-o", str(tmp_path / "m.tif"), "--seam", "tiny"])
    assert r.exit_code == 0, r.output
    import tiny_measure_mod

    assert tiny_measure_mod.CALLS, "the plugin measure was not called"
    assert '"measure": "tiny"' in (tmp_path / "m_report" / "summary.json").read_text()
    assert get_measure("tiny") is tiny_measure_mod.tiny


def test_unknown_measure_lists_choices(tmp_path, tiles_dir):
    r = runner.invoke(app, ["solve", str(tiles_dir), "-o", str(tmp_path / "m.tif"), "--seam", "nope"])
    assert r.exit_code == 1
    assert "--seam 'nope' is unknown; choose one of" in r.output and "mgc" in r.output
