"""From a batch of stars to a population: the eccentricity distribution and the
occurrence of companions in a period x m sin i box.

*Eccentricities* by importance reweighting of each star's posterior samples with the
sampling prior divided out (Hogg, Myers & Bovy 2010, ApJ 725, 2166): for a population
density p(e | alpha),

    ln L(alpha) = sum over companions j of ln[ (1/K) sum_k p(e_jk | alpha) / pi_j(e_jk) ],

with e_jk the K posterior samples of companion j and pi_j the prior they were drawn
under (read from the run's model.json). Two populations: a Beta(a, b) (Kipping 2013,
MNRAS 434, L51, for comparison: a = 0.867, b = 3.03 for RV planets), a and b
log-uniform on [0.1, 100]; and a histogram of :data:`N_BINS` equal bins on [0, 1) with a
smoothness prior (a Gaussian of sd :data:`SMOOTHNESS` on the second differences of the
log heights). Both are sampled with emcee's stretch move. Each star's shrunk
eccentricity is its samples reweighted by the Beta population at the posterior median.
At most :data:`MAX_SAMPLES` samples per companion enter (thinned evenly): enough for the
average above, and it bounds the work.

*Occurrence*: a star "hosts" a companion in the box when a chosen companion has its
posterior median period and m sin i inside; its completeness c is the injection-
recovery fraction over the box's cells of its ``rvkep limits`` output (Cumming et al.
2008, PASP 120, 531 for the method), 1 without limits (such stars are named in a
warning). With the fraction f of stars hosting at least one such companion, a star is
seen hosting with probability f c, so

    L(f) = prod over hosts (f c_i) x prod over the others (1 - f c_i),

and f's posterior under a uniform prior is evaluated on a grid of 2,001 points.

Quick runs, unconverged chains and failed targets are skipped by default and listed.
"""

from __future__ import annotations

import csv
import json
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from rvkep.errors import DataError, OptionError

__all__ = [
    "read_batch", "importance_loglike", "beta_population", "histogram_population",
    "occurrence", "run_population", "StarRecord", "MAX_SAMPLES", "N_BINS",
]  # fmt: skip

MAX_SAMPLES = 250
N_BINS = 5
SMOOTHNESS = 1.0
#: Beta hyperparameters' range (log-uniform prior)
AB_RANGE = (0.1, 100.0)
DEFAULT_PERIOD_RANGE = (1.0, 1000.0)
DEFAULT_MASS_RANGE = (0.1, 13.0)  # M_Jup


@dataclass
class StarRecord:
    """One finished target: its companions' samples and priors, and its limits."""

    name: str
    companions: list[dict] = field(default_factory=list)  # label, ecc, period, msini, prior
    limits: np.ndarray | None = None  # rows of (period_d, msini_mjup, recovered, tried)
    kind: str = "final"
    span: float = 0.0  # the data's time span (days)


def _thin(x: np.ndarray, n: int) -> np.ndarray:
    if x.size <= n:
        return x
    return x[np.linspace(0, x.size - 1, n).astype(int)]


def _read_limits(folder: Path) -> np.ndarray | None:
    path = folder / "limits.csv"
    if not path.exists():
        return None
    rows = []
    with open(path, newline="", encoding="utf-8") as fh:
        lines = [ln for ln in fh if not ln.startswith("#")]
    for r in csv.DictReader(lines):
        rows.append((float(r["period_d"]), float(r["msini_mearth"]) / 317.8284,
                     float(r["recovered"]), float(r["tried"])))  # fmt: skip
    return np.array(rows) if rows else None


def read_batch(folder: str | Path, include_quick: bool = False,
               include_unconverged: bool = False,
               ) -> tuple[list[StarRecord], list[dict]]:  # fmt: skip
    """The finished targets of a batch folder, and the skipped ones with the reason.
    DataError when the folder is no batch (no summary.csv) or holds no finished target.

    Parameters
    ----------
    folder : str or Path
        The batch's output folder.
    include_quick, include_unconverged : bool, optional
        Keep quick runs, unconverged chains (left out by default).

    Returns
    -------
    stars : list of StarRecord
        The finished targets.
    skipped : list of dict
        {"name", "reason"} of the others.
    """
    from rvkep.priors import prior_from_dict

    folder = Path(folder)
    if not (folder / "summary.csv").is_file():
        raise DataError(f"{folder}: not a batch folder (no summary.csv; run rvkep batch first)")
    stars, skipped = [], []
    for sub in sorted(p for p in folder.iterdir() if p.is_dir()):
        if (sub / "population.json").exists():  # an earlier population's output, not a star
            continue
        if not (sub / "done.json").exists():
            reason = "failed" if (sub / "error.txt").exists() else "not finished"
            skipped.append({"name": sub.name, "reason": reason})
            continue
        try:
            res = json.loads((sub / "results.json").read_text())
            model = json.loads((sub / "model.json").read_text())["model"]
            samples = np.load(sub / "samples.npz")
        except (OSError, ValueError, KeyError) as exc:
            skipped.append({"name": sub.name, "reason": f"unreadable outputs ({exc})"})
            continue
        kind = res["run_kind"]
        if kind["quick"] and not include_quick:
            skipped.append({"name": sub.name, "reason": "quick run"})
            continue
        if not kind["converged"] and not include_unconverged:
            skipped.append({"name": sub.name, "reason": "chain not converged"})
            continue
        try:
            times = np.loadtxt(sub / "data.csv", delimiter=",", skiprows=1, usecols=0, ndmin=1)
            span = float(np.ptp(times))
        except (OSError, ValueError):
            span = 0.0
        star = StarRecord(sub.name, limits=_read_limits(sub), kind=kind["label"], span=span)
        for c in model["companions"]:
            L = c["label"]
            star.companions.append({
                "label": L, "ecc": _thin(np.asarray(samples[f"{L}.ecc"], float), MAX_SAMPLES),
                "period": np.asarray(samples[f"{L}.period"], float),
                "msini": np.asarray(samples[f"{L}.msini_mjup"], float),
                "prior": prior_from_dict(c["ecc"], f"{sub.name}: {L}.ecc"),
            })  # fmt: skip
        stars.append(star)
    if not stars:
        reasons = ", ".join(f"{s['name']} ({s['reason']})" for s in skipped[:5]) or "none"
        raise DataError(f"{folder}: no finished target to use (skipped: {reasons})")
    return stars, skipped


def importance_loglike(log_ratio: list[np.ndarray]) -> np.ndarray:
    """sum_j ln[(1/K_j) sum_k exp(log_ratio_j[..., k])]: the importance-reweighted
    population likelihood from, per member j, ln p(theta_jk | alpha) - ln pi_j(theta_jk)
    (arrays (..., K_j), the leading axes over parameter sets).

    Parameters
    ----------
    log_ratio : list of ndarray
        Per member, the log ratios (..., K_j).

    Returns
    -------
    ndarray
        The log likelihood over the leading axes.

    References
    ----------
    .. [1] Hogg, D. W., Myers, A. D. & Bovy, J. (2010), ApJ 725, 2166.
    """
    total = 0.0
    for r in log_ratio:
        m = np.max(r, axis=-1, keepdims=True)
        m = np.where(np.isfinite(m), m, 0.0)
        total = total + (np.log(np.mean(np.exp(r - m), axis=-1)) + m[..., 0])
    return total


def _ecc_arrays(stars: list[StarRecord]):
    """(e samples, ln prior at them) per companion, e clipped inside (0, 1)."""
    out = []
    for s in stars:
        for c in s.companions:
            e = np.clip(c["ecc"], 1e-9, 1 - 1e-9)
            out.append((e, np.asarray(c["prior"].logpdf(c["ecc"]), float)))
    return out


def _sample(log_prob, start: np.ndarray, rng: np.random.Generator, steps: int) -> np.ndarray:
    import emcee

    walkers = start.shape[0]
    sampler = emcee.EnsembleSampler(walkers, start.shape[1], log_prob, vectorize=True)
    sampler.random_state = np.random.RandomState(int(rng.integers(2**31))).get_state()
    sampler.run_mcmc(start, steps, progress=False)
    return sampler.get_chain(discard=steps // 3, flat=True)


def beta_population(stars: list[StarRecord], rng=0, steps: int = 800) -> dict:
    """The Beta(a, b) eccentricity population: posterior samples of (a, b) and of the
    mean a / (a + b), and each companion's shrunk eccentricity (median of its samples
    reweighted by the population at the posterior median).

    Parameters
    ----------
    stars : list of StarRecord
        The batch's stars.
    rng : int or numpy.random.Generator, optional
        Seed.
    steps : int, optional
        Sampler steps.

    Returns
    -------
    dict
        ``a``, ``b``, ``mean`` (samples) and ``shrunk`` ({companion: e}).
    """
    from scipy.special import betaln

    rng = np.random.default_rng(rng)
    arrays = _ecc_arrays(stars)
    if not arrays:
        raise OptionError("no companions to infer an eccentricity distribution from")
    # one matrix per quantity, (companions, samples), padded where a companion has fewer
    K = max(e.size for e, _ in arrays)
    le = np.full((len(arrays), K), np.nan)
    l1e, lp0 = le.copy(), le.copy()
    for j, (e, p0) in enumerate(arrays):
        le[j, : e.size], l1e[j, : e.size], lp0[j, : e.size] = np.log(e), np.log1p(-e), p0
    counts = np.sum(np.isfinite(le), axis=1)
    le, l1e, lp0 = (np.nan_to_num(x, nan=0.0) for x in (le, l1e, lp0))
    pad = np.arange(K)[None, :] >= counts[:, None]
    lo, hi = np.log(AB_RANGE[0]), np.log(AB_RANGE[1])

    def log_prob(x):  # x: (walkers, 2) = ln a, ln b
        la, lb = x[:, 0], x[:, 1]
        ok = (la > lo) & (la < hi) & (lb > lo) & (lb < hi)
        out = np.full(x.shape[0], -np.inf)
        for w in np.flatnonzero(ok):
            a, b = math.exp(la[w]), math.exp(lb[w])
            r = (a - 1) * le + (b - 1) * l1e - lp0
            r[pad] = -np.inf
            m = r.max(axis=1, keepdims=True)
            out[w] = float(np.sum(np.log(np.sum(np.exp(r - m), axis=1) / counts) + m[:, 0])
                           - len(arrays) * betaln(a, b))  # fmt: skip
        return out

    start = np.column_stack([rng.normal(0.0, 0.3, 32), rng.normal(1.0, 0.3, 32)])
    chain = np.exp(_sample(log_prob, start, rng, steps))
    a, b = chain[:, 0], chain[:, 1]
    a_med, b_med = float(np.median(a)), float(np.median(b))
    shrunk = []
    for e, p0 in arrays:
        w = (a_med - 1) * np.log(e) + (b_med - 1) * np.log1p(-e) - p0
        w = np.exp(w - w.max())
        order = np.argsort(e)
        cdf = np.cumsum(w[order]) / w.sum()
        shrunk.append(float(e[order][np.searchsorted(cdf, 0.5)]))
    return {"a": a, "b": b, "mean": a / (a + b), "shrunk": shrunk}


def histogram_population(stars: list[StarRecord], rng=0, steps: int = 800) -> dict:
    """The histogram population: N_BINS equal bins on [0, 1), heights sampled with the
    smoothness prior; returns the edges and the density samples (n, N_BINS).

    Parameters
    ----------
    stars : list of StarRecord
        The batch's stars.
    rng : int or numpy.random.Generator, optional
        Seed.
    steps : int, optional
        Sampler steps.

    Returns
    -------
    dict
        ``edges`` (N_BINS + 1) and ``density`` (samples, N_BINS).
    """
    rng = np.random.default_rng(rng)
    arrays = _ecc_arrays(stars)
    edges = np.linspace(0.0, 1.0, N_BINS + 1)
    width = np.diff(edges)
    # per companion and bin: (1/K) sum over its samples in the bin of 1 / pi(e)
    S = np.array([[np.mean(np.where((e >= edges[b]) & (e < edges[b + 1]), np.exp(-p0), 0.0))
                   for b in range(N_BINS)] for e, p0 in arrays])  # fmt: skip

    def log_prob(x):  # x: (walkers, N_BINS) log heights (softmax: the bins' shares)
        w = np.exp(x - x.max(axis=1, keepdims=True))
        share = w / w.sum(axis=1, keepdims=True)
        density = share / width
        like = np.sum(np.log(np.maximum(density @ S.T, 1e-300)), axis=1)
        d2 = np.diff(x, 2, axis=1)
        smooth = -0.5 * np.sum((d2 / SMOOTHNESS) ** 2, axis=1)
        anchor = -0.5 * np.mean(x, axis=1) ** 2  # fixes the softmax's free constant
        return like + smooth + anchor

    start = rng.normal(0.0, 0.1, (32, N_BINS))
    chain = _sample(log_prob, start, rng, steps)
    w = np.exp(chain - chain.max(axis=1, keepdims=True))
    density = (w / w.sum(axis=1, keepdims=True)) / width
    return {"edges": edges, "density": density}


def _box_completeness(limits: np.ndarray | None, prange, mrange) -> float | None:
    if limits is None:
        return None
    P, m, rec, tried = limits.T
    inside = (P >= prange[0]) & (P <= prange[1]) & (m >= mrange[0]) & (m <= mrange[1])
    if not np.any(inside):
        return None
    return float(np.mean(rec[inside] / np.maximum(tried[inside], 1)))


def occurrence(stars: list[StarRecord], period_range=DEFAULT_PERIOD_RANGE,
               mass_range=DEFAULT_MASS_RANGE) -> dict:  # fmt: skip
    """The fraction f of stars hosting at least one companion in the box (see the
    module text): its posterior on a grid, the hosts, each star's completeness and the
    stars counted with completeness 1 (no limits over the box).

    Parameters
    ----------
    stars : list of StarRecord
        The batch's stars.
    period_range : (float, float), optional
        The box's periods (days).
    mass_range : (float, float), optional
        The box's minimum masses (Jupiter masses).

    Returns
    -------
    dict
        ``fraction`` (median, minus, plus), ``interval95``, ``grid`` and ``posterior``,
        ``hosts``, ``completeness`` by star and ``without_limits``.
    """
    hosts, comp, without = [], [], []
    for s in stars:
        inside = any(period_range[0] <= np.median(c["period"]) <= period_range[1]
                     and mass_range[0] <= np.median(c["msini"]) <= mass_range[1]
                     for c in s.companions)  # fmt: skip
        c = _box_completeness(s.limits, period_range, mass_range)
        if c is None:
            without.append(s.name)
            c = 1.0
        hosts.append(inside)
        comp.append(max(c, 1e-6))
    hosts_a, comp_a = np.array(hosts, bool), np.array(comp)
    f = np.linspace(0.0, 1.0, 2001)
    with np.errstate(divide="ignore"):
        logL = (np.sum(np.log(f[:, None] * comp_a[hosts_a][None, :]), axis=1)
                + np.sum(np.log1p(-f[:, None] * comp_a[~hosts_a][None, :]), axis=1))  # fmt: skip
    post = np.exp(logL - np.max(logL))
    cdf = np.cumsum(post) / np.sum(post)
    q = [float(np.interp(p, cdf, f)) for p in (0.15865, 0.5, 0.84135, 0.025, 0.975)]
    return {"fraction": {"median": q[1], "minus": q[1] - q[0], "plus": q[2] - q[1]},
            "interval95": [q[3], q[4]], "n_hosts": int(hosts_a.sum()),
            "hosts": [s.name for s, h in zip(stars, hosts, strict=True) if h],
            "completeness": {s.name: c for s, c in zip(stars, comp, strict=True)},
            "completeness_from": "rvkep limits (injection and recovery over the box)",
            "without_limits": without, "grid": f,
            "posterior": post / np.trapezoid(post, f)}  # fmt: skip


def _estimate(x: np.ndarray) -> dict:
    lo, med, hi = np.percentile(x, [15.865, 50.0, 84.135])
    return {"median": float(med), "minus": float(med - lo), "plus": float(hi - med)}


def run_population(batch_dir: str | Path, out: str | Path, *, period_range=None,
                   mass_range=None, seed: int = 0, include_quick: bool = False,
                   quiet: bool = False) -> dict:  # fmt: skip
    """Read a batch, infer both populations, write population.json, population.md and
    the figures into ``out``; returns the JSON content.

    Parameters
    ----------
    batch_dir : str or Path
        The batch's output folder.
    out : str or Path
        Where the population files go.
    period_range, mass_range : (float, float), optional
        The occurrence box.
    seed : int, optional
        Seed of the samplers.
    include_quick : bool, optional
        Keep quick runs.
    quiet : bool, optional
        No progress.

    Returns
    -------
    dict
        What population.json holds.
    """
    from rvkep.outputs import check_output_folder, make_output_folder, write_text

    period_range = tuple(period_range or DEFAULT_PERIOD_RANGE)
    mass_range = tuple(mass_range or DEFAULT_MASS_RANGE)
    check_output_folder(out)
    if not (period_range[0] < period_range[1] and mass_range[0] < mass_range[1]):
        raise OptionError("--period-range and --mass-range need LO < HI")
    stars, skipped = read_batch(batch_dir, include_quick=include_quick,
                                include_unconverged=include_quick)  # fmt: skip
    longest = max(10.0 * s.span for s in stars)
    if period_range[0] > longest:
        raise OptionError(f"--period-range {period_range[0]:g},{period_range[1]:g}: no star's "
                          f"data reach periods above {longest:.4g} d (ten spans)")  # fmt: skip
    n_comp = sum(len(s.companions) for s in stars)
    say = (lambda text: None) if quiet else (lambda text: print(text, flush=True))
    say(f"population: {len(stars)} star(s), {n_comp} companion(s); {len(skipped)} skipped")
    doc: dict = {
        "n_stars": len(stars), "n_companions": n_comp, "stars": [s.name for s in stars],
        "skipped": skipped, "seed": seed,
    }  # fmt: skip
    beta = hist = None
    if n_comp:
        beta = beta_population(stars, rng=seed)
        hist = histogram_population(stars, rng=seed + 1)
        doc["eccentricity"] = _eccentricity_section(stars, beta, hist)
    occ = occurrence(stars, period_range, mass_range)
    doc["occurrence"] = _occurrence_section(occ, period_range, mass_range)
    warnings_ = []
    if occ["without_limits"]:
        warnings_.append(f"{len(occ['without_limits'])} star(s) without detection limits over "
                         f"the box counted with completeness 1: "
                         f"{', '.join(occ['without_limits'][:10])}")  # fmt: skip
    doc["warnings"] = warnings_
    out = Path(out)
    make_output_folder(out)
    _figures(out, stars, beta, hist, occ, period_range, mass_range)
    write_text(out / "population.md", _markdown(doc))
    write_text(out / "population.json", json.dumps(doc, indent=2) + "\n")
    _refresh_index(Path(batch_dir))
    for w in warnings_:
        say(f"warning: {w}")
    say(_headline(doc, period_range, mass_range, len(stars), out))
    return doc


def _eccentricity_section(stars, beta: dict, hist: dict) -> dict:
    """population.json's ``eccentricity``: the Beta and histogram populations and each
    companion's eccentricity shrunk towards the population."""
    labels = [(s.name, c["label"]) for s in stars for c in s.companions]
    return {
        "distribution": "beta", "a": _estimate(beta["a"]), "b": _estimate(beta["b"]),
        "mean": _estimate(beta["mean"]),
        "histogram": {"edges": hist["edges"].tolist(),
                      "density": [_estimate(hist["density"][:, k]) for k in range(N_BINS)]},
        "shrunk": [{"star": n, "companion": L, "ecc": e}
                   for (n, L), e in zip(labels, beta["shrunk"], strict=True)],
        "method": "importance reweighting of each star's samples, sampling prior "
                  "divided out (Hogg, Myers & Bovy 2010)",
    }  # fmt: skip


def _occurrence_section(occ: dict, period_range, mass_range) -> dict:
    """population.json's ``occurrence``: the fraction of stars with a companion in the
    box, with the completeness it was corrected by."""
    return {
        "fraction": occ["fraction"], "interval95": occ["interval95"], "n_hosts": occ["n_hosts"],
        "hosts": occ["hosts"], "period_range_d": list(period_range),
        "msini_range_mjup": list(mass_range), "completeness_from": occ["completeness_from"],
        "completeness": occ["completeness"], "stars_without_limits": occ["without_limits"],
    }  # fmt: skip


def _headline(doc: dict, period_range, mass_range, n_stars: int, out: Path) -> str:
    """The terminal's summary of a population run: the eccentricity population (when
    there are companions) and the occurrence."""
    lines = []
    if "eccentricity" in doc:
        m = doc["eccentricity"]["mean"]
        lines.append(f"eccentricity: Beta(a = {doc['eccentricity']['a']['median']:.3g}, b = "
                     f"{doc['eccentricity']['b']['median']:.3g}), mean {m['median']:.3f} "
                     f"+{m['plus']:.3f} -{m['minus']:.3f}")  # fmt: skip
    fr, occ = doc["occurrence"]["fraction"], doc["occurrence"]
    lines.append(f"occurrence in P {period_range[0]:g}-{period_range[1]:g} d x m sin i "
                 f"{mass_range[0]:g}-{mass_range[1]:g} M_Jup: {fr['median']:.3f} "
                 f"+{fr['plus']:.3f} -{fr['minus']:.3f} ({occ['n_hosts']} host(s) of "
                 f"{n_stars}); written to {out}/")  # fmt: skip
    return "\n".join(lines)


def _refresh_index(batch: Path) -> None:
    """Rewrite the batch's index.html so that it shows a population written into one of
    its subfolders (rvkep.report.index.population_summary)."""
    from rvkep.outputs import write_text
    from rvkep.report.index import render_index

    if not (batch / "index.html").exists():
        return
    with open(batch / "summary.csv", newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    write_text(batch / "index.html", render_index(batch, rows))


def _markdown(doc: dict) -> str:
    lines = [f"# rvkep population: {doc['n_stars']} star(s), {doc['n_companions']} companion(s)",
             ""]  # fmt: skip
    for w in doc["warnings"]:
        lines.append(f"*Warning: {w}.*")
    if doc["skipped"]:
        lines += ["", "Skipped: " + ", ".join(f"{s['name']} ({s['reason']})"
                                              for s in doc["skipped"]) + "."]  # fmt: skip
    if "eccentricity" in doc:
        e = doc["eccentricity"]

        def t(x):
            return f"{x['median']:.3g} +{x['plus']:.2g} -{x['minus']:.2g}"

        lines += ["", "## Eccentricities", "", f"Method: {e['method']}.", "",
                  f"Beta population: a = {t(e['a'])}, b = {t(e['b'])}, mean e = {t(e['mean'])}"
                  " (Kipping 2013 for RV planets: a = 0.867, b = 3.03).", "",
                  "| e bin | density |", "|---|---|"]  # fmt: skip
        edges = e["histogram"]["edges"]
        for k, d in enumerate(e["histogram"]["density"]):
            lines.append(f"| {edges[k]:.1f}-{edges[k + 1]:.1f} | {t(d)} |")
    o = doc["occurrence"]
    fr = o["fraction"]
    lines += ["", "## Occurrence", "",
              f"Fraction of stars with at least one companion of P {o['period_range_d'][0]:g}-"
              f"{o['period_range_d'][1]:g} d and m sin i {o['msini_range_mjup'][0]:g}-"
              f"{o['msini_range_mjup'][1]:g} M_Jup: {fr['median']:.3f} +{fr['plus']:.3f} "
              f"-{fr['minus']:.3f} (95%: {o['interval95'][0]:.3f}-{o['interval95'][1]:.3f}); "
              f"{o['n_hosts']} host(s); completeness from {o['completeness_from']}."]  # fmt: skip
    return "\n".join(lines) + "\n"


def _figures(out: Path, stars, beta, hist, occ, prange, mrange) -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from scipy.stats import beta as beta_dist

    from rvkep.outputs import save_figure

    if beta is not None:
        fig, ax = plt.subplots(figsize=(6.4, 4.0), layout="constrained")
        e = np.linspace(0.001, 0.999, 400)
        idx = np.linspace(0, beta["a"].size - 1, 300).astype(int)
        curves = beta_dist.pdf(e[None, :], beta["a"][idx, None], beta["b"][idx, None])
        lo, med, hi = np.percentile(curves, [15.865, 50, 84.135], axis=0)
        ax.fill_between(e, lo, hi, color="#0072B2", alpha=0.25, lw=0)
        ax.plot(e, med, color="#0072B2", label="Beta population (68% band)")
        edges = hist["edges"]
        dens = np.median(hist["density"], axis=0)
        ax.stairs(dens, edges, color="#D55E00", label="histogram population")
        medians = [float(np.median(c["ecc"])) for s in stars for c in s.companions]
        ax.plot(medians, np.zeros(len(medians)), "|", color="0.3", ms=14,
                label="per-star posterior medians")  # fmt: skip
        ax.set_xlabel("eccentricity")
        ax.set_ylabel("population density")
        ax.set_xlim(0, 1)
        ax.legend(frameon=False)
        save_figure(fig, out / "eccentricity.png")
    fig, ax = plt.subplots(figsize=(6.4, 4.4), layout="constrained")
    for s in stars:
        for c in s.companions:
            ax.plot(np.median(c["period"]), np.median(c["msini"]), "o", color="#0072B2", ms=4)
    ax.add_patch(plt.Rectangle((prange[0], mrange[0]), prange[1] - prange[0],
                               mrange[1] - mrange[0], fill=False, ec="#D55E00",
                               lw=1.5))  # fmt: skip
    grids = [s.limits for s in stars if s.limits is not None]
    if grids:
        P, m = grids[0][:, 0], grids[0][:, 1]
        same = [g for g in grids if g.shape == grids[0].shape]
        frac = np.mean([g[:, 2] / np.maximum(g[:, 3], 1) for g in same], axis=0)
        nP = np.unique(P).size
        if nP > 1 and P.size % nP == 0:
            shape = (nP, P.size // nP)
            cs = ax.contour(P.reshape(shape), m.reshape(shape), frac.reshape(shape),
                            levels=[0.5, 0.9], colors=["0.5", "0.2"])  # fmt: skip
            ax.clabel(cs, fmt={0.5: "50%", 0.9: "90%"}, fontsize=7)
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("period [d]")
    ax.set_ylabel("m sin i [M_Jup]")
    fr = occ["fraction"]
    ax.set_title(f"occurrence in the box: {fr['median']:.2f} +{fr['plus']:.2f} "
                 f"-{fr['minus']:.2f}", fontsize=9)  # fmt: skip
    save_figure(fig, out / "occurrence.png")
    plt.close("all")

