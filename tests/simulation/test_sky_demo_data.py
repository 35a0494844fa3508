"""The sky demo table (data_demo/sky_turns.parquet) matches its script and says it is invented."""

import importlib.util
import sys
from pathlib import Path

import numpy as np
import pytest

from nullfit.campaign.turn_table import TurnTable

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "data_demo"


def _load_script():
    spec = importlib.util.spec_from_file_location("nullfit_make_sky_demo", DEMO / "make_sky_demo.py")
    mod = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = mod
    spec.loader.exec_module(mod)
    return mod


MAKE = _load_script()


def test_regenerated_table_equals_the_committed_one(tmp_path):
    made = TurnTable.read(MAKE.make_sky_demo(tmp_path))
    committed = TurnTable.read(DEMO / MAKE.FILE)
    # the readings are drawn exactly (fixed seed); the per-turn coefficients come out of linear
    # algebra whose last bits may differ between machines and numpy builds: agreement to 1e-9 of
    # each column's scale (a coefficient near zero has no meaningful relative error)
    a, b = made.frame, committed.frame
    assert list(a.columns) == list(b.columns) and len(a) == len(b)
    for col in a.columns:
        x, y = a[col].to_numpy(), b[col].to_numpy()
        if x.dtype.kind == "f":
            scale = float(np.nanmax(np.abs(y))) if np.isfinite(y).any() else 0.0
            np.testing.assert_allclose(x, y, rtol=0, atol=1e-9 * scale, err_msg=col)
        else:
            np.testing.assert_array_equal(x, y, err_msg=col)
    assert made.meta == committed.meta, ("data_demo/sky_turns.parquet differs from what make_sky_demo.py "
                                         "writes; regenerate with `python data_demo/make_sky_demo.py --force`")
    with pytest.raises(FileExistsError, match="--force"):
        MAKE.make_sky_demo(tmp_path)
    assert MAKE.main(["--out", str(tmp_path)]) == 2


def test_the_table_is_labelled_invented_and_synthetic():
    t = TurnTable.read(DEMO / MAKE.FILE)
    assert "INVENTED" in t.meta["settings"]["scenario"] and "SYNTHETIC" in t.meta["settings"]["scenario"]
    assert t.meta["settings"]["seed"] == MAKE.SEED
    assert all("INVENTED" in r["site"]["name"] and "INVENTED" in r["apparatus"]["name"] for r in t.runs.values())
    readme = (DEMO / "README.md").read_text(encoding="utf-8")
    assert "sky_turns.parquet" in readme and "make_sky_demo.py" in readme
    assert (DEMO / MAKE.FILE).stat().st_size < 2.5 * 1024 * 1024
    span = (t.frame["t_mid_ns"].max() - t.frame["t_mid_ns"].min()) / 86400e9
    assert span > 350 and len(t.runs) == 52
