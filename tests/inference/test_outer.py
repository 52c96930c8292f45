"""Orbits and trends longer than the data (rvkep.outer): open orbits said plainly, a
jitter that may hide a signal, and the least mass a trend asks for (Torres 1999)."""

from __future__ import annotations

import numpy as np
import pytest

from rvkep import outer


def test_the_least_mass_of_a_trends_cause_is_torres_coefficient():
    # Torres (1999, PASP 111, 169, eq. 6): M = 5.34e-6 M_sun (d/pc)^2 (rho/arcsec)^2
    # |dv/dt / (m/s/yr)| for the most favourable geometry (from memory); (d rho) in au
    assert outer.TORRES_COEFFICIENT == pytest.approx(5.34e-6, rel=2e-3)
    rng = np.random.default_rng(0)
    cols = {"trend.slope": rng.normal(-8.0, 0.5, 4000)}
    rows = outer.trend_companion(cols, span=2000.0, star_mass=1.0)
    # the first separation: a circular orbit with a period of one span (Kepler's third
    # law in au, years and solar masses)
    assert rows[0]["a_au"] ** 3 == pytest.approx((2000.0 / 365.25) ** 2, rel=1e-9)
    # 8 m/s/yr at 10 au: 5.34e-6 x 100 x 8 M_sun = 4.27e-3 M_sun = 4.47 M_Jup
    # (1 M_Jup = 9.546e-4 M_sun, IAU 2015)
    a = np.array([r["a_au"] for r in rows])
    m = np.array([r["min_mass_mjup"] for r in rows])
    assert np.interp(10.0, a, m / a**2) * 100 == pytest.approx(5.34e-6 * 100 * 8 / 9.546e-4,
                                                               rel=0.01)  # fmt: skip
    assert all(r["min_mass_mjup_p1"] < r["min_mass_mjup"] for r in rows)
    assert outer.trend_companion({}, 2000.0, 1.0) == []


def test_an_orbit_longer_than_the_data_gets_lower_limits_and_a_closed_one_does_not():
    rng = np.random.default_rng(1)
    n = 5000
    cols = {"b.period": rng.lognormal(np.log(9000.0), 0.1, n), "b.K": rng.normal(300, 5, n),
            "b.msini_mjup": rng.normal(20, 1, n), "b.a_au": rng.normal(8, 0.3, n),
            "c.period": rng.normal(40.0, 0.01, n), "c.K": rng.normal(10, 1, n),
            "c.msini_mjup": rng.normal(0.1, 0.01, n),
            "c.a_au": rng.normal(0.2, 0.001, n)}  # fmt: skip
    out = outer.open_orbits(cols, ["b", "c"], span=6000.0)
    assert list(out) == ["b"]
    lim = out["b"]["lower_limits"]
    assert lim["period_d"] == pytest.approx(np.percentile(cols["b.period"], 1.0))
    assert lim["msini_mjup"] < np.median(cols["b.msini_mjup"])
    note = outer.open_orbit_note("b", out["b"], 6000.0)
    assert "not closed" in note and "m sin i >" in note


def test_a_jitter_far_above_the_errors_is_named():
    from rvkep.data import RVData
    from rvkep.model import Instrument, SystemModel
    from rvkep.priors import Uniform

    t = np.linspace(0, 100, 40)
    data = RVData(t, np.zeros(40), np.full(40, 2.0), np.array(["eagle"] * 40))
    model = SystemModel(data, [], [Instrument("eagle", Uniform(0.0, 100.0), 1.0)])
    rng = np.random.default_rng(2)
    big = outer.jitter_notes(model, {"jitter.eagle": rng.normal(30.0, 2.0, 500)})
    assert len(big) == 1 and "jitter of eagle" in big[0] and "14.9 times" in big[0]
    assert outer.jitter_notes(model, {"jitter.eagle": rng.normal(3.0, 0.5, 500)}) == []
    # a jitter piled at its prior's upper end is named too
    tight = SystemModel(data, [], [Instrument("eagle", Uniform(0.0, 4.0), 1.0)])
    piled = outer.jitter_notes(tight, {"jitter.eagle": rng.uniform(3.7, 4.0, 500)})
    assert len(piled) == 1 and "upper end" in piled[0]


@pytest.mark.integration
def test_the_invented_brown_dwarf_end_to_end(tmp_path):
    # tests/stars.py: P 11,600 d over 6,500 d of data, e 0.72, K 590 m/s, two zero
    # points, 5 m/s errors and no jitter. The whole job, not quick: P within 2 sigma,
    # m sin i within 15% of the truth's (the exact mass function, rvkep.physics, checked
    # against 51 Peg b elsewhere), jitters under 3 x the 5 m/s noise, converged, and
    # the orbit marked not closed
    from stars import brown_dwarf_open_orbit

    import rvkep
    from rvkep.physics import minimum_mass

    d = brown_dwarf_open_orbit()
    table = tmp_path / "bd.csv"
    table.write_text("time,rv,err,instrument\n" + "".join(
        f"{t:.6f},{v:.4f},{e:.3f},{i}\n"
        for t, v, e, i in zip(d.time, d.rv, d.err, d.instrument, strict=True)))  # fmt: skip
    r = rvkep.analyze(table, star_mass=1.0, out=tmp_path / "run", figures="none", seed=2,
                      quiet=True)  # fmt: skip
    res = r.to_dict()
    assert res["sampler"]["converged"]
    (p,) = res["planets"]
    P = p["period_d"]
    assert abs(P["median"] - 11600.0) < 2 * 0.5 * (P["plus"] + P["minus"])
    truth = float(minimum_mass(11600.0, 590.0, 0.72, 1.0))
    assert p["msini_mjup"]["median"] == pytest.approx(truth, rel=0.15)
    assert all(i["jitter_mps"]["median"] < 15.0 for i in res["instruments"])
    assert p["orbit_closed"] is False and p["lower_limits"]["period_d"] > 6446.0
