"""Make an invented active star: one small planet under quasi-periodic stellar activity.

The star "Orrin" and the spectrographs "kestrel" and "osprey" are made up, and so is
every number below. The activity signal is one draw of a Gaussian process with the
quasi-periodic covariance of Haywood et al. (2014),

    k(tau) = A^2 exp(-tau^2 / (2 L^2) - sin^2(pi tau / P_rot) / (2 w^2)),

drawn densely (Cholesky factor of the full covariance, numpy only): a different kernel
from the one rvkep fits (a sum of two damped oscillators), as a real star's would be.
Each spectrograph adds its offset, its quoted error and a jitter. The truth is written
beside the data in ``truth.json``.

Usage: python scripts/make_activity_star.py OUTDIR [--seed N]
"""

import argparse
import json
from pathlib import Path

import numpy as np

from rvkep.orbit import radial_velocity

SEED = 20261203
STAR = {"name": "Orrin", "mass_msun": 0.81, "mass_err_msun": 0.03}
EPOCH0 = 2460100.0
PLANET = {"label": "b", "period_d": 7.31, "K_mps": 4.0, "ecc": 0.08, "omega_deg": 110.0,
          "tp_bjd": 2460102.4}  # fmt: skip
ACTIVITY = {"amplitude_mps": 6.0, "rotation_period_d": 25.3, "decay_d": 45.0, "harmonic_w": 0.5}
INSTRUMENTS = [
    {"name": "kestrel", "n_points": 110, "offset_mps": -4.2, "jitter_mps": 0.8, "err_mps": 1.0},
    {"name": "osprey", "n_points": 70, "offset_mps": 13.5, "jitter_mps": 1.2, "err_mps": 1.6},
]  # fmt: skip


def quasi_periodic(tau, amplitude, period, decay, w):
    """Haywood et al. (2014) quasi-periodic covariance."""
    return amplitude**2 * np.exp(
        -(tau**2) / (2 * decay**2) - np.sin(np.pi * tau / period) ** 2 / (2 * w**2)
    )


def make(seed: int = SEED, activity_scale: float = 1.0, planet_scale: float = 1.0) -> dict:
    """(times, velocities, errors, instruments) and the truth, from ``seed``; the
    activity and the planet scaled by the given factors (0: none)."""
    rng = np.random.default_rng(seed)
    n = sum(i["n_points"] for i in INSTRUMENTS)
    nights = np.sort(rng.choice(np.arange(0.0, 240.0), size=n, replace=False))
    t = EPOCH0 + nights + rng.uniform(-0.1, 0.1, n)
    inst = np.array(sum(([i["name"]] * i["n_points"] for i in INSTRUMENTS), []))
    rng.shuffle(inst)
    a = ACTIVITY
    cov = quasi_periodic(t[:, None] - t[None, :], a["amplitude_mps"], a["rotation_period_d"],
                         a["decay_d"], a["harmonic_w"])  # fmt: skip
    chol = np.linalg.cholesky(cov + 1e-8 * np.eye(n))
    activity = chol @ rng.standard_normal(n)
    p = PLANET
    planet = radial_velocity(t, p["period_d"], p["tp_bjd"], p["ecc"], np.radians(p["omega_deg"]),
                             p["K_mps"])  # fmt: skip
    rv = planet_scale * planet + activity_scale * activity
    err = np.empty(n)
    for i in INSTRUMENTS:
        m = inst == i["name"]
        err[m] = i["err_mps"] * rng.uniform(0.8, 1.2, m.sum())
        rv[m] += i["offset_mps"] + rng.normal(0, np.hypot(err[m], i["jitter_mps"]))
    truth = {"star": STAR, "planet": PLANET, "activity": ACTIVITY, "instruments": INSTRUMENTS,
             "seed": seed, "activity_scale": activity_scale, "planet_scale": planet_scale,
             "made_by": "scripts/make_activity_star.py"}  # fmt: skip
    return {"time": t, "rv": rv, "err": err, "instrument": inst, "truth": truth}


def write(out: Path, seed: int = SEED, **scales) -> list[Path]:
    """Write one file per spectrograph and truth.json into ``out``."""
    star = make(seed, **scales)
    out.mkdir(parents=True, exist_ok=True)
    files = []
    for i in INSTRUMENTS:
        m = star["instrument"] == i["name"]
        path = out / f"{i['name']}.txt"
        with path.open("w") as fh:
            fh.write(f"# invented star {STAR['name']}, spectrograph {i['name']}\n")
            fh.write("# time [BJD_TDB]  rv [m/s]  err [m/s]\n")
            for row in zip(star["time"][m], star["rv"][m], star["err"][m], strict=True):
                fh.write("{:.6f} {:.3f} {:.3f}\n".format(*row))
        files.append(path)
    (out / "truth.json").write_text(json.dumps(star["truth"], indent=2) + "\n")
    return files


if __name__ == "__main__":
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("out")
    ap.add_argument("--seed", type=int, default=SEED)
    ap.add_argument("--activity", type=float, default=1.0, help="activity scale (0: none)")
    ap.add_argument("--planet", type=float, default=1.0, help="planet scale (0: none)")
    args = ap.parse_args()
    for f in write(Path(args.out), args.seed, activity_scale=args.activity,
                   planet_scale=args.planet):  # fmt: skip
        print(f)
