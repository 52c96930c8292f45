"""The readable report (summary.md): verdict, warnings, companions, instruments, trend,
search, companion-number and trend comparisons, sampler and priors."""

from __future__ import annotations

from rvkep.formatting import p_relation, text_estimate
from rvkep.report.rows import TEQ_ASSUMPTIONS, support_lines

__all__ = ["render"]

SUFFIX = ".md"


#: how the summary describes each correlated noise model
_NOISE_WORDS = {
    "gp": "a correlated stellar-activity signal shared by the instruments, beside their "
          "jitters",
    "night": "each point's error and jitter, plus a shift shared by one instrument's points "
             "of one night: night_<instrument>, in m/s",
}


def render(results) -> str:
    """summary.md of a run.

    Parameters
    ----------
    results : rvkep.results.Results
        A fresh or reloaded run.

    Returns
    -------
    str
        The Markdown text, section after section.
    """
    d = results.to_dict()
    lines: list[str] = []
    for section in _SECTIONS:
        lines += section(results, d)
    lines += _trend_companion_lines(d)
    lines += _dynamics_lines(d)
    lines += _sampler_lines(results, d)
    lines += _limits_lines(results, d)
    lines += _how_it_was_run(d.get("provenance"))
    return "\n".join(lines) + "\n"


def _header_lines(results, d: dict) -> list[str]:
    """The title, the run's kind, warnings, notes and the star."""
    s = d["sampler"]
    lines: list[str] = []
    name = results.star_name or d["star"].get("name")
    lines += [f"# rvkep results{f' for {name}' if name else ''}: {d['n_planets']} companion(s)", "",
             f"Kind of run: **{results.run_label()}**.", ""]
    if results.quick:
        lines += ["**Quick mode: short chains for a preview; not for publication.**", ""]
    if not s["converged"]:
        lines += [
            "**WARNING: the chain did not converge; the numbers below are preliminary.**",
            "",
        ]
    # the quick-mode note is the bold line above: said once
    notes = [n for n in results.notes if not n.startswith("quick mode:")]
    for note in notes:
        lines.append(f"*Note: {note.rstrip('.')}.*")
    if notes:
        lines.append("")
    star = d["star"]
    lines.append(f"Star mass {star['mass_msun']:g} +- {star['mass_err_msun']:g} M_sun"
                 + (" (assumed)" if star["assumed"] else "") + f"; {len(results.data)} velocities"
                 f" from {len(d['instruments'])} instrument(s); reference epoch {results.data.epoch:.1f}.")  # fmt: skip
    lines.append("")
    return lines


def _companion_lines(results, d: dict) -> list[str]:
    """The companions' table, eccentricity tests, derived quantities."""
    lines: list[str] = []
    if d["planets"]:
        lines += ["## Companions", "",
                  "| | P [d] | K [m/s] | e | omega [deg] | tc | m sin i [M_Jup] | m sin i [M_Earth] | a [au] |",
                  "|---|---|---|---|---|---|---|---|---|"]  # fmt: skip
        for p in d["planets"]:
            cells = [text_estimate(p[k]) for k in ("period_d", "K_mps", "ecc", "omega_deg", "tc_bjd",
                                           "msini_mjup", "msini_mearth", "a_au")]  # fmt: skip
            lines.append(f"| {p['label']} | " + " | ".join(cells) + " |")
        lines.append("")
        for p in d["planets"]:
            t = p.get("ecc_test")
            if t is None:
                continue
            verdict = ("refitted circular (consistent with circular)" if t.get("refitted_circular")
                       else "consistent with circular" if t["consistent_with_circular"]
                       else "eccentric")  # fmt: skip
            lines.append(f"Eccentricity of {p['label']}: {verdict} (Lucy & Sweeney 1971 p "
                         f"{p_relation(t['lucy_sweeney_p'])}; BIC circular - eccentric = "
                         f"{t['delta_bic_circular_minus_eccentric']:.1f}).")  # fmt: skip
        if any("ecc_test" in p for p in d["planets"]):
            lines.append("")
        lines += support_lines(d["planets"])
        for p in d["planets"]:
            derived = [f"{name} {text_estimate(p[k])}{unit}" for k, name, unit in (
                ("transit_probability", "a priori transit probability", ""),
                ("teq_k", "equilibrium temperature", " K"),
                ("insolation_earth", "insolation", " S_Earth")) if k in p]  # fmt: skip
            if derived:
                lines.append(f"Companion {p['label']}: " + ", ".join(derived) + ".")
        if any("teq_k" in p for p in d["planets"]):
            lines.append(f"({TEQ_ASSUMPTIONS}.)")
        if any(k in p for p in d["planets"] for k in ("transit_probability", "teq_k")):
            lines.append("")
    else:
        lines += ["No significant companion.", ""]
    return lines


def _instrument_lines(results, d: dict) -> list[str]:
    """The instruments' table, trend and decorrelation terms."""
    lines: list[str] = []
    lines += [
        "## Instruments",
        "",
        "| instrument | points | offset [m/s] | jitter [m/s] | rms of residuals [m/s] |",
        "|---|---|---|---|---|",
    ]
    for i in d["instruments"]:
        lines.append(
            f"| {i['name']} | {i['n_points']} | {text_estimate(i['offset_mps'])} | {text_estimate(i['jitter_mps'])} | {i['rms_residual_mps']:.2f} |"
        )
    lines.append("")
    if d.get("decorrelation"):
        lines += ["Decorrelation against activity indicators (m/s per unit of the indicator):",
                  "", "| indicator | instrument | coefficient |", "|---|---|---|"]  # fmt: skip
        lines += [f"| {c['indicator']} | {c['instrument']} | {text_estimate(c['coefficient'])} |"
                  for c in d["decorrelation"]]  # fmt: skip
        lines.append("")
    return lines


def _noise_lines(results, d: dict) -> list[str]:
    """The noise model and its parameters; the trend's slope."""
    lines: list[str] = []
    noise = d.get("noise", {"kind": "white"})
    if noise["kind"] == "white":
        lines += ["Noise: white (each point's error and its instrument's jitter, independent).",
                  ""]  # fmt: skip
    else:
        what = _NOISE_WORDS.get(noise["kind"], "a correlated signal beside the jitters")
        lines += [f"Noise: {noise['kind']} ({what}).", "",
                  "| noise parameter | estimate |", "|---|---|"]  # fmt: skip
        lines += [f"| {k} | {text_estimate(v)} |" for k, v in noise.items() if k != "kind"]
        lines.append("")
    if d["trend"]["degree"]:
        lines += [f"Trend: {text_estimate(d['trend']['slope_mps_per_yr'])} m/s/yr", ""]
    return lines


def _search_lines(results, d: dict) -> list[str]:
    """The signal search's table and its notes."""
    lines: list[str] = []
    if d["search"]:
        lines += [
            "## Signal search",
            "",
            "| # | period [d] | power | FAP | significant | aliases flagged | activity |",
            "|---|---|---|---|---|---|---|",
        ]
        for k, c in enumerate(d["search"], 1):
            lines.append(
                f"| {k} | {c['period_d']:.5g} | {c['power']:.3f} | {c['fap']:.2e} | {'yes' if c['significant'] else 'no'} | {', '.join(c['aliases_flagged']) or '-'} | {', '.join(c['activity']) or '-'} |"
            )
        lines.append("")
        for k, c in enumerate(d["search"], 1):
            if c.get("periodogram", "sine") != "sine":
                lines.append(f"Signal {k} was found by the Keplerian periodogram.")
            lines += [f"Signal {k}: {note}" for note in c.get("notes", [])]
        lines.append("")
    return lines


def _count_lines(results, d: dict) -> list[str]:
    """The comparison of companion counts and the evidence."""
    lines: list[str] = []
    if d["model_comparison"]:
        lines += [
            "## Number of companions",
            "",
            "| companions | ln L | BIC | delta BIC | chosen |",
            "|---|---|---|---|---|",
        ]
        for row in d["model_comparison"]:
            lines.append(
                f"| {row['n_companions']} | {row['log_likelihood']:.2f} | {row['bic']:.2f} | {row['delta_bic']:.2f} | {'yes' if row['chosen'] else ''} |"
            )
        lines.append("")
    if d.get("evidence"):
        lines += [
            "## Evidence",
            "",
            "ln Z by nested sampling (dynesty), offsets and trend under flat priors of unit "
            "density (differences between rows are Bayes factors); a larger number of "
            "companions needs ln Z higher by more than 5 (Kass & Raftery 1995):",
            "",
            "| companions | ln Z | +- | reliable | likelihood calls | seconds |",
            "|---|---|---|---|---|---|",
        ]
        lines += [f"| {e['n_companions']} | {e['ln_z']:.2f} | {e['ln_z_err']:.2f} | "
                  f"{'yes' if e.get('reliable', True) else 'NO (mode missed)'} | "
                  f"{e.get('likelihood_calls', 0):,} | {e.get('seconds', 0):.1f} |"
                  for e in d["evidence"]]  # fmt: skip
        lines.append("")
    return lines


def _trend_lines(results, d: dict) -> list[str]:
    """The comparison of trend degrees and the harmonic checks."""
    lines: list[str] = []
    if d["trend_comparison"]:
        lines += [
            "## Trend",
            "",
            "Every trend degree and companion count compared by parameter count (a model "
            "with more free parameters must lower the BIC by more than 10):",
            "",
            "| degree | companions | periods [d] | free parameters | ln L | BIC | delta BIC | chosen |",
            "|---|---|---|---|---|---|---|---|",
        ]
        for row in d["trend_comparison"]:
            periods = ", ".join(f"{p:.5g}" for p in row["periods_d"]) or "-"
            lines.append(
                f"| {row['degree']} | {row['n_companions']} | {periods} | {row.get('n_free', '')} | {row['log_likelihood']:.2f} | {row['bic']:.2f} | {row['delta_bic']:.2f} | {'yes' if row['chosen'] else ''} |"
            )
        lines.append("")
    if d.get("harmonic_checks"):
        lines += [
            "## Harmonics", "",
            "A companion at P/2, P/3 or 2P of another is kept only if it beats the other "
            "refitted eccentric by more than 10 in BIC:", "",
            "| companion | period [d] | at the | of | delta BIC | e of the other alone | kept |",
            "|---|---|---|---|---|---|---|",
        ]  # fmt: skip
        lines += [f"| {r['companion']} | {r['period_d']:.6g} | {r['ratio']} | {r['of']} | "
                  f"{r['delta_bic']:.1f} | {r['ecc_without']:.3f} | "
                  f"{'yes' if r['kept'] else 'no'} |" for r in d["harmonic_checks"]]  # fmt: skip
        lines.append("")
    return lines


def _sampler_lines(results, d: dict) -> list[str]:
    """The sampler's diagnostics and the priors."""
    s = d["sampler"]
    lines: list[str] = []
    lines += [
        "## Sampler", "",
        (f"{s['walkers']} walkers, {s['steps']} steps, autocorrelation time {s['autocorr_steps']:.1f} steps, "
         f"converged: {'yes' if s['converged'] else 'NO'}"
         + (f", acceptance {s['acceptance_mean']:.2f}, {s['effective_samples']:.0f} effective samples, {s['seconds']:.1f} s" if "acceptance_mean" in s else ""))
        if "live_points" not in s else
        (f"nested sampling (dynesty): {s['live_points']} live points, {s['iterations']:,} iterations, "
         f"{s['likelihood_calls']:,} likelihood calls, ln Z = {s['ln_z']:.2f} +- {s['ln_z_err']:.2f}, "
         f"{s['effective_samples']:.0f} effective samples, {s['seconds']:.1f} s"),
        "",
        "## Priors", "", "| parameter | prior |", "|---|---|",
    ]  # fmt: skip
    lines += [f"| {p['parameter']} | {p['prior']} |" for p in d["priors"]]
    return lines


def _limits_lines(results, d: dict) -> list[str]:
    """The detection limits, when the run has them."""
    lines: list[str] = []
    if d.get("limits"):
        lim = d["limits"]
        lines += ["", "## Detection limits", "", f"Injection and recovery: {lim['method']}.", "",
                  "| period [d] | 50%: M sin i [M_Earth] | K [m/s] | 95%: M sin i [M_Earth] | K [m/s] |",
                  "|---|---|---|---|---|"]  # fmt: skip

        def cell(x):
            return "-" if x is None else f"{x:.3g}"

        lines += [f"| {c['period_d']:.3g} | {cell(c['msini50_mearth'])} | {cell(c['k50_mps'])} | "
                  f"{cell(c['msini95_mearth'])} | {cell(c['k95_mps'])} |" for c in lim["curves"]]  # fmt: skip
    return lines


#: the sections before the comparisons' appendices, in order
_SECTIONS = (_header_lines, _companion_lines, _instrument_lines, _noise_lines, _search_lines,
             _count_lines, _trend_lines)  # fmt: skip


def _how_it_was_run(prov: dict | None) -> list[str]:
    """The section that says how to make the run again: the command, the options that
    differ from their defaults (from the option table), the seed and the inputs."""
    if not prov:
        return []
    from rvkep.options import as_flags

    lines = ["", "## How this was run", "", f"- command: `{prov.get('command', 'not recorded')}`"]
    if prov.get("options"):
        values = {k: tuple(v) if isinstance(v, list) else v for k, v in prov["options"].items()}
        lines.append(f"- options other than the defaults: `{as_flags(values) or 'none'}`; "
                     f"seed {prov.get('seed')}.")  # fmt: skip
    for f in prov.get("inputs", []):
        lines.append(f"- input `{f['file']}`: sha256 {f['sha256'] or 'unreadable'}.")
    return lines


def _dynamics_lines(d: dict) -> list[str]:
    """The N-body comparison and the stability of a multi-companion solution."""
    lines: list[str] = []
    dyn = d.get("dynamics")
    if dyn:
        inc = dyn.get("inclination_deg")
        shared = (f" Shared inclination {inc['median']:.1f} (+{inc['plus']:.1f} "
                  f"-{inc['minus']:.1f}) deg." if inc else " Inclinations and nodes free "
                  "(per companion in the table above; Phi: mutual inclination with the first).")
        lines += [
            "## Dynamics", "",
            f"N-body model ({dyn['integrator']}); light-travel time neglected.{shared}", "",
            "| dynamics | free parameters | ln L | BIC | delta BIC |", "|---|---|---|---|---|",
        ]  # fmt: skip
        lines += [f"| {r['dynamics']} | {r['n_free']} | {r['log_likelihood']:.2f} | "
                  f"{r['bic']:.2f} | {r['delta_bic']:.2f} |" for r in dyn["comparison"]]  # fmt: skip
        lines.append("")
    st = d.get("stability")
    if st:
        lines += [
            "## Stability", "",
            f"Over {st['draws']:,} posterior draws ({st['masses']}): Hill stable "
            f"(Gladman 1993) {st['hill_stable_fraction']:.1%}, AMD stable (Laskar & Petit "
            f"2017) {st['amd_stable_fraction']:.1%}.", "",
            "| pair | Hill margin | AMD beta | median solution |", "|---|---|---|---|",
        ]  # fmt: skip
        for p in st["pairs"]:
            ok = p["hill_margin"] > 0 and p["amd_beta"] < 1
            lines.append(f"| {p['inner']}-{p['outer']} | {p['hill_margin']:+.3g} | "
                         f"{p['amd_beta']:.3g} | {'stable' if ok else 'NOT stable'} |")  # fmt: skip
        lines.append("")
    return lines


def _trend_companion_lines(d: dict) -> list[str]:
    """The least mass of a companion that could cause the trend, by separation."""
    rows = d.get("trend_companion")
    if not rows:
        return []
    lines = [
        "## What the trend implies", "",
        "If an unseen companion causes the trend, it needs at least this mass at each "
        "separation (M >= a^2 |dv/dt| / G, the most favourable geometry; Torres 1999). "
        "Closer than the first row its period would be shorter than the data and show as "
        "an orbit:", "",
        "| separation [au] | least mass [M_Jup], median | 1st percentile |", "|---|---|---|",
    ]  # fmt: skip
    lines += [f"| {r['a_au']:.3g} | {r['min_mass_mjup']:.3g} | {r['min_mass_mjup_p1']:.3g} |"
              for r in rows]  # fmt: skip
    return lines + [""]
