"""A finished run as an ArviZ ``InferenceData`` (optional: ``pip install "rvkep[arviz]"``).

Groups: ``posterior`` (every physical column, dimensions ``chain`` x ``draw``: emcee's
walkers are the chains, each walker's kept steps its draws; a nested-sampling run is
one chain), ``sample_stats`` (``lp``, the log-posterior), ``observed_data`` (the
velocities, with each point's time, instrument and error as coordinates) and, for
white noise, ``log_likelihood``: each point's Gaussian log density given the sample's
orbits, trend, offset and jitter, so that ``arviz.loo`` and ``arviz.waic`` work
(Vehtari, Gelman & Gabry 2017, Statistics and Computing 27, 1413). Correlated noise
models (gp, night) do not split into independent points, and the group is left out
with a warning.
"""

from __future__ import annotations

import warnings

import numpy as np

from rvkep.errors import OptionError

__all__ = ["to_inference_data", "pointwise_log_likelihood"]


def pointwise_log_likelihood(results) -> np.ndarray:
    """(n_samples, n_points): log N(v_i; model_i + offset, err_i^2 + jitter^2) per
    posterior sample, the model being the companions and the trend of that sample.

    Parameters
    ----------
    results : Results
        A finished run.

    Returns
    -------
    ndarray, shape (n_samples, n_points)
        The log likelihood of each point under each sample.
    """
    from rvkep.prediction import predict

    data = results.data
    cols = results.posterior.columns
    n = len(next(iter(cols.values())))
    if results.labels or "trend.slope" in cols:
        total = predict(cols, results.labels, data.time, epoch=data.epoch).curves["total"]
    else:
        total = np.zeros((n, len(data)))
    out = np.empty_like(total)
    for name in data.instruments:
        m = np.asarray(data.instrument) == name
        offset = np.asarray(cols[f"offset.{name}"], float)[:, None]
        jitter = np.asarray(cols.get(f"jitter.{name}", np.zeros(total.shape[0])), float)[:, None]
        var = data.err[m][None, :] ** 2 + jitter**2
        r = data.rv[m][None, :] - total[:, m] - offset
        out[:, m] = -0.5 * (np.log(2 * np.pi * var) + r * r / var)
    return out


def to_inference_data(results):
    """The run as ``arviz.InferenceData`` (see the module text).

    Parameters
    ----------
    results : Results
        A finished run.

    Returns
    -------
    arviz.InferenceData
        Posterior (chains kept), observed data and pointwise log likelihood.
    """
    try:
        import arviz as az
    except ImportError:
        raise OptionError('to_inference_data needs ArviZ: pip install "rvkep[arviz]"') from None
    cols = {k: np.asarray(v, float) for k, v in results.posterior.columns.items()}
    lp = cols.pop("log_posterior", None)
    n = len(next(iter(cols.values())))
    walkers = int(results.to_dict()["sampler"].get("walkers") or 1)
    chains = walkers if walkers > 1 and n % walkers == 0 else 1

    def shaped(x: np.ndarray) -> np.ndarray:
        # flat samples are step-major (every walker at one step, then the next step)
        x = np.asarray(x)
        return np.swapaxes(x.reshape(n // chains, chains, *x.shape[1:]), 0, 1)

    data = results.data
    log_likelihood = None
    if results.noise_kind == "white":
        log_likelihood = {"rv": shaped(pointwise_log_likelihood(results))}
    else:
        warnings.warn(f"the {results.noise_kind} noise model correlates the points: no "
                      "pointwise log-likelihood (arviz.loo needs white noise)",
                      stacklevel=2)  # fmt: skip
    idata = az.from_dict(
        posterior={k: shaped(v) for k, v in cols.items()},
        sample_stats=None if lp is None else {"lp": shaped(lp)},
        log_likelihood=log_likelihood, observed_data={"rv": np.asarray(data.rv, float)},
        coords={"point": np.arange(len(data))}, dims={"rv": ["point"]},
    )  # fmt: skip
    idata.observed_data = idata.observed_data.assign_coords(
        time=("point", np.asarray(data.time, float)),
        instrument=("point", np.asarray(data.instrument).astype(str)),
        error=("point", np.asarray(data.err, float)),
    )  # fmt: skip
    idata.posterior.attrs["run_kind"] = results.run_label()
    return idata
