"""``thrustgraph export``: fly a model and write its results as CSV, JSON and (with pyarrow) Parquet.

CSV holds every signal and every ledger term per output time, with the unit
in each header and ``#`` lines first naming the tool version, the plugin
versions and the model hash. JSON holds the summary, phases, events, audits,
cautions and the same provenance. Parquet holds the CSV's columns with units
in the field metadata and the provenance in the schema metadata.
"""

from __future__ import annotations

import argparse
import importlib.util
from pathlib import Path

from ..errors import ThrustgraphError
from .common import add_model_argument, add_set_option
from .outputs import add_quiet_option, check_paths, default_stem, fly_model, load_checked, write_outputs

NAME = "export"
HELP = "fly a model and write its results: CSV time series, JSON summary, Parquet (when pyarrow is installed)"


def add_arguments(p: argparse.ArgumentParser) -> None:
    add_model_argument(p)
    add_set_option(p)
    p.add_argument("--csv", metavar="FILE", help="write the time series to this CSV file")
    p.add_argument("--json", metavar="FILE", help="write the summary, phases, events and audits to this JSON file")
    p.add_argument("--parquet", metavar="FILE", help="write the time series to this Parquet file (needs pyarrow)")
    p.add_argument("--out-dir", metavar="DIR",
                   help="write STEM.csv, STEM.json and (when pyarrow is installed) STEM.parquet into DIR, STEM "
                        "being the model file's name")
    add_quiet_option(p)


def have_pyarrow() -> bool:
    return importlib.util.find_spec("pyarrow") is not None


def main(args: argparse.Namespace) -> int:
    if not (args.csv or args.json or args.parquet or args.out_dir):
        raise ThrustgraphError("export: name at least one output. Fix: add --csv FILE, --json FILE, "
                               "--parquet FILE or --out-dir DIR")
    if args.parquet and not have_pyarrow():
        raise ThrustgraphError("Parquet output needs pyarrow, which is not installed. Fix: pip install "
                               "'thrustgraph[parquet]' (or pip install pyarrow), or write CSV instead")
    model, parsed = load_checked(args.model, args.overrides)
    targets: list[tuple[str, str | Path]] = []
    if args.out_dir:
        stem = Path(args.out_dir) / default_stem(model)
        targets += [("csv", stem.with_suffix(".csv")), ("json", stem.with_suffix(".json"))]
        if have_pyarrow():
            targets.append(("parquet", stem.with_suffix(".parquet")))
        else:
            print("pyarrow is not installed: no Parquet file (pip install 'thrustgraph[parquet]')")
    for kind in ("csv", "json", "parquet"):
        if getattr(args, kind):
            targets.append((kind, getattr(args, kind)))
    check_paths([path for _, path in targets], [args.out_dir])   # before flying
    result = fly_model(parsed, quiet=args.quiet)
    make = {"csv": lambda: result.to_csv(provenance=True), "json": result.to_json, "parquet": result.to_parquet}
    outputs = [(path, make[kind]()) for kind, path in targets]  # everything in memory before any file is written
    write_outputs(outputs, directories=[args.out_dir])
    if not result.success:
        print(f"note: {result.message}")
    return 0
