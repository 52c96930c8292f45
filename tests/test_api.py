"""The public API: the main steps from `import rvkep`, chained without passing the
same objects back in, keyword-only options, and a light import."""

import subprocess
import sys
import warnings

import numpy as np
import pytest
from test_sampling import one_planet

import rvkep


def test_import_rvkep_is_light():
    heavy = ("numpy", "scipy", "emcee", "matplotlib", "astropy")
    code = f"import sys, rvkep; print(sorted(m for m in {heavy!r} if m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


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
