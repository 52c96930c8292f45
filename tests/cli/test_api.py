"""The public API: the main steps from `import rvkep`, chained without passing the
same objects back in, keyword-only options, and a light import."""

import subprocess
import sys
import warnings

import numpy as np
import pytest
from helpers import one_planet, write_table

import rvkep


def test_import_rvkep_is_light():
    heavy = ("numpy", "scipy", "emcee", "matplotlib", "astropy")
    code = f"import sys, rvkep; print(sorted(m for m in {heavy!r} if m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_public_names_are_not_shadowed_by_submodules():
    # importing every submodule first must leave rvkep.search and rvkep.predict the
    # functions: a submodule of the same name would replace them on the package
    import pkgutil

    names = {m.name for m in pkgutil.iter_modules(rvkep.__path__)}
    assert not names & set(rvkep.__all__), names & set(rvkep.__all__)
    code = (
        "import importlib, pkgutil, rvkep\n"
        "for m in pkgutil.iter_modules(rvkep.__path__):\n"
        "    if m.name not in ('__main__',): importlib.import_module('rvkep.' + m.name)\n"
        "print(rvkep.search.__module__, rvkep.predict.__module__)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.split() == ["rvkep.period_search", "rvkep.prediction"]


def test_steps_chain_from_the_top_level():
    from rvkep.sampling import UnconvergedWarning

    data = one_planet()
    best = rvkep.fit(data, [9.4])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        run = best.sample(seed=2, max_steps=600, progress=False)
    assert run.fit is best
    post = run.posterior()
    assert np.median(post["b.period"]) == pytest.approx(best.params["b.period"], rel=1e-3)
    res = rvkep.Results.from_sampling(run, star=rvkep.StarProperties(1.0, 0.05))
    assert res.labels == ["b"] and "b.msini_mjup" in res.posterior
    pred = res.predict([float(data.time[0])], instrument="a")
    assert set(pred.curves) == {"b", "total", "measured"}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        again = rvkep.sample(best, seed=2, max_steps=600, progress=False)
    assert np.array_equal(again.chain, run.chain)  # the same seed, the same chain


def test_options_after_the_first_arguments_are_keywords():
    data = one_planet()
    with pytest.raises(TypeError):
        rvkep.fit(data, [9.4], 1)  # trend must be named
    with pytest.raises(TypeError, match="not both"):
        rvkep.analyze(["x.txt"], rvkep.pipeline.AnalyzeOptions(), quick=True)
    with pytest.raises(AttributeError, match="no attribute 'nothing'"):
        rvkep.nothing  # noqa: B018


def test_a_reloaded_run_rebuilds_its_fit_and_draws_the_same_curves(tmp_path):
    """Results.load rebuilds the best fit from model.json on data.csv: the same
    parameters, residuals and figure curves as the run that wrote the folder."""
    import json
    import warnings

    from helpers import one_planet, planet_model

    from rvkep.curves import phase_curves, timeseries_curves
    from rvkep.pipeline import write_figures
    from rvkep.results import Results
    from rvkep.sampling import UnconvergedWarning

    fit = planet_model(one_planet())
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        run = fit.sample(seed=2, max_steps=300, check_every=100, progress=False)
    fresh = Results.from_sampling(run, quick=True)
    fresh.write(tmp_path)
    back = Results.load(tmp_path)
    assert back.fit is not None and back.fit.params == fresh.fit.params
    assert np.array_equal(back.fit.residuals, fresh.fit.residuals)
    assert back.to_dict() == json.loads((tmp_path / "results.json").read_text())
    # the posterior's sampler coordinates come back through the physical columns
    assert np.allclose(back.posterior.theta, fresh.posterior.theta, rtol=1e-9, atol=1e-9)
    a, b = timeseries_curves(fresh, n_grid=200), timeseries_curves(back, n_grid=200)
    assert np.array_equal(a["curve"], b["curve"])
    assert np.allclose(a["band"], b["band"], rtol=1e-7, atol=1e-7)
    pa, pb = phase_curves(fresh, "b"), phase_curves(back, "b")
    assert np.array_equal(pa["velocity"], pb["velocity"])
    written = write_figures(back, tmp_path / "figs")
    assert {p.name for p in written} == {"timeseries.png", "phase_b.png", "corner_b.png",
                                        "stacked.png"}
    # a model.json that does not belong to the results is refused
    stored = json.loads((tmp_path / "model.json").read_text())
    stored["best_fit_theta"][0] += 0.01
    (tmp_path / "model.json").write_text(json.dumps(stored))
    from rvkep.errors import DataError

    with pytest.raises(DataError, match="model.json and results.json disagree"):
        Results.load(tmp_path)


def test_every_run_records_its_stage_timings(tmp_path, capsys):
    import json

    data = one_planet()
    f = write_table(data, tmp_path / "a.txt")
    rvkep.analyze([str(f)], out=str(tmp_path / "o"), quick=True, quiet=True, trend=0,
                  max_companions=1, timings=True)  # fmt: skip
    line = capsys.readouterr().out.strip().splitlines()[-1]
    assert line.startswith("timings: read ") and "sampling" in line and "figures" in line
    t = json.loads((tmp_path / "o" / "results.json").read_text())["timings"]
    stages = ["read", "model_choice", "sampling", "derived", "eccentricity", "figures", "tables"]
    assert list(t) == stages and all(v >= 0 for v in t.values())


def test_figures_all_summary_or_none(tmp_path):
    import json

    from rvkep.batch import read_targets
    from rvkep.errors import OptionError
    from rvkep.pipeline import figure_set

    data = one_planet()
    f = write_table(data, tmp_path / "a.txt")
    for which, expected in (("summary", {"timeseries.png", "phase_b.png"}), ("none", set())):
        out = tmp_path / which
        rvkep.analyze([str(f)], out=str(out), quick=True, quiet=True, trend=0, max_companions=1,
                      figures=which)  # fmt: skip
        assert {p.name for p in out.glob("*.png")} == expected
        timings = json.loads((out / "results.json").read_text())["timings"]
        assert ("figures" in timings) == bool(expected)
    assert figure_set(True) == "all" and figure_set(False) == "none"
    with pytest.raises(OptionError, match="--figures must be one of all, summary, none"):
        figure_set("some")
    p = tmp_path / "t.csv"
    p.write_text("name,data,star_mass,star_mass_err,figures\nx,a.txt,1,0.1,summary\n"
                 "y,a.txt,1,0.1,pretty\n")  # fmt: skip
    x, y = read_targets(p)
    assert x.options["figures"] == "summary"
    assert "figures must be one of all, summary, none, got 'pretty'" in y.problem
