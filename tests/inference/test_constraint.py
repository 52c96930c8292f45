"""Posteriors that are mostly their prior, or cut by it (rvkep/constraint.py):
comparing posterior and prior widths is the usual quick look at prior sensitivity
(common practice, no source)."""

import json

import numpy as np
from stars import _season_times

from rvkep.cli import main
from rvkep.constraint import prior_notes
from rvkep.model import SystemModel, default_companion
from rvkep.orbit import radial_velocity
from rvkep.priors import LogUniform


def _star(tmp_path):
    """Invented: a 17.0-d planet (K 20 m/s) seen 40 times over 320 days, 3 m/s errors."""
    rng = np.random.default_rng(12)
    t = _season_times(rng, 40, 320)
    v = radial_velocity(t, 17.0, 2459005.0, 0.05, 1.0, 20.0) + rng.normal(0, 3.0, t.size)
    f = tmp_path / "star.txt"
    np.savetxt(f, np.column_stack([t, v, np.full(t.size, 3.0)]), header="time rv err")
    return f


def test_a_data_blind_period_prior_is_named(tmp_path, capsys):
    f = _star(tmp_path)
    model = tmp_path / "m.toml"
    model.write_text(
        f'[data]\nfiles = ["{f}"]\n[companions.b]\nperiod = 17.0\n[companions.c]\n'
        'period = { start = 5000, prior = "uniform", min = 4000, max = 6000 }\n'
        'K = { start = 1, prior = "uniform", min = 0, max = 5 }\n'
    )
    out = tmp_path / "out"
    assert main(["sample", str(model), "--out", str(out), "--quick", "--figures", "none"]) == 0
    notes = json.loads((out / "results.json").read_text())["notes"]
    assert any("the data barely constrain c.period" in n for n in notes), notes
    assert not any("b.period" in n for n in notes)
    assert "barely constrain c.period" in (out / "summary.md").read_text()


def test_a_period_cut_by_its_prior_is_named(tmp_path):
    f = _star(tmp_path)
    from rvkep.reading import load_rv

    data = load_rv([f])
    comp = default_companion(data, "b", 17.0, 2459005.0, 20.0, 0.05, 1.0)
    from dataclasses import replace

    comp = replace(comp, period=LogUniform(1.2, 300.0))
    model = SystemModel(data, [comp])
    rng = np.random.default_rng(0)
    piled = {"b.period": 300.0 - rng.exponential(3.0, 2000), "b.K": rng.normal(20, 1, 2000)}
    notes = prior_notes(model, piled)
    assert len(notes) == 1 and "piles up at the upper end" in notes[0]
    assert "raise --max-period" in notes[0]
    sharp = {"b.period": rng.normal(17.0, 0.01, 2000), "b.K": rng.normal(20, 1, 2000)}
    assert prior_notes(model, sharp) == []


def test_an_orbit_longer_than_the_data_is_not_cut_at_the_span():
    # invented brown dwarf (tests/stars.py): P 11,600 d over 6,500 d of data, e 0.72,
    # K 590 m/s, two zero points. With the period prior ending at the span the fit
    # stopped at P = 6,446 d (the bound) and a trend took the rest
    import pytest
    from stars import brown_dwarf_open_orbit

    from rvkep.pipeline import AnalyzeOptions, choose_model

    ch = choose_model(brown_dwarf_open_orbit(), AnalyzeOptions(quiet=True))
    (c,) = ch.fit.model.companions
    p = ch.fit.params
    assert p["b.period"] == pytest.approx(11600, rel=0.15)
    assert p["b.ecc"] == pytest.approx(0.72, abs=0.05)
    assert p["b.K"] == pytest.approx(590, rel=0.05)
    assert ch.fit.model.trend == 0
    assert c.period.bounds[1] >= 10 * 6000  # the prior reaches ten spans
