"""Move thrustgraph's flat modules into the layer subpackages of docs/layout.md, rewriting every reference.

The layer of each module is read from the table in tests/test_layout.py. Relative imports in the core are
re-resolved from each module's old and new package; ``thrustgraph.X`` and ``thrustgraph/X.py`` in tests,
benchmarks, tools, plugins, docs, README, DEVELOPERS.md and pyproject are rewritten, and ``from thrustgraph import
MODULE`` lines are split (names of the public API stay). Then run, in order::

    python tools/move_into_layers.py .          # git mv + rewrite (clean tree)
    python tools/move_into_layers_tests.py .    # the layout test's table and docs/layout.md name the moved modules
    python tools/move_into_layers_docs.py .     # DEVELOPERS.md's map of the core

Tried on the tree of 2026-12-05 (commit f886a09): the layout, contract, registry and straight-line tests passed.
"""
import os
import re
import subprocess
import sys
from pathlib import Path

import ast as _ast


def load_layers(root: Path) -> tuple[dict, dict]:
    """module -> layer (moved modules only) and layer -> its 'May import' text, from tests/test_layout.py."""
    tree = _ast.parse((root / "tests" / "test_layout.py").read_text())
    layers = may = None
    for node in tree.body:
        if isinstance(node, _ast.AnnAssign) and isinstance(node.target, _ast.Name):
            if node.target.id == "LAYERS":
                layers = _ast.literal_eval(node.value)
    mapping = {}
    for layer, mods in layers.items():
        if layer in ("cli", "package"):
            continue
        for m in mods:
            mapping[m] = layer
    return mapping, layers


MAP: dict = {}
DOCS = {
    "base": "Foundations every layer may use and that know nothing of vehicles: errors, units, the version, "
            "limits on work, interrupts, progress lines, output files written all or none, the float/array "
            "namespace.",
    "kinds": "The plugin contract: parameter specs, outcome definitions, component and environment kinds, the "
             "checked contract, the hook specifications and the model records a plugin is handed.",
    "balance": "The balance plan, the one balance over floats or arrays, its straight lines and output samples, "
               "vector helpers, and the outcome registry computed from an integrated solution.",
    "models": "Model files: the plugin manager, stages and triggers as written, a model checked against the "
              "installed kinds, model files read and written, design parameters.",
    "flight": "Assembly and integration: a parsed model assembled into a system, stage separation, bounded "
              "solver work, the phase-by-phase integration, the flight result and the ensemble of designs.",
    "outputs": "What a flight is turned into for people and programs: export formats, plots and their "
               "registry, study plots, the HTML report.",
    "measured": "Measured data: records read and checked, predictions compared with them, parameters fitted.",
    "studies": "Design studies: what a study varies, its engines, tables, sweeps, dispersion, optimisation "
               "and the study registry.",
}
MAY = {}


def new_module(old: str) -> str:
    """thrustgraph.X[.rest] -> thrustgraph.LAYER.X[.rest] for a moved X."""
    parts = old.split(".")
    if len(parts) >= 2 and parts[0] == "thrustgraph" and parts[1] in MAP:
        return ".".join(["thrustgraph", MAP[parts[1]]] + parts[1:])
    return old


def resolve(pkg: str, dots: int, name: str) -> str:
    base = pkg.split(".")
    if dots > 1:
        base = base[: len(base) - (dots - 1)]
    return ".".join(base + ([name] if name else []))


def relative(from_pkg: str, target: str) -> str:
    a = from_pkg.split(".")
    b = target.split(".")
    k = 0
    while k < len(a) and k < len(b) and a[k] == b[k]:
        k += 1
    up = len(a) - k
    return "." * (up + 1) + ".".join(b[k:])


FROM_REL = re.compile(r"^(\s*from\s+)(\.+)([\w.]*)(\s+import\s+)(.*)$")


def rewrite_framework_file(path: Path, root: Path, old_pkg: str, new_pkg: str) -> str:
    text = path.read_text()
    out = []
    for line in text.splitlines(keepends=True):
        m = FROM_REL.match(line.rstrip("\n"))
        if m:
            head, dots, name, imp, rest = m.groups()
            absolute = resolve(old_pkg, len(dots), name)
            if not name:
                # from . import a, b (modules of the package): only single plain names handled
                names = [n.strip() for n in rest.split(",")]
                mods = [n.split(" as ")[0].strip() for n in names]
                if len(mods) == 1 and absolute == "thrustgraph" and mods[0] in MAP:
                    target = new_module(f"thrustgraph.{mods[0]}")
                    parent, _, leaf = target.rpartition(".")
                    rel = relative(new_pkg, parent)
                    line = f"{head}{rel}{imp}{rest}\n"
                else:
                    rel = relative(new_pkg, absolute) if absolute != new_pkg else "."
                    line = f"{head}{rel}{imp}{rest}\n"
            else:
                target = new_module(absolute)
                rel = relative(new_pkg, target)
                line = f"{head}{rel}{imp}{rest}\n"
        out.append(line)
    return "".join(out)


DOTTED = None
SLASHED = None


API: set = set()
FROM_TOP = re.compile(r"^([ \t]*)from thrustgraph import (.+)$", re.M)


def _split_from_top(m):
    indent, rest = m.group(1), m.group(2)
    if rest.strip().startswith("(") or "\\" in rest:
        return m.group(0)
    names = [n.strip() for n in rest.split(",")]
    keep, lines = [], []
    for n in names:
        base = n.split(" as ")[0].strip()
        if base in MAP and base not in API:
            lines.append(f"{indent}from thrustgraph.{MAP[base]} import {n}")
        else:
            keep.append(n)
    if not lines:
        return m.group(0)
    if keep:
        lines.insert(0, f"{indent}from thrustgraph import {', '.join(keep)}")
    return "\n".join(lines)


def rewrite_text(text: str) -> str:
    def dotted(m):
        return "thrustgraph." + MAP[m.group(1)] + "." + m.group(1)

    def slashed(m):
        return "thrustgraph/" + MAP[m.group(1)] + "/" + m.group(1) + ".py"
    names = "|".join(sorted(MAP, key=len, reverse=True))
    text = re.sub(r"(?<![\w.])thrustgraph\.(" + names + r")\b(?![\w(])", dotted, text)
    text = re.sub(r"thrustgraph/(" + names + r")\.py\b", slashed, text)
    return FROM_TOP.sub(_split_from_top, text)


def main(root: Path) -> None:
    fw = root / "framework" / "thrustgraph"
    mapping, layers = load_layers(root)
    MAP.update(mapping)
    tree = _ast.parse((root / "tests" / "test_layout.py").read_text())
    env = {}
    for node in tree.body:
        if isinstance(node, (_ast.Assign, _ast.AnnAssign)):
            tgt = node.targets[0] if isinstance(node, _ast.Assign) else node.target
            if isinstance(tgt, _ast.Name) and tgt.id in ("_BELOW", "MAY_IMPORT"):
                src = _ast.unparse(node.value)
                env[tgt.id] = eval(src, {}, env)
    MAY.update(env["MAY_IMPORT"])
    for node in _ast.parse((fw / "__init__.py").read_text()).body:
        if isinstance(node, _ast.Assign) and getattr(node.targets[0], "id", "") == "__all__":
            API.update(_ast.literal_eval(node.value))
    moved = {}
    for mod, layer in MAP.items():
        src = fw / f"{mod}.py"
        if not src.exists():
            print("missing", mod)
            continue
        moved[mod] = layer
    # where each framework file was and will be
    files = {}
    for p in sorted(fw.rglob("*.py")):
        if "__pycache__" in p.parts:
            continue
        rel = p.relative_to(fw.parent)
        pkg_parts = list(rel.parts[:-1])
        old_pkg = ".".join(pkg_parts)
        stem = p.stem
        if len(pkg_parts) == 1 and stem in moved:
            new_path = fw / moved[stem] / p.name
            new_pkg = f"thrustgraph.{moved[stem]}"
        else:
            new_path = p
            new_pkg = old_pkg
        if stem == "__init__":
            pass
        files[p] = (new_path, old_pkg, new_pkg)
    # rewrite contents first (at the old paths), then move
    for p, (new_path, old_pkg, new_pkg) in files.items():
        text = rewrite_framework_file(p, root, old_pkg, new_pkg)
        text = rewrite_text(text)
        p.write_text(text)
    for layer in sorted(set(MAP.values())):
        doc = DOCS[layer]
        may = ", ".join(f"thrustgraph.{x}" for x in MAY[layer]) or "nothing of thrustgraph"
        d = fw / layer
        d.mkdir(exist_ok=True)
        init = d / "__init__.py"
        init.write_text(f'"""{doc}\n\nMay import: {may} (docs/layout.md; checked by tests/test_layout.py).\n"""\n')
        subprocess.run(["git", "add", str(init)], cwd=root, check=True)
    for p, (new_path, old_pkg, new_pkg) in files.items():
        if new_path != p:
            subprocess.run(["git", "mv", str(p), str(new_path)], cwd=root, check=True)
    # everything else that names modules
    for sub in ("tests", "benchmarks", "tools", "plugins", "docs"):
        for p in (root / sub).rglob("*"):
            if p.name in ("layout.md", "test_layout.py"):
                continue
            if p.is_file() and p.suffix in (".py", ".md", ".toml", ".txt", ".cfg") and "__pycache__" not in p.parts:
                t = p.read_text()
                n = rewrite_text(t)
                if n != t:
                    p.write_text(n)
    for name in ("README.md", "DEVELOPERS.md", "pyproject.toml"):
        p = root / name
        if p.exists():
            t = p.read_text()
            n = rewrite_text(t)
            if n != t:
                p.write_text(n)
    ci = root / ".ci"
    if ci.exists():
        for p in ci.iterdir():
            if p.is_file():
                t = p.read_text()
                n = rewrite_text(t)
                if n != t:
                    p.write_text(n)


if __name__ == "__main__":
    main(Path(sys.argv[1]).resolve())
