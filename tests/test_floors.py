"""The dependency floors CI installs (.ci/floors.txt) are exactly the lowest versions pyproject.toml declares.

.ci/check-floors installs .ci/floors.txt into an environment of its own and runs the suite there; this test keeps
the two files from drifting apart, so a floor raised or added in pyproject.toml is tested at once.
"""

from __future__ import annotations

import re
import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
_REQ = re.compile(r"^(?P<name>[A-Za-z0-9_.-]+)(?:\[(?P<extras>[^\]]+)\])?\s*>=\s*(?P<floor>[^,;\s]+)\s*$")


def _key(name: str) -> str:
    return re.sub(r"[-_.]+", "-", name).lower()


def declared_floors() -> dict[str, str]:
    """Normalised package name -> the version after ``>=``, over the dependencies and every extra; a package
    asked for with extras (``dask[distributed]``) also floors the package of the same name as the extra."""
    project = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]
    reqs = list(project["dependencies"])
    for extra in project["optional-dependencies"].values():
        reqs += extra
    floors: dict[str, str] = {}
    for req in reqs:
        m = _REQ.match(req)
        assert m, f"{req!r}: every dependency must declare its floor as NAME>=VERSION"
        names = [m.group("name")] + [e.strip() for e in (m.group("extras") or "").split(",") if e.strip()]
        for name in names:
            assert floors.setdefault(_key(name), m.group("floor")) == m.group("floor"), \
                f"{name} is declared with two different floors"
    return floors


def pinned_floors() -> dict[str, str]:
    out = {}
    for line in (ROOT / ".ci" / "floors.txt").read_text().splitlines():
        line = line.split("#", 1)[0].strip()
        if line:
            name, version = line.split("==")
            out[_key(name)] = version
    return out


def _same_version(a: str, b: str) -> bool:
    pad = lambda v: [int(x) for x in v.split(".")] + [0] * (3 - len(v.split(".")))   # 3.0 == 3.0.0
    return pad(a) == pad(b)


def test_the_ci_floors_are_the_declared_floors():
    declared, pinned = declared_floors(), pinned_floors()
    assert set(declared) == set(pinned)
    for name, floor in declared.items():
        assert _same_version(floor, pinned[name]), f"{name}: pyproject.toml says >={floor}, .ci/floors.txt pins " \
                                                   f"{pinned[name]}"


def test_ci_runs_the_floors():
    assert "bash .ci/check-floors" in (ROOT / ".ci" / "run").read_text()
    script = (ROOT / ".ci" / "check-floors").read_text()
    assert "-c .ci/floors.txt" in script and "-m pytest" in script
