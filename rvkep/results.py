"""The results of an analysis: posterior summaries, derived physics, tables, JSON.

:class:`Results` gathers the search, the best fit, the sampler diagnostics and the
posterior samples (which it keeps, so predictions can be drawn later), adds the derived
quantities per sample (minimum mass, semi-major axis, periastron and apastron, with
the stellar mass drawn per sample), and writes:

* ``results.json``: every estimate as ``{"median", "minus", "plus"}`` from the 16th,
  50th and 84th percentiles (``minus``/``plus`` positive);
* ``summary.md``: a readable Markdown report;
* ``parameters.tex``: a LaTeX table (two significant digits on the uncertainty, the
  value rounded to match, asymmetric errors as superscript/subscript);
* ``parameters.csv``: one row per parameter (median, minus, plus, unit);
* ``samples.csv`` and ``samples.npz``: the posterior samples.
"""

from __future__ import annotations

import json
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from rvkep.errors import OptionError
from rvkep.formatting import format_uncertain, latex_value, text_estimate
from rvkep.physics import StarProperties, derive_companion, draw_positive
from rvkep.posterior import PosteriorSamples, circular_percentiles, percentiles
from rvkep.run_folder import clean, data_csv, load_fit, read_data_csv
from rvkep.stability import posterior_stability, stability_warning

__all__ = ["Results", "format_uncertain", "latex_value"]


@dataclass
class Results:
    """Everything an analysis produced (see the module text)."""

    data: object
    posterior: PosteriorSamples
    fit: object
    sampling: object | None = None
    search: object | None = None
    star: StarProperties | None = None
    star_assumed: bool = False
    comparison: list[dict] = field(default_factory=list)
    trend_comparison: list[dict] = field(default_factory=list)
    quick: bool = False
    seed: int | None = None
    notes: list[str] = field(default_factory=list)
    evidence: list[dict] = field(default_factory=list)  # ln Z per number of companions
    ecc_tests: dict = field(default_factory=dict)  # label: rvkep.eccentricity test
    timings: dict = field(default_factory=dict)  # stage: seconds (analyze fills it)
    saved: dict | None = None  # results.json of a run read back by Results.load
    provenance: dict = field(default_factory=dict)  # command, seed, input checksums
    star_name: str | None = None  # titles the summary and the report
    dynamics_comparison: list[dict] = field(default_factory=list)  # Keplerian vs N-body
    stability: dict = field(default_factory=dict)  # rvkep.stability.stability_summary
    open_orbits: dict = field(default_factory=dict)  # rvkep.outer.open_orbits
    harmonic_checks: list[dict] = field(default_factory=list)  # which won, by how much

    # -- building -------------------------------------------------------------

    @classmethod
    def build(cls, data, fit, sampling, posterior, star=None, rng=0, **kwargs) -> Results:
        """Add derived columns (one stellar-mass draw per sample, shared by all
        companions) and return the results."""
        rng = np.random.default_rng(rng)
        assumed = star is None
        star = star or StarProperties(1.0, 0.0)
        n = len(posterior)
        star_mass = draw_positive(star.mass, star.mass_err, n, rng)
        for c in fit.model.companions:
            L = c.label
            derived = derive_companion(
                posterior[f"{L}.period"], posterior[f"{L}.K"], posterior[f"{L}.ecc"],
                np.radians(posterior[f"{L}.omega_deg"]), star, rng=rng, star_mass=star_mass,
            )  # fmt: skip
            for key, values in derived.items():
                if key != "star_mass_msun":
                    posterior.add(f"{L}.{key}", values)
        if fit.model.companions:
            posterior.add("star.mass_msun", star_mass)
        if fit.model.dynamics != "keplerian":  # inclinations and true masses
            from rvkep.nbody import mutual_inclination, orientation
            from rvkep.physics import minimum_mass

            labels = [c.label for c in fit.model.companions]
            inc, node = orientation(posterior.columns, labels)
            if "dynamics.cos_inc" in posterior:
                posterior.add("dynamics.inclination_deg", np.degrees(inc[:, 0]))
            for j, L in enumerate(labels):
                if "dynamics.cos_inc" not in posterior:
                    posterior.add(f"{L}.inclination_deg", np.degrees(inc[:, j]))
                    if j:
                        posterior.add(f"{L}.mutual_inclination_deg", np.degrees(
                            mutual_inclination(inc[:, 0], node[:, 0], inc[:, j], node[:, j])))
                mass = minimum_mass(posterior[f"{L}.period"], posterior[f"{L}.K"] / np.sin(inc[:, j]),
                                    posterior[f"{L}.ecc"], star_mass)  # fmt: skip
                posterior.add(f"{L}.mass_mjup", mass)
        out = cls(data, posterior, fit, sampling, star=star, star_assumed=assumed, **kwargs)
        from rvkep.choice import season_notes
        from rvkep.outer import jitter_notes, open_orbit_note, open_orbits

        span = float(np.ptp(data.time)) if len(data) else 0.0
        out.open_orbits = open_orbits(posterior.columns, out.labels, span)
        out.notes += [open_orbit_note(L, e, span) for L, e in out.open_orbits.items()]
        out.notes += jitter_notes(fit.model, posterior.columns)
        out.notes += season_notes(fit)
        if len(fit.model.companions) > 1:
            out.stability = posterior_stability(fit.model, posterior)
            if not (out.stability["median_hill_stable"] and out.stability["median_amd_stable"]):
                out.notes.append(stability_warning(out.stability))
        if assumed:
            out.notes.append("star mass not given: 1 M_sun assumed for masses and orbit sizes")
        return out

    @classmethod
    def from_sampling(cls, sampling, *, star: StarProperties | None = None, search=None,
                      rng: int = 1, **kwargs) -> Results:  # fmt: skip
        """Results of a sampling run started from a fit (``fit.sample()``): its
        posterior (offsets drawn with ``rng - 1``), the derived quantities with the
        stellar mass drawn per sample (``rng``), the search if given."""
        if getattr(sampling, "fit", None) is None:
            raise ValueError("the sampling run does not know its fit: use fit.sample()")
        posterior = sampling.posterior(rng=rng - 1)
        return cls.build(sampling.model.data, sampling.fit, sampling, posterior, star, rng=rng,
                         search=search, **kwargs)  # fmt: skip

    @property
    def labels(self) -> list[str]:
        if self.fit is None and self.saved is not None:
            return [p["label"] for p in self.saved["planets"]]
        return [c.label for c in self.fit.model.companions]

    @property
    def instrument_names(self) -> list[str]:
        if self.fit is None and self.saved is not None:
            return [i["name"] for i in self.saved["instruments"]]
        return [i.name for i in self.fit.model.instruments]

    @property
    def noise_kind(self) -> str:
        """The noise model's name (``white`` for runs saved before it was recorded)."""
        if self.fit is None and self.saved is not None:
            return str(self.saved.get("noise", {}).get("kind", "white"))
        return str(self.fit.model.noise)

    @property
    def noise_names(self) -> list[str]:
        """The noise model's own parameters (columns ``noise.<name>``)."""
        prefix = "noise."
        return [k.removeprefix(prefix) for k in self.posterior.names if k.startswith(prefix)]

    @property
    def decorrelation_terms(self) -> list[tuple[str, str]]:
        """(indicator, instrument) of each decorrelation coefficient (``decorr.*``)."""
        out = []
        for k in self.posterior.names:
            if k.startswith("decorr."):
                ind, inst = k.removeprefix("decorr.").split(".", 1)
                out.append((ind, inst))
        return out

    @property
    def trend_degree(self) -> int:
        if self.fit is None and self.saved is not None:
            return int(self.saved["trend"]["degree"])
        return int(self.fit.model.trend)

    # -- reloading and predicting ------------------------------------------------

    @classmethod
    def load(cls, folder: str | Path) -> Results:
        """A finished run read back from its folder, without refitting.

        Reads ``results.json``, the posterior samples (``samples.npz``), the data the
        run used (``data.csv``) and the model (``model.json``: priors, noise model,
        best-fit coordinates). The result predicts (:meth:`predict`), prints, writes
        its tables and draws its figures like the original: its best fit is rebuilt
        from the saved coordinates on the saved data (and checked against the saved
        log-likelihood). What it does not keep is the search and the sampler's chain
        (``search`` and ``sampling`` are None; their numbers are in :attr:`saved`).
        A folder written before ``model.json`` existed loads with ``fit`` None
        (predictions and tables, no figures).

        Raises
        ------
        rvkep.errors.DataError
            If the folder lacks one of those files or they do not belong together.
        """
        from rvkep.errors import DataError

        folder = Path(folder)
        try:
            saved = json.loads((folder / "results.json").read_text(encoding="utf-8"))
        except FileNotFoundError:
            raise DataError(f"{folder}: no results.json (not a finished rvkep run)") from None
        except (OSError, ValueError) as exc:
            raise DataError(f"{folder / 'results.json'}: unreadable ({exc})") from None
        for name in ("samples.npz", "data.csv"):
            if not (folder / name).exists():
                raise DataError(f"{folder}: no {name} (written by rvkep 0.1.0 runs from now on)")
        try:
            posterior = PosteriorSamples.read_npz(folder / "samples.npz")
            data = read_data_csv(folder / "data.csv", float(saved["reference_epoch"]))
        except (OSError, ValueError, KeyError) as exc:
            raise DataError(f"{folder}: damaged samples.npz or data.csv ({exc})") from None
        missing = [f"{p['label']}.period" for p in saved["planets"]
                   if f"{p['label']}.period" not in posterior]  # fmt: skip
        if missing or len(data) != sum(i["n_points"] for i in saved["instruments"]):
            raise DataError(f"{folder}: results.json, samples.npz and data.csv disagree")
        s = saved["star"]
        star = StarProperties(s["mass_msun"], s["mass_err_msun"], radius=s.get("radius_rsun"),
                              teff=s.get("teff_k"))  # fmt: skip
        kind = saved["run_kind"]
        fit = load_fit(folder, data, star, saved, posterior)
        return cls(
            data, posterior, fit, star=star, star_assumed=bool(kind["star_mass_assumed"]),
            comparison=saved.get("model_comparison", []),
            trend_comparison=saved.get("trend_comparison", []), quick=bool(kind["quick"]),
            seed=saved.get("seed"), notes=list(saved.get("notes", [])), saved=saved,
            star_name=s.get("name"),
            dynamics_comparison=saved.get("dynamics", {}).get("comparison", []),
            stability=saved.get("stability", {}),
        )  # fmt: skip

    def predict(
        self,
        t,
        *,
        instrument: str | None = None,
        draws: int | None = None,
        typical_error: float | None = None,
        rng: np.random.Generator | int | None = 0,
    ):
        """Posterior predictive curves at times ``t`` (see :mod:`rvkep.prediction`).

        Each companion's curve, their sum plus the trend (``total``) and, with
        ``instrument``, what that instrument should measure (``measured``: its offset,
        its jitter and ``typical_error`` folded in; default the median error of its
        points). Returns a :class:`rvkep.prediction.Prediction`.
        """
        from rvkep.prediction import predict

        if instrument is not None and typical_error is None:
            own = self.data.err[self.data.instrument == instrument]
            typical_error = float(np.median(own)) if own.size else 0.0
        return predict(
            self.posterior.columns, self.labels, t, epoch=self.data.epoch,
            instrument=instrument, typical_error=typical_error or 0.0, draws=draws, rng=rng,
        )  # fmt: skip

    def events(self, start: float, end: float) -> list[dict]:
        """Conjunctions, oppositions, periastron passages and quadratures of every
        companion in [start, end] with their 68%/95% intervals from the posterior
        (:func:`rvkep.events.event_times`); the a priori transit probability stands
        beside each conjunction when the stellar radius is known."""
        from rvkep.events import event_times

        prob = {L: float(np.median(self.posterior[f"{L}.transit_probability"]))
                for L in self.labels if f"{L}.transit_probability" in self.posterior}  # fmt: skip
        return event_times(self.posterior.columns, self.labels, start, end, prob or None)

    def plan(
        self,
        *,
        site: tuple[float, float, float],
        ra: float,
        dec: float,
        start: str,
        nights: int,
        per_night: int = 1,
        count: int | None = None,
        max_airmass: float = 2.0,
        aim: str | None = None,
        instrument: str | None = None,
        time_offset: float | None = None,
        step_minutes: float = 10.0,
        rng: np.random.Generator | int | None = 0,
    ):
        """An observing plan over ``nights`` nights from the evening of ``start`` (ISO
        date) at ``site`` (latitude, longitude east, height m) for the star at ICRS
        (``ra``, ``dec``) degrees: the epochs where one more velocity from
        ``instrument`` (default: the one with most points) would shrink the posterior
        of ``aim`` most (default: the least-constrained companion's period or K;
        ``"all"``: the whole orbit). See :mod:`rvkep.plan` and :mod:`rvkep.sky`.
        ``time_offset`` is BJD_TDB minus the data's times (needed unless the data hold
        full BJDs). Returns a :class:`rvkep.plan.Plan`."""
        from rvkep.plan import plan_epochs
        from rvkep.sky import observing_grid
        from rvkep.timeconv import check_request, data_offset

        if not self.labels:
            raise OptionError("the run has no companion to plan for")
        check_request([], ra, dec, site)
        offset = data_offset(self.data.time, time_offset)
        names = self.instrument_names
        if instrument is None:
            counts = [int(np.sum(self.data.instrument == n)) for n in names]
            instrument = names[int(np.argmax(counts))]
        elif instrument not in names:
            raise OptionError(f"unknown instrument {instrument!r}; the run's: {', '.join(names)}")
        if aim is not None and aim != "all" and aim not in self.posterior:
            raise OptionError(f"--aim {aim!r} is not a parameter of the run (e.g. "
                              f"{self.labels[0]}.K, {self.labels[0]}.period, or all)")  # fmt: skip
        if per_night < 1 or (count is not None and count < 1):
            raise OptionError("--per-night and --epochs must be at least 1")
        cols = self.posterior.columns
        err = float(np.median(self.data.err[self.data.instrument == instrument]))
        var = np.asarray(cols.get(f"jitter.{instrument}", np.zeros(1)), float) ** 2 + err**2
        if "noise.amplitude" in cols:  # activity: unpredicted here, counted as noise
            var = var + np.asarray(cols["noise.amplitude"], float) ** 2
        grid = observing_grid(site, ra, dec, start, nights, step_minutes=step_minutes,
                              max_airmass=max_airmass)  # fmt: skip
        if not grid.observable.any():
            raise OptionError(f"the star (RA {ra:g}, Dec {dec:g}) is never observable from "
                              f"{site} in these {nights} nights (Sun below "
                              f"{grid.sun_limit:g} deg, airmass <= {max_airmass:g})")  # fmt: skip
        return plan_epochs(cols, self.labels, grid, epoch=self.data.epoch, time_offset=offset,
                           instrument=instrument, noise_var=float(np.median(var)), aim=aim,
                           per_night=per_night, count=count, rng=rng)  # fmt: skip

    # -- summaries ------------------------------------------------------------

    @property
    def converged(self) -> bool:
        if self.sampling is None and self.saved is not None:
            return bool(self.saved["run_kind"]["converged"])
        return bool(getattr(self.sampling, "converged", False))

    def run_marks(self) -> list[str]:
        """What kind of run made these results, as short marks (empty for a final,
        converged run with a given stellar mass). Every output carries them."""
        marks = []
        if self.quick:
            marks.append("QUICK MODE (short chains, preview only)")
        if not self.converged:
            marks.append("NOT CONVERGED (preliminary)")
        if self.star_assumed:
            marks.append(f"stellar mass ASSUMED ({self.star.mass:g} M_sun)")
        return marks

    def trend_companion(self) -> list[dict]:
        """The least mass of a companion causing the trend, by separation
        (:func:`rvkep.outer.trend_companion`; empty without a trend)."""
        from rvkep.outer import trend_companion

        if "trend.slope" not in self.posterior:
            return []
        return trend_companion(self.posterior.columns, float(np.ptp(self.data.time)),
                               float(self.star.mass))  # fmt: skip

    @property
    def dynamics_note(self) -> str:
        """For an N-body run, what the Keplerian-based outputs (events, plans) assume;
        empty otherwise."""
        if not any(k.startswith("dynamics.cos_inc") for k in self.posterior.columns):
            return ""
        return ("N-body run: from each companion's osculating elements at the epoch as "
                "Keplerian orbits (the interactions shift later events)")

    def run_label(self) -> str:
        """The marks joined into one line, or ``final`` when there are none."""
        return "; ".join(self.run_marks()) or "final"

    def estimate(self, column: str) -> dict[str, float]:
        if column.endswith("omega_deg"):
            return circular_percentiles(self.posterior[column])
        return percentiles(self.posterior[column])

    def to_dict(self) -> dict:
        """The content of results.json (:func:`rvkep.results_document.document`)."""
        from rvkep.results_document import document

        if self.saved is not None:
            return json.loads(json.dumps(self.saved))  # a copy
        return document(self)

    def parameter_rows(self):
        """The one list of table rows (:func:`rvkep.report.rows.parameter_rows`)."""
        from rvkep.report.rows import parameter_rows

        return parameter_rows(self)

    def latex_table(self) -> str:
        from rvkep.report import render

        return render(self, "latex")

    def csv_table(self) -> str:
        from rvkep.report import render

        return render(self, "csv")

    def markdown(self) -> str:
        from rvkep.report import render

        return render(self, "markdown")

    def to_inference_data(self):
        """The run as an ArviZ ``InferenceData`` (posterior with chain and draw
        dimensions, sample statistics, observed velocities and, for white noise, the
        pointwise log-likelihood for ``arviz.loo``): :mod:`rvkep.inference_data`."""
        from rvkep.inference_data import to_inference_data

        return to_inference_data(self)

    def _repr_markdown_(self) -> str:
        return self.markdown()

    def __str__(self) -> str:
        d = self.to_dict()
        lines = [
            f"{d['n_planets']} companion(s)"
            + ("  [QUICK MODE: preview only]" if self.quick else "")
        ]
        for p in d["planets"]:
            lines.append(
                f"  {p['label']}: P = {text_estimate(p['period_d'])} d, K = {text_estimate(p['K_mps'])} m/s, "
                f"e = {text_estimate(p['ecc'])}, m sin i = {text_estimate(p['msini_mjup'])} M_Jup "
                f"({text_estimate(p['msini_mearth'])} M_Earth), a = {text_estimate(p['a_au'])} au"
                + (f", m = {text_estimate(p['mass_mjup'])} M_Jup" if "mass_mjup" in p else "")
                + (f"; orbit NOT closed: P > {p['lower_limits']['period_d']:.4g} d, m sin i > "
                   f"{p['lower_limits']['msini_mjup']:.3g} M_Jup (1st percentiles)"
                   if not p.get("orbit_closed", True) else "")
            )
        if "dynamics" in d and "inclination_deg" in d["dynamics"]:
            lines.append(f"  N-body: inclination = {text_estimate(d['dynamics']['inclination_deg'])}"
                         " deg (shared)")  # fmt: skip
        if "stability" in d:
            st = d["stability"]
            lines.append(f"  stable draws: Hill {st['hill_stable_fraction']:.0%}, AMD "
                         f"{st['amd_stable_fraction']:.0%}")  # fmt: skip
        for i in d["instruments"]:
            lines.append(
                f"  {i['name']}: offset = {text_estimate(i['offset_mps'])} m/s, jitter = {text_estimate(i['jitter_mps'])} m/s"
            )
        if self.noise_names:
            lines.append(f"  noise: {self.noise_kind}; " + ", ".join(
                f"{k} = {text_estimate(d['noise'][k])}" for k in self.noise_names))  # fmt: skip
        if not d["sampler"]["converged"]:
            lines.append("  WARNING: the chain did not converge; results are preliminary")
        return "\n".join(lines)

    __repr__ = __str__

    # -- writing --------------------------------------------------------------

    def write_report(self, out: str | Path) -> Path:
        """report.html in ``out``: the self-contained page of :mod:`rvkep.report.html`,
        with the figures found there."""
        from rvkep.outputs import write_text
        from rvkep.report.html import render

        return write_text(Path(out) / "report.html", render(self, out))

    def write(self, out: str | Path) -> dict[str, Path]:
        """Write results.json, summary.md, parameters.tex/.csv and the samples."""
        from rvkep.outputs import write_text

        t_start = time.perf_counter()
        out = Path(out)
        out.mkdir(parents=True, exist_ok=True)
        paths = {
            "summary": write_text(out / "summary.md", self.markdown()),
            "latex": write_text(out / "parameters.tex", self.latex_table()),
            "csv": write_text(out / "parameters.csv", self.csv_table()),
            "samples_csv": self.posterior.to_csv(out / "samples.csv"),
            "samples_npz": self.posterior.to_npz(out / "samples.npz"),
            "data": write_text(out / "data.csv", data_csv(self.data)),
        }
        if self.fit is not None:
            model = {"model": self.fit.model.to_dict(),
                     "best_fit_theta": [float(x) for x in self.fit.theta],
                     "log_likelihood": float(self.fit.log_likelihood)}  # fmt: skip
            paths["model"] = write_text(out / "model.json", json.dumps(clean(model)) + "\n")
        if self.saved is None:  # a fresh run: the time its tables took
            self.timings["tables"] = time.perf_counter() - t_start
        paths["report"] = self.write_report(out)
        # results.json last: its presence marks a complete result folder
        paths["json"] = write_text(
            out / "results.json", json.dumps(clean(self.to_dict()), indent=2) + "\n"
        )
        return paths


