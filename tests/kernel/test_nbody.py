"""The N-body star velocity (rvkep.nbody) against an independent integration of
Newton's equations (scipy's solve_ivp, DOP853), the Keplerian limit, and the
conservation laws; the analytic stability criteria (rvkep.stability) against their
published limits and verdicts."""

from __future__ import annotations

import math

import numpy as np
import pytest

rebound = pytest.importorskip("rebound")

from stars import newton_star_velocity  # noqa: E402

from rvkep import nbody, stability  # noqa: E402
from rvkep.orbit import radial_velocity  # noqa: E402

# an invented 2:1 resonant pair around an M dwarf of 0.37 solar masses
PAIR = dict(P=np.array([30.1, 61.1]), tp=np.array([4.0, -12.0]), e=np.array([0.25, 0.03]),
            w=np.array([1.1, 2.9]), K=np.array([88.0, 214.0]))  # fmt: skip
TEN_YEARS = np.linspace(-1826.0, 1826.0, 121)


def test_resonant_pair_matches_an_independent_integration_of_newtons_equations():
    # reference: scipy.integrate.solve_ivp (DOP853) on Newton's equations, initial
    # state from the textbook two-body formulas and Jacobi coordinates written above
    inc = math.radians(60.0)
    ref = newton_star_velocity(TEN_YEARS, PAIR["P"], PAIR["tp"], PAIR["e"], PAIR["w"],
                                PAIR["K"], 0.37, inc)  # fmt: skip
    got = nbody.star_velocity(TEN_YEARS, PAIR["P"], PAIR["tp"], PAIR["e"], PAIR["w"],
                              PAIR["K"], 0.37, inc)  # fmt: skip
    # WHFast at P_min/20 (the default here): 0.03 m/s measured, far below any
    # spectrograph's noise; IAS15: 2e-6 m/s measured
    assert np.max(np.abs(got - ref)) < 0.05  # m/s, over ten years
    exact = nbody.star_velocity(TEN_YEARS, PAIR["P"], PAIR["tp"], PAIR["e"], PAIR["w"],
                                PAIR["K"], 0.37, inc, integrator="ias15")  # fmt: skip
    assert np.max(np.abs(exact - ref)) < 1e-4
    kepler = sum(radial_velocity(TEN_YEARS, PAIR["P"][j], PAIR["tp"][j], PAIR["e"][j],
                                 PAIR["w"][j], PAIR["K"][j]) for j in range(2))  # fmt: skip
    assert np.max(np.abs(got - kepler)) > 20.0  # the interaction is large: not a no-op


def test_whfast_and_ias15_agree_and_crossing_or_eccentric_orbits_get_ias15():
    # two integrators of one library against each other (common practice, no source):
    # the heavy resonant pair (not Hill stable) gets WHFast at P/20, within 0.05 m/s of
    # IAS15 over ten years, far below any spectrograph's noise
    args = (TEN_YEARS, PAIR["P"], PAIR["tp"], PAIR["e"], PAIR["w"], PAIR["K"], 0.37)
    m = nbody.companion_masses(PAIR["P"], PAIR["K"], PAIR["e"], 0.37)
    assert nbody.integrator_for(PAIR["P"], PAIR["e"], m, 0.37) == "whfast"
    a = nbody.star_velocity(*args, integrator="whfast")
    b = nbody.star_velocity(*args, integrator="ias15")
    assert np.max(np.abs(a - b)) < 0.05
    # an eccentric orbit, or orbits that cross: IAS15
    assert nbody.integrator_for([3.0, 300.0], [0.6, 0.1], [1e-6, 1e-6], 1.0) == "ias15"
    assert nbody.integrator_for([30.0, 45.0], [0.3, 0.2], [1e-4, 1e-4], 1.0) == "ias15"


def test_keplerian_limit_two_earths_far_apart_is_the_sum_of_keplerians():
    # two Earth-mass planets at 12 d and 900 d (K 0.6 and 0.09 m/s around a Sun):
    # the integration equals the two-body solution (Kepler's equation) to 0.01 m/s
    P, tp, e, w = np.array([12.0, 900.0]), np.array([2.0, -300.0]), np.array([0.1, 0.3]), \
        np.array([0.4, 5.0])  # fmt: skip
    K = np.array([0.6, 0.09])
    t = np.linspace(-1826.0, 1826.0, 400)
    got = nbody.star_velocity(t, P, tp, e, w, K, 1.0)
    ref = sum(radial_velocity(t, P[j], tp[j], e[j], w[j], K[j]) for j in range(2))
    assert np.max(np.abs(got - ref)) < 0.01


def test_energy_and_angular_momentum_are_conserved_over_ten_years():
    # common practice, no source: a symplectic integration keeps the energy to a small
    # bounded error (3e-7 measured here) and the angular momentum to rounding
    sim = nbody.simulation(PAIR["P"], PAIR["tp"], PAIR["e"], PAIR["w"], PAIR["K"], 0.37)
    E0, L0 = sim.energy(), np.array(sim.angular_momentum())
    for t in np.linspace(0, 3652.5, 50):
        sim.integrate(t)
    E1, L1 = sim.energy(), np.array(sim.angular_momentum())
    assert abs((E1 - E0) / E0) < 1e-6
    assert np.max(np.abs(L1 - L0)) / np.linalg.norm(L0) < 1e-10


def test_masses_from_the_mass_function_and_the_missing_library_message(monkeypatch):
    # 51 Peg b: P = 4.2293 d, K = 59 m/s, 1 solar mass -> 0.47 M_Jup (Mayor & Queloz
    # 1995, Nature 378, 355; from memory); 1 M_Jup = 9.5479e-4 M_sun (IAU 2015)
    m = nbody.companion_masses([4.2293], [59.0], [0.0], 1.0)[0]
    assert m / 9.5479e-4 == pytest.approx(0.47, abs=0.005)
    # at i = 30 degrees the true mass is about twice m sin i
    m30 = nbody.companion_masses([4.2293], [59.0], [0.0], 1.0, sin_i=0.5)[0]
    assert m30 / m == pytest.approx(2.0, rel=1e-3)
    import builtins

    real = builtins.__import__

    def no_rebound(name, *a, **k):
        if name == "rebound":
            raise ImportError(name)
        return real(name, *a, **k)

    monkeypatch.setattr(builtins, "__import__", no_rebound)
    from rvkep.errors import OptionError

    with pytest.raises(OptionError, match=r'pip install "rvkep\[dynamics\]"'):
        nbody.require_rebound()


# -- analytic stability ----------------------------------------------------------------

M_JUP, M_SAT = 9.5479e-4, 2.8588e-4  # solar masses (IAU 2015 nominal values)


def test_gladman_circular_limit_is_two_root_three_mutual_hill_radii():
    # Gladman (1993, Icarus 106, 247): two planets on circular orbits are Hill stable
    # when their separation exceeds 2 sqrt(3) = 3.46 mutual Hill radii (for small masses)
    m = 1e-6
    a1 = 1.0
    rh = (2 * m / 3.0) ** (1 / 3)  # mutual Hill radius over the mean a, to first order
    for factor, stable in ((1.01, True), (0.99, False)):
        # solve a2 for (a2 - a1) / (rh (a1 + a2) / 2) = factor * 2 sqrt(3)
        k = factor * 2 * math.sqrt(3) * rh / 2
        a2 = a1 * (1 + k) / (1 - k)
        assert stability.hill_stable_pair(a1, a2, 0.0, 0.0, m, m, 1.0) is stable


def test_jupiter_and_saturn_are_hill_and_amd_stable_crossing_orbits_are_not():
    # Jupiter-Saturn (a 5.20 and 9.58 au, e 0.048 and 0.054): Hill stable (Gladman
    # 1993) and AMD stable (Laskar & Petit 2017, A&A 605, A72, their table for the
    # outer Solar System); values from memory
    assert stability.hill_stable_pair(5.2026, 9.5549, 0.0489, 0.0565, M_JUP, M_SAT, 1.0)
    beta = stability.amd_beta([[5.2026, 9.5549]], [[0.0489, 0.0565]], [[M_JUP, M_SAT]])
    assert beta[0, 0] < 1.0
    # orbits that cross (a 1.0 and 1.3 au, e 0.4 and 0.1): neither
    assert not stability.hill_stable_pair(1.0, 1.3, 0.4, 0.1, M_JUP, M_SAT, 1.0)
    assert stability.amd_beta([[1.0, 1.3]], [[0.4, 0.1]], [[M_JUP, M_SAT]])[0, 0] > 1.0


def test_critical_amd_is_the_least_amd_of_a_crossing_by_direct_minimization():
    # Laskar & Petit (2017) define C_c as the least AMD on the collision line
    # a1 (1 + e1) = a2 (1 - e2); scipy's bounded minimizer finds it directly
    from scipy.optimize import minimize_scalar

    for alpha, gamma in ((0.5, 1.0), (0.8, 0.1), (0.63, 3.0), (0.95, 0.5)):

        def amd(e1, alpha=alpha, gamma=gamma):
            e2 = 1 - alpha - alpha * e1
            return gamma * math.sqrt(alpha) * (1 - math.sqrt(1 - e1 * e1)) + 1 - math.sqrt(
                1 - e2 * e2)  # fmt: skip

        best = minimize_scalar(amd, bounds=(0.0, (1 - alpha) / alpha * 0.999999),
                               method="bounded", options={"xatol": 1e-12})  # fmt: skip
        assert float(stability.critical_amd(alpha, gamma)) == pytest.approx(best.fun, rel=1e-6)


def test_stability_summary_counts_draws():
    rng = np.random.default_rng(3)
    n = 200
    draws = {"b.a": np.full(n, 1.0), "c.a": rng.uniform(1.05, 2.0, n), "b.ecc": np.zeros(n),
             "c.ecc": np.zeros(n), "b.mass": np.full(n, 1e-3), "c.mass": np.full(n, 1e-3),
             "star_mass": np.ones(n)}  # fmt: skip
    median = {k: float(np.median(v)) for k, v in draws.items()}
    out = stability.stability_summary(draws, ["b", "c"], median)
    margins = stability.hill_margin(1.0, draws["c.a"], 0, 0, 1e-3, 1e-3, 1.0)
    assert out["hill_stable_fraction"] == pytest.approx(np.mean(margins > 0))
    assert 0.0 < out["hill_stable_fraction"] < 1.0
    assert out["pairs"][0]["inner"] == "b" and out["median_hill_stable"]


# -- the N-body model in the system model, the model file and the likelihood ------------


def _pair_model(**kw):
    from stars import interacting_pair

    from rvkep.model import SystemModel, default_companion
    from rvkep.physics import StarProperties

    data, truth = interacting_pair(n=30, span=600.0)
    rows = zip("bc", truth["P"], truth["K"], truth["e"], strict=True)
    comps = [default_companion(data, L, P, truth["epoch"] + 3.0, K, ecc=e) for L, P, K, e in rows]
    return SystemModel(data, comps, star=StarProperties(0.37), **kw), data


def test_nbody_model_keys_checkpoints_round_trips_and_scores_rows():
    # the layout itself (common practice, no source): one more sampled coordinate, a
    # different checkpoint key, model.json round trip, and a finite log posterior
    from rvkep.likelihood import LogPosterior
    from rvkep.model import SystemModel

    kep, data = _pair_model()
    nb, _ = _pair_model(dynamics="nbody")
    assert nb.ndim == kep.ndim + 1 and nb.names[-1] == "dynamics.cos_inc"
    assert nb.canonical() != kep.canonical() and "dynamics" not in kep.canonical()
    again = SystemModel.from_dict(nb.to_dict(), data, nb.star)
    assert again.canonical() == nb.canonical()
    theta = np.repeat(nb.start_theta()[None, :], 3, axis=0)
    theta[1, -1] = 0.5
    theta[2, -1] = 1.5  # outside the prior: -inf, no integration
    values = LogPosterior(nb)(theta)
    assert np.isfinite(values[:2]).all() and values[2] == -np.inf
    assert values[0] != values[1]  # the inclination changes the interactions
    with pytest.raises(ValueError, match="star's mass"):
        SystemModel(data, [], dynamics="nbody")


def test_model_file_dynamics_table_is_read_and_checked(tmp_path):
    # the model file's [dynamics] table (common practice, no source)
    from rvkep.errors import ModelFileError
    from rvkep.modelfile import parse_model

    doc = {"dynamics": {"kind": "nbody", "cos_inc": {"start": 0.4, "prior": "uniform",
                                                      "min": 0.0, "max": 0.9}}}  # fmt: skip
    spec = parse_model(doc, "m.toml")
    (par,) = spec.dynamics_parameters_for("nbody")
    assert spec.dynamics == "nbody" and par.start == 0.4 and par.prior.bounds == (0.0, 0.9)
    with pytest.raises(ModelFileError, match=r"dynamics\.cos_inc.*outside"):
        parse_model({"dynamics": {"kind": "nbody", "cos_inc": {"prior": "uniform", "min": 0,
                                                               "max": 2}}}, "m.toml")  # fmt: skip
    with pytest.raises(ModelFileError, match="dynamics.kind"):
        parse_model({"dynamics": {"kind": "relativistic"}}, "m.toml")


def test_predictions_of_an_nbody_run_integrate_each_draw():
    # the prediction's total is the integration of each draw (rvkep.nbody, itself
    # checked against solve_ivp above), not the Keplerian sum of the osculating orbits
    from rvkep.prediction import predict

    epoch = 2459500.0
    cols = {"dynamics.cos_inc": np.array([0.1, 0.6]), "star.mass_msun": np.array([0.37, 0.4])}
    for j, L in enumerate("bc"):
        cols[f"{L}.period"] = np.array([PAIR["P"][j]] * 2)
        cols[f"{L}.K"] = np.array([PAIR["K"][j]] * 2)
        cols[f"{L}.ecc"] = np.array([PAIR["e"][j]] * 2)
        cols[f"{L}.omega_deg"] = np.degrees([PAIR["w"][j]] * 2)
        cols[f"{L}.tp"] = epoch + np.array([PAIR["tp"][j]] * 2)
    t = epoch + np.array([-800.0, 0.0, 2000.0])
    pred = predict(cols, ["b", "c"], t, epoch=epoch)
    for r, (cos_i, mass) in enumerate(zip(cols["dynamics.cos_inc"], cols["star.mass_msun"],
                                          strict=True)):  # fmt: skip
        want = nbody.star_velocity(t - epoch, PAIR["P"], PAIR["tp"], PAIR["e"], PAIR["w"],
                                   PAIR["K"], mass, math.acos(cos_i))  # fmt: skip
        np.testing.assert_allclose(pred.curves["total"][r], want, rtol=0, atol=1e-9)
    kepler = pred.curves["b"] + pred.curves["c"]
    assert np.max(np.abs(pred.curves["total"] - kepler)) > 10.0


def test_ctrl_c_still_works_after_rebound_integrations():
    # REBOUND 5.2.2 leaves its own SIGINT handler installed after integrate(), which
    # swallowed every later Ctrl-C (measured); rvkep.nbody puts Python's back
    import os
    import signal
    import time

    arr = {k: np.tile(v, (3, 1)) for k, v in (("period", PAIR["P"]), ("tp_rel", PAIR["tp"]),
                                              ("ecc", PAIR["e"]), ("omega", PAIR["w"]),
                                              ("K", PAIR["K"]))}  # fmt: skip
    nbody.star_velocity_rows(TEN_YEARS[:20], arr, 0.37, np.full(3, 1.0))
    nbody.star_velocity(TEN_YEARS[:20], PAIR["P"], PAIR["tp"], PAIR["e"], PAIR["w"],
                        PAIR["K"], 0.37)  # fmt: skip
    assert signal.getsignal(signal.SIGINT) is signal.default_int_handler
    with pytest.raises(KeyboardInterrupt):
        os.kill(os.getpid(), signal.SIGINT)
        time.sleep(1.0)


def test_mutually_inclined_pair_matches_newtons_equations_and_differs_from_coplanar():
    # reference: solve_ivp on Newton's equations (tests/stars.py), each planet with its
    # own inclination and node (rotations Rz(node) Rx(i) Rz(omega), Murray & Dermott
    # 1999, sec. 2.8); the mutual inclination by spherical trigonometry
    inc = np.radians([60.0, 75.0])
    node = np.array([0.0, 0.7])
    args = (TEN_YEARS, PAIR["P"], PAIR["tp"], PAIR["e"], PAIR["w"], PAIR["K"], 0.37)
    ref = newton_star_velocity(*args, inc, node)
    got = nbody.star_velocity(*args, inc, node=node)
    assert np.max(np.abs(got - ref)) < 0.05
    flat = nbody.star_velocity(*args, inc[0])
    assert np.max(np.abs(got - flat)) > 5.0
    # the angle between the orbit normals Rz(node) Rx(i) z = (sin i sin node,
    # -sin i cos node, cos i), by the dot product
    normals = np.column_stack([np.sin(inc) * np.sin(node), -np.sin(inc) * np.cos(node),
                               np.cos(inc)])  # fmt: skip
    phi = nbody.mutual_inclination(inc[0], node[0], inc[1], node[1])
    assert float(phi) == pytest.approx(math.acos(normals[0] @ normals[1]), abs=1e-12)
    # equal inclinations and nodes: the coplanar model
    same = nbody.star_velocity(*args, np.array([inc[0], inc[0]]), node=np.array([0.3, 0.3]))
    np.testing.assert_allclose(same, flat, atol=1e-6)
