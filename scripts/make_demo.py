"""Make the bundled demo star (invented): two companions, two instruments.

The star "Veyla" and the spectrographs "kestrel" and "osprey" are made up, and so is
every number below. The data are drawn with a fixed seed from the Keplerian model of
rvkep itself plus white noise (the quoted error and a jitter term added in quadrature),
with nightly sampling, seasonal gaps and weather losses. The truth is written beside
the data in ``demo_data/truth.json``.

Usage: python scripts/make_demo.py [OUTDIR]   (default: rvkep/demo_data/, shipped with the package)
"""

import json
import sys
from pathlib import Path

import numpy as np

from rvkep.orbit import radial_velocity, tp_to_tc

SEED = 20261202
STAR = {"name": "Veyla", "mass_msun": 0.92, "mass_err_msun": 0.04}
EPOCH0 = 2459400.0  # first night (BJD_TDB)
COMPANIONS = [
    {"label": "b", "period_d": 11.873, "K_mps": 18.4, "ecc": 0.12, "omega_deg": 63.0,
     "tp_bjd": 2459403.27},
    {"label": "c", "period_d": 143.2, "K_mps": 27.5, "ecc": 0.38, "omega_deg": 229.0,
     "tp_bjd": 2459461.9},
]  # fmt: skip
INSTRUMENTS = [
    {"name": "kestrel", "n_points": 90, "offset_mps": -12.3, "jitter_mps": 2.1,
     "err_mps": (1.1, 1.9), "file": "kestrel.txt"},
    {"name": "osprey", "n_points": 60, "offset_mps": 35.8, "jitter_mps": 4.5,
     "err_mps": (2.4, 3.8), "file": "osprey.csv"},
]  # fmt: skip
TREND_MPS_PER_YR = 0.0


def observing_nights(rng, n, span_days=820.0):
    """Nightly-cadence times with seasonal gaps (4 months a year unobservable)."""
    nights = np.arange(0.0, span_days)
    season = (nights % 365.25) < 245.0  # target observable 8 months a year
    nights = nights[season]
    chosen = np.sort(rng.choice(nights, size=n, replace=False))
    # observed near the same hour angle each night (one sidereal day, 0.99727 d, apart),
    # with +-1.5 h scatter
    return EPOCH0 + 0.99726957 * chosen + 0.1 + rng.uniform(-0.06, 0.06, n)


def model(t):
    v = np.zeros_like(t)
    for c in COMPANIONS:
        v += radial_velocity(
            t, c["period_d"], c["tp_bjd"], c["ecc"], np.radians(c["omega_deg"]), c["K_mps"]
        )
    return v


DEFAULT_OUT = Path(__file__).resolve().parents[1] / "rvkep" / "demo_data"


def main(outdir=DEFAULT_OUT):
    out = Path(outdir)
    out.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(SEED)
    for inst in INSTRUMENTS:
        t = observing_nights(rng, inst["n_points"])
        err = rng.uniform(*inst["err_mps"], t.size)
        noise = rng.normal(0.0, np.sqrt(err**2 + inst["jitter_mps"] ** 2))
        v = model(t) + inst["offset_mps"] + noise
        activity = rng.normal(0.0, 1.0, t.size)
        if inst["file"].endswith(".csv"):
            lines = ["time,velocity,sigma,bis"]
            lines += [
                f"{a:.6f},{b:.3f},{c:.3f},{d:.2f}"
                for a, b, c, d in zip(t, v, err, 12 + 3 * activity, strict=True)
            ]
        else:
            lines = [f"# {inst['name']} spectrograph, invented demo data (scripts/make_demo.py)",
                     "# bjd rv e_rv fwhm"]  # fmt: skip
            lines += [
                f"{a:.6f} {b:9.3f} {c:6.3f} {d:8.4f}"
                for a, b, c, d in zip(t, v, err, 7.1 + 0.01 * activity, strict=True)
            ]
        (out / inst["file"]).write_text("\n".join(lines) + "\n")
    truth = {
        "note": "invented demo star; data drawn by scripts/make_demo.py",
        "seed": SEED,
        "star": STAR,
        "companions": [
            dict(
                c,
                tc_bjd=float(
                    tp_to_tc(c["tp_bjd"], c["period_d"], c["ecc"], np.radians(c["omega_deg"]))
                ),
            )
            for c in COMPANIONS
        ],
        "instruments": [{k: v for k, v in i.items() if k != "err_mps"} for i in INSTRUMENTS],
        "trend_mps_per_yr": TREND_MPS_PER_YR,
    }
    (out / "truth.json").write_text(json.dumps(truth, indent=2) + "\n")
    print(f"wrote {', '.join(i['file'] for i in INSTRUMENTS)} and truth.json to {out}/")


if __name__ == "__main__":
    main(*sys.argv[1:])
