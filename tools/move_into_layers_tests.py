"""After movepkg: the layout test's table and docs name the moved modules."""
import re, sys, ast
from pathlib import Path
root = Path(sys.argv[1])
p = root / "tests" / "test_layout.py"
s = p.read_text()
tree = ast.parse(s)
for node in tree.body:
    if isinstance(node, ast.AnnAssign) and getattr(node.target, "id", "") == "LAYERS":
        layers = ast.literal_eval(node.value)
        start, end = node.lineno, node.end_lineno
new = {}
for layer, mods in layers.items():
    if layer in ("cli", "package"):
        new[layer] = mods
    else:
        new[layer] = (layer,) + tuple(f"{layer}.{m}" for m in mods)
lines = s.splitlines()
body = ["LAYERS: dict[str, tuple[str, ...]] = {"]
for layer, mods in new.items():
    items = ", ".join(repr(m) for m in mods)
    text = f"    {layer!r}: ({items}{',' if len(mods) == 1 else ''}),"
    # wrap at 116 columns
    while len(text) > 116:
        cut = text.rfind(", ", 0, 116)
        body.append(text[:cut + 1])
        text = "        " + text[cut + 2:]
    body.append(text)
body.append("}")
lines[start - 1:end] = body
s = "\n".join(lines) + "\n"
s = s.replace('''    assert violations([("plots", "studies", 7), ("balance", "integrate", 9), ("studies", "records", 3),
                       ("integrate", "balance", 1)]) == [
        "plots (outputs) imports studies (studies) at line 7", "balance (balance) imports integrate (flight) at line 9",
        "studies (studies) imports records (measured) at line 3"]''', '''    assert violations([("outputs.plots", "studies.studies", 7), ("balance.balance", "flight.integrate", 9),
                       ("studies.studies", "measured.records", 3), ("flight.integrate", "balance.balance", 1)]) == [
        "outputs.plots (outputs) imports studies.studies (studies) at line 7",
        "balance.balance (balance) imports flight.integrate (flight) at line 9",
        "studies.studies (studies) imports measured.records (measured) at line 3"]''')
s = s.replace("""        for mod in mods:
            if mod:""", """        for mod in mods:
            if mod and mod != layer:                  # the subpackage itself (its __init__)""")
s = s.replace("""("X = 'thrustgraph.outputs.plots:thrust_figure'\\n", ["thrustgraph.outputs.plots"]),""",
              """("X = 'thrustgraph.outputs.plots:thrust_figure'\\n", ["thrustgraph.outputs.plots"]),""")
s = s.replace('a registry\'s ``"thrustgraph.outputs.plots:thrust_figure"``', 'a registry\'s ``"thrustgraph.outputs.plots:thrust_figure"``')
p.write_text(s)
d = root / "docs" / "layout.md"
t = d.read_text()
t = t.replace("`framework/thrustgraph` is today one flat folder of modules. This page is the plan for grouping them into\nsubpackages, one per layer,",
              "`framework/thrustgraph` groups its modules into subpackages, one per layer (`thrustgraph.base`,\n`thrustgraph.kinds`, ...),")
t = t.replace("The modules have not moved yet (the move is mechanical and comes once the work in\nprogress has merged); the rules already hold, and `tests/test_layout.py` checks them",
              "`tests/test_layout.py` checks them")
t = t.replace("Each will be a subpackage (`thrustgraph.base`, `thrustgraph.kinds`, ...) whose module\ndocstring repeats its \"May import\" line",
              "Each is a subpackage (`thrustgraph.base`, `thrustgraph.kinds`, ...) whose module\ndocstring repeats its \"May import\" line")
t = t.replace('registry\'s `"thrustgraph.outputs.plots:thrust_figure"`', 'registry\'s `"thrustgraph.outputs.plots:thrust_figure"`')
d.write_text(t)
