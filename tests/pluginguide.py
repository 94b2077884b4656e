"""The sample family of docs/plugins.md, read from the page's code blocks and installed as an installer would.

Every fenced block of the guide whose first line is ``# file: PATH`` is a file of the sample: the package files and
its ``pyproject.toml`` make the ``sharp-orifices`` distribution; a ``.toml`` file other than ``pyproject.toml`` is a
model. :func:`install_guide_family` writes them (optionally edited, for the tests of broken plugins) and installs
the distribution into a directory for ``PYTHONPATH``: the package directories named in ``[tool.setuptools]
packages``, and a ``*.dist-info`` directory whose ``METADATA`` and ``entry_points.txt`` come from the page's
``[project]`` table, the layout pip leaves in site-packages. ``importlib.metadata`` finds the distribution as it
finds any installed one; thrustgraph's plugin manager loads it through its entry point.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
import tomllib
from pathlib import Path
from typing import Callable

ROOT = Path(__file__).resolve().parents[1]
GUIDE = ROOT / "docs" / "plugins.md"
FENCE = re.compile(r"^```(\w*)\n(.*?)^```", re.S | re.M)
FILE = re.compile(r"#\s*file:\s*(\S+)")


def guide_blocks() -> list[tuple[str, str]]:
    """(language, text) of every fenced block of the guide, in order."""
    return FENCE.findall(GUIDE.read_text())


def guide_files() -> dict[str, str]:
    """File path -> text of every ``# file:`` block of the guide."""
    return {FILE.match(body).group(1): body for _, body in guide_blocks() if FILE.match(body)}


def install_from_source(src: Path, site: Path) -> dict:
    """Install the distribution whose pyproject.toml is in ``src`` into ``site`` as an installer lays it out."""
    project_file = tomllib.loads((src / "pyproject.toml").read_text())
    assert project_file["build-system"]["build-backend"] == "setuptools.build_meta"
    project = project_file["project"]
    site.mkdir(parents=True, exist_ok=True)
    packages = project_file["tool"]["setuptools"]["packages"]
    for package in packages:
        shutil.copytree(src / package, site / package)
    dist = site / f"{project['name'].replace('-', '_')}-{project['version']}.dist-info"
    dist.mkdir()
    (dist / "METADATA").write_text(f"Metadata-Version: 2.1\nName: {project['name']}\nVersion: {project['version']}\n"
                                   f"Summary: {project.get('description', '')}\n")
    groups = project.get("entry-points", {})
    (dist / "entry_points.txt").write_text("".join(
        f"[{group}]\n" + "".join(f"{name} = {target}\n" for name, target in table.items()) + "\n"
        for group, table in groups.items()))
    (dist / "top_level.txt").write_text("".join(f"{p}\n" for p in packages))
    (dist / "INSTALLER").write_text("thrustgraph-tests\n")
    return project


def install_guide_family(work: Path, edit: Callable[[str, str], str] | None = None) -> tuple[Path, list[Path]]:
    """Write the guide's files under ``work`` (``edit(path, text)`` may change them) and install the family.

    Returns the directory to put on ``PYTHONPATH`` and the model files (written in ``work``).
    """
    src, site = work / "sharp-orifices", work / "site"
    models = []
    for path, body in guide_files().items():
        if edit is not None:
            body = edit(path, body)
        if path.endswith(".toml") and path != "pyproject.toml":
            target = work / path
            models.append(target)
        else:
            target = src / path
        target.parent.mkdir(parents=True, exist_ok=True)
        target.write_text(body)
    install_from_source(src, site)
    return site, models


def cli(args: list[str], cwd: Path, site: Path) -> subprocess.CompletedProcess:
    """Run the thrustgraph command line in a fresh process with ``site`` on PYTHONPATH."""
    env = {"PYTHONPATH": str(site), "PATH": os.environ.get("PATH", "/usr/bin:/bin"), "MPLBACKEND": "Agg"}
    return subprocess.run([sys.executable, "-m", "thrustgraph.cli", *args], cwd=cwd, env=env, capture_output=True,
                          text=True)
