"""Reproducible output: the same model and versions give bit-identical files, and every file says what made it."""

from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from thrustgraph import fly, load_model
from thrustgraph.models.modelfile import default_model_path, dumps_model
from thrustgraph.models.plugins import get_plugin_manager, plugin_versions
from thrustgraph import __version__


def export(tmp: Path, seed: str, *extra: str) -> Path:
    """Run ``thrustgraph export`` in a fresh process (its own hash seed) into ``tmp``."""
    env = {**os.environ, "PYTHONHASHSEED": seed}
    proc = subprocess.run([sys.executable, "-m", "thrustgraph.cli", "export", "--out-dir", str(tmp), *extra],
                          capture_output=True, text=True, env=env)
    assert proc.returncode == 0, proc.stderr
    return tmp


def test_two_processes_write_bit_identical_files(tmp_path):
    a = export(tmp_path / "a", "1")
    b = export(tmp_path / "b", "2")
    names = sorted(p.name for p in a.iterdir())
    assert names == sorted(p.name for p in b.iterdir())
    assert "bottle-rocket.csv" in names and "bottle-rocket.json" in names
    for n in names:
        assert (a / n).read_bytes() == (b / n).read_bytes(), n
    # ...and a changed parameter changes them (so the comparison can fail).
    c = export(tmp_path / "c", "1", "--set", "components.bottle.fill=0.3")
    assert (c / "bottle-rocket.csv").read_bytes() != (a / "bottle-rocket.csv").read_bytes()


def test_every_output_records_versions_and_the_model_hash(tmp_path):
    m = load_model(default_model_path())
    r = fly(m)
    digest = hashlib.sha256(dumps_model(m).encode("utf-8")).hexdigest()
    plugins = plugin_versions(get_plugin_manager())
    assert r.provenance["model_sha256"] == digest
    assert r.provenance["thrustgraph"] == __version__ and r.provenance["plugins"] == plugins

    csv_text = r.to_csv(provenance=True)
    head = [line for line in csv_text.splitlines()[:6] if line.startswith("#")]
    assert head[0] == f"# thrustgraph {__version__}"
    assert f"# model sha256: {digest}" in head
    assert all(f"{k} = {v}" in head[1] for k, v in plugins.items())

    doc = json.loads(r.to_json())
    assert doc["provenance"] == {**r.provenance}

    from thrustgraph.outputs.report import render_report
    page = render_report(r, m, graph=False, plots=["thrust"])
    assert digest in page and f"<td>{__version__}</td>" in page
    assert all(f"<td>plugin {k}</td>" in page for k in plugins)

    pytest.importorskip("pyarrow")
    table = r.to_arrow()
    assert json.loads(table.schema.metadata[b"thrustgraph.provenance"]) == json.loads(json.dumps(r.provenance))


def test_model_hash_follows_the_model_not_the_file_layout(tmp_path):
    m = load_model(default_model_path())
    reordered = default_model_path().read_text().replace("\n\n", "\n\n# a comment changes nothing\n", 1)
    f = tmp_path / "same.toml"
    f.write_text(reordered)
    assert fly(load_model(f)).provenance["model_sha256"] == fly(m).provenance["model_sha256"]
