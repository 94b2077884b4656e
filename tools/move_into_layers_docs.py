"""After tools/move_into_layers.py: DEVELOPERS.md's map of the core names the layer subpackages."""
import sys, re
from pathlib import Path
p = Path(sys.argv[1]) / "DEVELOPERS.md"
s = p.read_text()
i = s.index("Where things are in the core:")
j = s.index("`commands/`.", i) + len("`commands/`.")
new = """Where things are in the core: the modules are grouped by layer into subpackages, lowest first `base`
(errors, units, the float/array namespace `xp.py`, output files all or nothing, interrupts, progress), `kinds`
(the plugin contract: `parameters.py`, `component.py`, `hookspecs.py`, `contract.py`, `outcomespec.py`),
`balance` (`plan.py`, the balance plan of named records; `balance.py`, the one balance for floats and arrays;
`straightline.py`, its per-phase functions traced from it; `sampling.py`, output samples over arrays;
`outcomes.py`, the outcome registry), `models` (the plugin manager, model files, stages and triggers as written,
design parameters), `flight` (`assembly.py`, `integrate.py`, `result.py`, the ensemble), `outputs` (the export
and plot registries, plots, the report), `measured` (records, comparison, calibration), `studies` (study kinds,
engines, tables, dispersion, optimisation), and the command line (`cli.py` + `commands/`). docs/layout.md says
what each layer holds and what it may import; tests/test_layout.py checks every import against it."""
s = s[:i] + new + s[j:]
s = s.replace("| `framework/thrustgraph/` | the core: units, parameter specs, hook specs, plugin manager, model and model file, assembly, the balance, integration, results, CLI. It knows no device physics and imports no plugin (a test checks). |",
              "| `framework/thrustgraph/` | the core, one subpackage per layer (docs/layout.md): foundations, the plugin contract, the balance, model files, assembly and integration, outputs, measured data, studies, and the CLI. It knows no device physics and imports no plugin (a test checks). |")
p.write_text(s)
