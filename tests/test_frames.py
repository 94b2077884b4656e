"""DataFrames (pandas, an optional extra installed with the test extra): a flight's time series, a study's
designs, dispersion statistics and sensitivities, with the same numbers as the objects and CSV files they come
from and the units in ``attrs``."""

from __future__ import annotations

import io

import numpy as np
import pandas as pd
import pytest

import thrustgraph as tg
from thrustgraph.studies.dispersion import disperse
from thrustgraph.base.errors import ThrustgraphError
from thrustgraph.base.frames import pandas
from thrustgraph.models.modelfile import default_model_path, load_model
from thrustgraph.balance.outcomes import OUTCOMES
from thrustgraph.studies.studies import sensitivities, sweep


def test_a_flight_as_a_frame_holds_every_exported_column():
    r = tg.fly()
    df = r.to_pandas()
    assert isinstance(df, pd.DataFrame) and df.index.name == "time"
    np.testing.assert_array_equal(df.index.to_numpy(), r.t)
    cols = r.columns()[1:]
    assert list(df.columns) == [n for n, _, _ in cols] + ["phase"]
    for name, unit, values in cols:
        np.testing.assert_array_equal(df[name].to_numpy(), values)
        assert df.attrs["units"][name] == unit
    assert list(df["phase"].cat.categories) == [p.name for p in r.phases]
    assert df.attrs["provenance"]["model_sha256"] == r.provenance["model_sha256"]
    # the frame and the CSV export read by pandas hold the same numbers
    csv = pd.read_csv(io.StringIO(r.to_csv(provenance=True)), comment="#", float_precision="round_trip")
    np.testing.assert_array_equal(csv["altitude [m]"].to_numpy(), df["altitude"].to_numpy())


def test_study_tables_statistics_and_sensitivities_as_frames():
    model = load_model(default_model_path())
    t = sweep(model, ["components.bottle.fill=0.2..0.4 in 3"], outputs=["apogee", "burn_time"], engine="serial",
              quiet=True)
    df = t.to_pandas()
    assert df.index.name == "design" and len(df) == 3
    np.testing.assert_array_equal(df["components.bottle.fill"].to_numpy(), t.x[:, 0])
    np.testing.assert_array_equal(df["apogee"].to_numpy(), t.column("apogee"))
    assert list(df["status"]) == list(t.status) and df.attrs["units"]["apogee"] == "m"
    d = disperse(model, ["launch.elevation=normal(sd=1 deg)"], samples=8, seed=3, outputs=["apogee"],
                 engine="serial", quiet=True)
    st = d.to_pandas()
    assert st.loc["apogee", "mean"] == d.stats["apogee"]["mean"] and st.loc["apogee", "unit"] == "m"
    assert st.loc["apogee", "count"] == d.stats["apogee"]["count"]
    assert len(d.table.to_pandas()) == 8
    s = sensitivities(model, ["components.bottle.fill"], outputs=["apogee"], engine="serial", quiet=True)
    sf = s.to_pandas()
    row = sf.loc[("apogee", "components.bottle.fill")]
    assert row["derivative"] == s.derivative[0, 0] and row["elasticity"] == s.elasticity[0, 0]
    assert row["outcome_unit"] == OUTCOMES["apogee"].unit and row["scheme"] == s.scheme[0]


def test_without_pandas_the_error_says_how_to_install_it(monkeypatch):
    import importlib

    real = importlib.import_module

    def no_pandas(name, *a, **k):
        if name == "pandas":
            raise ImportError("No module named 'pandas'")
        return real(name, *a, **k)

    monkeypatch.setattr(importlib, "import_module", no_pandas)
    with pytest.raises(ThrustgraphError, match=r"pip install 'thrustgraph\[pandas\]'"):
        pandas()
