"""An N-body run end to end on an invented resonant pair whose velocities come from an
independent integration of Newton's equations (tests/stars.py: scipy's DOP853, not
REBOUND), then ``rvkep stability`` on it."""

from __future__ import annotations

import json
import math
import subprocess
import sys

import numpy as np
import pytest

pytest.importorskip("rebound")

from stars import interacting_pair  # noqa: E402

pytestmark = pytest.mark.integration


def _rvkep(*args, cwd):
    return subprocess.run([sys.executable, "-m", "rvkep.cli", *args], cwd=cwd,
                          capture_output=True, text=True, timeout=1200)  # fmt: skip


def test_nbody_run_recovers_the_pair_and_the_inclination_and_its_draws_are_regular(tmp_path):
    data, truth = interacting_pair(n=45, span=900.0)
    table = tmp_path / "wren.csv"
    table.write_text(
        "time,rv,err\n"
        + "".join(
            f"{t:.8f},{v:.6f},{e:.3f}\n"
            for t, v, e in zip(data.time, data.rv, data.err, strict=True)
        )
    )
    run = _rvkep("analyze", str(table), "--star-mass", "0.37", "--companions", "2", "--trend",
                 "0", "--dynamics", "nbody", "--quick", "--figures", "summary", "--out", "run",
                 "--seed", "3", cwd=tmp_path)  # fmt: skip
    assert run.returncode == 0, run.stderr
    res = json.loads((tmp_path / "run" / "results.json").read_text())
    dyn = res["dynamics"]
    assert dyn["kind"] == "nbody"
    # the inclination from the interactions, within 15 degrees of the truth (60)
    assert abs(dyn["inclination_deg"]["median"] - truth["inclination_deg"]) < 15.0
    # the Keplerian sum leaves the interaction in its residuals: far lower ln L
    kep, nb = dyn["comparison"]
    assert kep["dynamics"] == "keplerian" and nb["log_likelihood"] - kep["log_likelihood"] > 20
    # elements within 3 sigma of the truth (osculating at the data's epoch)
    by_period = sorted(res["planets"], key=lambda p: p["period_d"]["median"])
    for j, p in enumerate(by_period):
        for key, true in (("period_d", truth["P"][j]), ("K_mps", truth["K"][j]),
                          ("ecc", truth["e"][j])):  # fmt: skip
            est = p[key]
            sd = 0.5 * (est["plus"] + est["minus"])
            assert abs(est["median"] - true) < 3 * sd + 1e-9, (p["label"], key, est, true)
        assert "mass_mjup" in p  # true masses beside m sin i
    assert res["stability"]["draws"] > 0 and "hill_stable_fraction" in res["stability"]
    assert "N-body" in run.stdout and "inclination" in run.stdout
    summary = (tmp_path / "run" / "summary.md").read_text()
    assert "## Dynamics" in summary and "## Stability" in summary
    # the draws integrated for 500 outer orbits: a resonant pair that is regular
    st = _rvkep("stability", "run", "--draws", "4", "--orbits", "500", cwd=tmp_path)
    assert st.returncode == 0, st.stderr
    out = json.loads((tmp_path / "run" / "stability.json").read_text())
    assert out["draws"] == 4 and out["fraction_regular"] == 1.0
    assert all(math.isfinite(d["megno"]) for d in out["per_draw"])
    assert np.isfinite(out["megno_median"]) and abs(out["megno_median"] - 2.0) < 0.5
    page = (tmp_path / "run" / "report.html").read_text()
    assert 'id="dynamics-comparison"' in page and 'id="stability"' in page
    assert "MEGNO): 100% regular" in page  # the integrations joined the report


def test_nbody_without_a_star_mass_is_refused_before_anything_is_written(tmp_path):
    data, _ = interacting_pair(n=30, span=600.0)
    table = tmp_path / "wren.csv"
    table.write_text(
        "time,rv,err\n"
        + "".join(
            f"{t:.8f},{v:.6f},{e:.3f}\n"
            for t, v, e in zip(data.time, data.rv, data.err, strict=True)
        )
    )
    run = _rvkep("analyze", str(table), "--dynamics", "nbody", "--out", "run", cwd=tmp_path)
    assert run.returncode == 2
    assert run.stderr.strip().count("\n") == 0 and "--star-mass" in run.stderr
    assert not (tmp_path / "run").exists()
