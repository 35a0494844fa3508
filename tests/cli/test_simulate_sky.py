"""`nullfit simulate --sky-model`: the sky signal written into a log is the hypothesis' template
evaluated at the log's own readings, with the site and apparatus in its manifest.

The template itself is checked against independent evaluations in tests/hypothesis; here the
wiring: times, angles, unit, readout sign and the manifest that lets `nullfit sidereal` use the log."""

import numpy as np
import pytest

from nullfit import read_scan
from nullfit.cli import main
from nullfit.hypothesis.apparatus import Apparatus
from nullfit.hypothesis.sidereal import template
from nullfit.hypothesis.site import Site


def _simulate(tmp_path, name, *extra):
    out = tmp_path / name
    args = ["simulate", str(out), "--turns", "12", "--per-turn", "12", "--period", "600", "--signal-unit",
            "fractional", "--noise-sigma", "0", "--start-utc", "2026-06-01T00:00:00Z", "--site", "58.39,13.85",
            "--mark-azimuth", "20", "--table-sense", "counterclockwise", "--seed", "1", *extra]
    assert main(args) == 0
    return read_scan(out)


def test_injected_signal_is_the_template_at_the_readings(tmp_path, capsys):
    scan = _simulate(tmp_path, "p.parquet", "--sky-model", "rms", "--sky", "P_MM=1e-6", "--readout-sign", "-1")
    site = Site.from_mapping(scan.meta.site)
    app = Apparatus.from_mapping(scan.meta.apparatus)
    assert site.table_sense == "counterclockwise" and app.readout_sign == -1 and app.signal == "fractional"
    expect = template("rms", {"P_MM": 1e-6}, site=site, apparatus=app, theta=scan.angle,
                      times=scan.epoch_unix + scan.time)
    scale = np.abs(expect).max()
    assert scale > 0
    np.testing.assert_allclose(scan.signal, expect, rtol=0, atol=1e-9 * scale)
    flipped = _simulate(tmp_path, "m.parquet", "--sky-model", "rms", "--sky", "P_MM=1e-6", "--readout-sign", "1")
    np.testing.assert_allclose(flipped.signal, -scan.signal, rtol=0, atol=1e-9 * scale)
    assert "sky rms: P_MM=1e-06" in scan.meta.notes


@pytest.mark.parametrize("args,part", [
    (["--sky", "e_XY=1"], "--sky-model"),
    (["--sky-model", "sme", "--sky", "e_XY"], "NAME=VALUE"),
    (["--sky-model", "sme", "--sky", "q_XX=1e-16"], "q_XX"),
])
def test_bad_sky_options_are_one_line(tmp_path, capsys, args, part):
    code = main(["simulate", str(tmp_path / "x.csv"), "--signal-unit", "fractional", "--site", "58,13",
                 "--mark-azimuth", "0", *args])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1 and part in err and "Traceback" not in err
