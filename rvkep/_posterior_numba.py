"""Compiled (numba) log posterior of a white-noise model and its gradient, one pass per
parameter set: sampled coordinates to elements, the packed prior table
(:class:`rvkep.priors.PriorTable`), and the likelihood of
:func:`rvkep._kepler_numba.white_noise_loglike` (its per-set body inlined).

Used by :mod:`rvkep.noise.white` for the sampler (many walkers at once) and the best fit
(the analytic gradient). Cached like every kernel module (:mod:`rvkep._kernel_cache`).
"""

import math

import numpy as np

from rvkep._constants import PI as _PI
from rvkep._constants import PRIOR_LOGUNIFORM as _LOGUNIFORM
from rvkep._constants import PRIOR_NORMAL as _NORMAL
from rvkep._constants import PRIOR_UNIFORM as _UNIFORM
from rvkep._constants import TWO_PI as _TWO_PI
from rvkep._kepler_numba import _BV, _IM, _IV, _M, _V, _sig, _white_row, markley
from rvkep._kernel_cache import jit

__all__ = ["white_noise_logpost", "white_noise_profile_grad"]

_E_CAP = 1.0 - 1e-12  # as rvkep.model: e >= 1 rows are refused; keep their tp finite


@jit(error_model="numpy", inline="always")
def _row_elements(theta, cols, fill, circular, steep, steep_k, jit_cols, jit_fill, kind, pa,
                  pb, pc, period_jac, epoch, vals, P, tp, e, om, K, Mc, jit, V, dV):  # fmt: skip
    """One parameter set's elements and log prior, shared by the compiled log posterior
    and the best fit's gradient: fills ``vals`` (n_comp, 5: the coordinates or fixed
    values of ln P, tc, the pair and K), ``P``, ``tp``, ``e``, ``om``, ``K``, ``Mc``
    (the mean anomaly at conjunction), ``jit``, ``V`` ([P | tc | e | K | jitter]) and
    ``dV`` (d ln prior / d V); returns (valid, ln prior with the Jacobians)."""
    nc = cols.shape[1]
    ni = jit_cols.size
    ok = True
    lp = 0.0
    for c in range(nc):
        for f in range(5):
            j = cols[f, c]
            vals[c, f] = theta[j] if j >= 0 else fill[f, c]
        h = vals[c, 2]
        k = vals[c, 3]
        ec = h * h + k * k
        Kc = vals[c, 4]
        if steep[c]:
            ec = -math.expm1(-ec)
            if steep_k[c]:
                Kc = Kc / math.sqrt(1.0 - ec * ec)
        if circular[c]:
            w = 0.5 * _PI
        else:
            w = math.atan2(k, h)
            if w < 0.0:
                w += _TWO_PI
        Pc = math.exp(vals[c, 0])
        ecap = min(ec, _E_CAP)
        x = 1.5 * _PI - w
        x = x - math.floor(x / _TWO_PI) * _TWO_PI
        half_nu = 0.5 * (x - _PI)
        E = 2.0 * math.atan2(math.sqrt(1.0 - ecap) * math.sin(half_nu),
                             math.sqrt(1.0 + ecap) * math.cos(half_nu))  # fmt: skip
        Mc[c] = E - ecap * math.sin(E)
        tp[c] = vals[c, 1] - Pc * Mc[c] / _TWO_PI
        P[c] = Pc
        e[c] = ec
        om[c] = w
        K[c] = Kc
        V[c] = Pc
        V[nc + c] = vals[c, 1] + epoch
        V[2 * nc + c] = ec
        V[3 * nc + c] = Kc
        if not (ec < 1.0) or not (Kc >= 0.0):
            ok = False
        if period_jac[c]:
            lp += math.log(Pc) if Pc > 0.0 else 0.0
    for q in range(ni):
        j = jit_cols[q]
        jq = theta[j] if j >= 0 else jit_fill[q]
        jit[q] = jq
        V[4 * nc + q] = jq
        if not (jq >= 0.0):
            ok = False
    for j in range(V.size):
        kd = kind[j]
        v = V[j]
        dV[j] = 0.0
        # the packed prior table's rows (rvkep.priors.PriorTable, PACKED_DENSITY)
        if kd == _UNIFORM:
            if not (v >= pa[j] and v <= pb[j]):
                ok = False
            lp += pc[j]
        elif kd == _LOGUNIFORM:
            if not (v >= pa[j] and v <= pb[j]):
                ok = False
            lp += pc[j] - math.log(v if v > 0.0 else 1.0)
            dV[j] = -1.0 / v if v > 0.0 else 0.0
        elif kd == _NORMAL:
            z = (v - pa[j]) / pb[j]
            lp += pc[j] - 0.5 * z * z
            dV[j] = -z / pb[j]
    if ok:
        for c in range(nc):
            if steep[c]:
                lp += math.log1p(-e[c])
                if steep_k[c]:
                    lp -= 0.5 * math.log1p(-(e[c] * e[c]))
    return ok, lp


@jit(error_model="numpy")
def white_noise_logpost(theta, cols, fill, circular, steep, steep_k, jit_cols, jit_fill,
                        kind, pa, pb, pc, period_jac, epoch, t, y, err2, inst, n_inst, X,
                        marginalize, include_prior, const):  # fmt: skip
    """The log posterior of a white-noise model in one compiled pass per parameter set:
    sampled coordinates -> elements (as ``SystemModel.orbit_arrays``) -> log prior (as
    ``SystemModel.log_prior`` for uniform, log-uniform and normal priors) -> the
    likelihood of :func:`white_noise_loglike`.

    ``cols`` (5, n_comp): the theta column of ln P, tc (minus the epoch), the two
    eccentricity coordinates and K, or -1 for the value in ``fill``; ``circular``,
    ``steep``, ``steep_k`` (n_comp,) as the model's flags; ``jit_cols``/``jit_fill``
    alike per instrument. The prior of value j of [P | tc | e | K | jitter] has
    ``kind[j]`` (the packed prior table's rows, :class:`rvkep.priors.PriorTable`: a
    :class:`rvkep.priors.PriorCode`, uniform or log-uniform on [pa, pb], normal with
    mean pa and sd pb) and log normalization ``pc[j]``; ``period_jac`` marks the
    sampled periods (Jacobian P). Invalid sets give -inf.

    Parameters
    ----------
    theta : ndarray, shape (S, ndim)
        Sampled coordinates, one row per parameter set.
    cols, fill : ndarray, shape (5, n_comp)
        Column of each orbital value in ``theta`` (-1: fixed) and the fixed values.
    circular, steep, steep_k : ndarray, shape (n_comp,)
        Per companion: e held at 0, sampled in steep coordinates, and their scale.
    jit_cols, jit_fill : ndarray, shape (n_inst,)
        Column of each jitter in ``theta`` (-1: fixed) and the fixed values.
    kind, pa, pb, pc : ndarray
        The packed prior table (kind code, two parameters, log normalization per value).
    period_jac : ndarray of bool
        Which periods are sampled as ln P (their Jacobian P enters the prior).
    epoch : float
        Reference epoch of the tc column (days).
    t, y, err2, inst, n_inst, X
        The data, as :func:`white_noise_loglike`.
    marginalize, include_prior : bool
        Marginal (else profile) likelihood over the linear part; add the log prior.
    const : float
        Constant added to every finite value.

    Returns
    -------
    ndarray, shape (S,)
        Log posterior (or likelihood) per set; -inf where a set is invalid.
    """
    S = theta.shape[0]
    nc = cols.shape[1]
    ni = jit_cols.size
    npts = t.size
    m = X.shape[1]
    out = np.empty(S)
    resid = np.empty(npts)
    w = np.empty(npts)
    A = np.zeros((m, m))
    b = np.zeros(m)
    L = np.zeros((m, m))
    vals = np.empty((nc, 5))
    P = np.empty(nc)
    tp = np.empty(nc)
    nn = np.empty(nc)
    e = np.empty(nc)
    om = np.empty(nc)
    cw = np.empty(nc)
    sw = np.empty(nc)
    K = np.empty(nc)
    Mc = np.empty(nc)
    jit = np.empty(ni)
    V = np.empty(4 * nc + ni)
    dV = np.empty(4 * nc + ni)
    for s in range(S):
        ok, lp = _row_elements(theta[s], cols, fill, circular, steep, steep_k, jit_cols,
                               jit_fill, kind, pa, pb, pc, period_jac, epoch, vals, P, tp, e,
                               om, K, Mc, jit, V, dV)  # fmt: skip
        if not ok or not math.isfinite(lp):
            out[s] = -np.inf
            continue
        for c in range(nc):
            nn[c] = _TWO_PI / P[c]
            cw[c] = math.cos(om[c])
            sw[c] = math.sin(om[c])
        ll0, ll1 = _white_row(t, y, err2, inst, n_inst, X, tp, nn, e, cw, sw, K, jit,
                              resid, w, A, b, L)  # fmt: skip
        value = ll0 + const
        if marginalize:
            value += ll1
        if include_prior:
            value += lp
        out[s] = value if math.isfinite(value) else -np.inf
    return out


@jit(error_model="numpy")
def white_noise_profile_grad(theta, cols, fill, circular, steep, steep_k, jit_cols, jit_fill,
                             kind, pa, pb, pc, period_jac, epoch, t, y, err2, inst, n_inst, X,
                             const):  # fmt: skip
    """The best fit's objective and its gradient: the log posterior with the linear
    part profiled out (offsets and trend at their best values) and its derivatives with
    respect to the sampled coordinates ``theta`` (ndim,), same tables as
    :func:`white_noise_logpost`. Returns (value, gradient); value -inf (gradient
    zeros) outside the prior.

    The derivatives: the profiled linear part drops out (its own derivative vanishes
    at the best values), so d ln L = sum_i w_i rho_i dv_i (rho the residual after the
    linear fit) plus, per instrument, sum (j w^2 rho^2 - j w) for its jitter j. Each
    Keplerian's dv through the mean anomaly (dnu/dM = (1 + e cos nu)^2 / (1-e^2)^1.5,
    dnu/de at fixed M = sin nu (2 + e cos nu) / (1 - e^2); Murray & Dermott 1999
    sec. 2.4-2.5) and the shift from conjunction to periastron time
    (tp = tc - P M_c(e, omega) / 2 pi, M_c the mean anomaly at nu = pi/2 - omega),
    then through the sampled coordinates (ln P; the sqrt(e) or stretched pair; K or
    K sqrt(1 - e^2)); the prior's own terms added likewise.

    Parameters
    ----------
    theta : ndarray, shape (ndim,)
        One point of the sampled coordinates.
    cols, fill, circular, steep, steep_k, jit_cols, jit_fill, kind, pa, pb, pc
        The layout and the packed prior table, as :func:`white_noise_logpost`.
    period_jac, epoch, t, y, err2, inst, n_inst, X, const
        As :func:`white_noise_logpost`.

    Returns
    -------
    value : float
        The profile log posterior.
    grad : ndarray, shape (ndim,)
        Its derivatives with respect to ``theta``.
    """
    ndim = theta.size
    nc = cols.shape[1]
    ni = jit_cols.size
    npts = t.size
    m = X.shape[1]
    grad = np.zeros(ndim)
    vals = np.empty((nc, 5))
    P = np.empty(nc)
    tp = np.empty(nc)
    e = np.empty(nc)
    om = np.empty(nc)
    K = np.empty(nc)
    Mc = np.empty(nc)
    jit = np.empty(ni)
    V = np.empty(4 * nc + ni)
    dV = np.empty(4 * nc + ni)
    ok, lp = _row_elements(theta, cols, fill, circular, steep, steep_k, jit_cols, jit_fill,
                           kind, pa, pb, pc, period_jac, epoch, vals, P, tp, e, om, K, Mc, jit,
                           V, dV)  # fmt: skip
    if not ok or not math.isfinite(lp):
        return -np.inf, grad
    # residuals, weights and the profiled linear part: _white_row leaves the residuals
    # in resid, the weights in w_, the Cholesky factor of A in L and z = L^-1 b in z
    resid = np.empty(npts)
    w_ = np.empty(npts)
    A = np.zeros((m, m))
    z = np.zeros(m)
    L = np.zeros((m, m))
    nn = np.empty(nc)
    cws = np.empty(nc)
    sws = np.empty(nc)
    for c in range(nc):
        nn[c] = _TWO_PI / P[c]
        cws[c] = math.cos(om[c])
        sws[c] = math.sin(om[c])
    ll0, _ = _white_row(t, y, err2, inst, n_inst, X, tp, nn, e, cws, sws, K, jit, resid, w_,
                        A, z, L)  # fmt: skip
    beta = np.empty(m)
    for a in range(m - 1, -1, -1):
        acc = z[a]
        for q in range(a + 1, m):
            acc -= L[q, a] * beta[q]
        beta[a] = acc / L[a, a]
    value = ll0 + const + lp
    if not math.isfinite(value):
        return -np.inf, grad
    # weighted residuals after the linear fit, and the jitters' derivatives
    wrho = np.empty(npts)
    for i in range(npts):
        k = inst[i]
        rho = resid[i] - beta[k]
        for a in range(n_inst, m):
            rho -= X[i, a] * beta[a]
        wrho[i] = w_[i] * rho
        j = jit_cols[k]
        if j >= 0:
            jj = jit[k]
            grad[j] += jj * wrho[i] * wrho[i] - jj * w_[i]
    for q in range(ni):
        j = jit_cols[q]
        if j >= 0:
            grad[j] += dV[4 * nc + q]
    # each companion: d ln post / d (P, tc, e, omega, K), then the coordinates
    for c in range(nc):
        ec = e[c]
        Pc, Kc, w = P[c], K[c], om[c]
        nc_ = _TWO_PI / Pc
        cw, sw = math.cos(w), math.sin(w)
        one_e2 = 1.0 - ec * ec
        root = math.sqrt(one_e2)
        # the shift to periastron: dM_c/d omega and dM_c/de at nu_c = pi/2 - omega
        dnudM_c = (1.0 + ec * sw) ** 2 / (one_e2 * root)
        dMc_dw = -1.0 / dnudM_c
        dMc_de = -(cw * (2.0 + ec * sw) / one_e2) / dnudM_c
        gP = gtc = ge = gw = gK = 0.0
        for i in range(npts):
            Mu = nc_ * (t[i] - tp[c])
            M = Mu - math.floor((Mu + _PI) / _TWO_PI) * _TWO_PI
            _, sE, cE = markley(M, ec)
            den = 1.0 - ec * cE
            cnu = (cE - ec) / den
            snu = root * sE / den
            S = snu * cw + cnu * sw
            shape = cnu * cw - snu * sw + ec * cw  # v / K
            dnudM = (1.0 + ec * cnu) ** 2 / (one_e2 * root)
            dvdM = -Kc * S * dnudM
            dv_de = Kc * (-S * snu * (2.0 + ec * cnu) / one_e2 + cw) + dvdM * dMc_de
            dv_dw = -Kc * (S + ec * sw) + dvdM * dMc_dw
            r = wrho[i]
            gP += r * dvdM * (Mc[c] - Mu) / Pc
            gtc += r * dvdM * (-nc_)
            ge += r * dv_de
            gw += r * dv_dw
            gK += r * shape
        gP += dV[c]
        gtc += dV[nc + c]
        ge += dV[2 * nc + c]
        gK += dV[3 * nc + c]
        j = cols[0, c]
        if j >= 0:
            grad[j] += gP * Pc + (1.0 if period_jac[c] else 0.0)
        j = cols[1, c]
        if j >= 0:
            grad[j] += gtc
        if not circular[c]:
            h = vals[c, 2]
            k = vals[c, 3]
            r2 = h * h + k * k
            if steep[c]:
                ge += -1.0 / (1.0 - ec)  # the stretched pair's Jacobian ln(1 - e)
                if steep_k[c]:
                    ge += gK * Kc * ec / one_e2  # K = K sqrt(1-e^2) / sqrt(1 - e^2)
                    ge += ec / one_e2  # and its Jacobian -ln sqrt(1 - e^2)
                de_dr2 = 1.0 - ec
            else:
                de_dr2 = 1.0
            if r2 > 0.0:
                grad[cols[2, c]] += ge * 2.0 * h * de_dr2 - gw * k / r2
                grad[cols[3, c]] += ge * 2.0 * k * de_dr2 + gw * h / r2
        j = cols[4, c]
        if j >= 0:
            grad[j] += gK / root if steep_k[c] else gK
    return value, grad


_PLAN = (_IM, _M, _BV, _BV, _BV, _IV, _V, _IV, _V, _V, _V, _BV, "float64",
         _V, _V, _V, _IV, "int64", _M)  # fmt: skip

#: kernel name -> the signatures rvkep calls it with
SIGNATURES = {
    "white_noise_logpost": [_sig(_M, *_PLAN, "boolean", "boolean", "float64")],
    "white_noise_profile_grad": [_sig(_V, *_PLAN, "float64")],
}
