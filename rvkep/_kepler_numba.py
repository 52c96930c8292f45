"""Compiled (numba) kernels of :mod:`rvkep.kepler`: plain loops, no library calls.

Same algorithm as the numpy path (Markley 1995), but three library calls are replaced
by arithmetic that the compiler can pipeline and vectorize: sin/cos of the starter (E1
lies in [0, pi], so a fixed polynomial about pi/2 needs no range reduction) and the
cube root (a bit-level first guess in single precision, refined by two Halley steps to
1e-13, far below what the starter needs; the argument is never below 1e-21 for any
double e < 1, well inside single precision). Branches are written as selects and
numba's division checks are off (``error_model="numpy"``), so the loops vectorize.

The functions are defined at module level so that numba's on-disk cache finds them.
The cache lives in a user folder (:mod:`rvkep._kernel_cache`), never in the package;
when no folder is writable, the kernels compile in each process instead of failing.
"""

import math

import numpy as np
from llvmlite import ir
from numba import types
from numba.extending import intrinsic

from rvkep._constants import ALPHA_A as _ALPHA_A
from rvkep._constants import ALPHA_B as _ALPHA_B
from rvkep._constants import PI as _PI
from rvkep._constants import PRIOR_LOGUNIFORM as _LOGUNIFORM
from rvkep._constants import PRIOR_NORMAL as _NORMAL
from rvkep._constants import PRIOR_UNIFORM as _UNIFORM
from rvkep._constants import SMALL_E as _SMALL_E
from rvkep._constants import TWO_PI as _TWO_PI
from rvkep._kernel_cache import cache_folder, jit

__all__ = [
    "ecc_anom_flat",
    "rv_flat",
    "rv_rows",
    "white_noise_loglike",
    "white_noise_logpost",
]

# Taylor coefficients of sin and cos; on |x| <= pi/2 the first omitted terms are below
# 2e-18, so these reproduce libm to rounding (tested against numpy).
_SIN_C = tuple((-1) ** k / math.factorial(2 * k + 1) for k in range(11))
_COS_C = tuple((-1) ** k / math.factorial(2 * k) for k in range(12))
_HALF_PI = 0.5 * math.pi
# first guess of a single-precision cube root from its bits: exponent divided by three
_CBRT_BIAS32 = 709921077


#: The kernels are compiled once and cached in a user folder (see rvkep._kernel_cache),
#: never in the package's own folder.
KERNELS_FOLDER = cache_folder()


@intrinsic
def _as_int(typingctx, x):
    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], ir.IntType(32))

    return types.int32(types.float32), codegen


@intrinsic
def _as_float(typingctx, x):
    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], ir.FloatType())

    return types.float32(types.int32), codegen


s0, s1, s2, s3, s4, s5, s6, s7, s8, s9, s10 = _SIN_C
c0, c1, c2, c3, c4, c5, c6, c7, c8, c9, c10, c11 = _COS_C


# fmt: off
@jit(inline="always", error_model="numpy")
def sincos_0_pi(E):
    """(sin E, cos E) for 0 <= E <= pi, from Taylor series about pi/2 (Horner form)."""
    x = E - _HALF_PI
    z = x * x
    sx = x * (s0 + z * (s1 + z * (s2 + z * (s3 + z * (s4 + z * (s5 + z * (s6 + z * (
        s7 + z * (s8 + z * (s9 + z * s10))))))))))
    cx = c0 + z * (c1 + z * (c2 + z * (c3 + z * (c4 + z * (c5 + z * (c6 + z * (
        c7 + z * (c8 + z * (c9 + z * (c10 + z * c11))))))))))
    return cx, -sx
# fmt: on


@jit(inline="always", error_model="numpy")
def two_thirds_power(x):
    bits = _as_int(np.float32(x))
    y = np.float64(_as_float(np.int32(bits // np.int32(3) + np.int32(_CBRT_BIAS32))))
    y3 = y * y * y
    y = y * (y3 + 2.0 * x) / (2.0 * y3 + x)
    y3 = y * y * y
    y = y * (y3 + 2.0 * x) / (2.0 * y3 + x)
    return y * y


@jit(inline="always", error_model="numpy")
def markley(M, e):
    m = abs(M)
    sign = math.copysign(1.0, M)
    alpha = _ALPHA_A + _ALPHA_B * (_PI - m) / (1.0 + e)
    d = 3.0 * (1.0 - e) + alpha * e
    q = 2.0 * alpha * d * (1.0 - e) - m * m
    r = 3.0 * alpha * d * (d - 1.0 + e) * m + m * m * m
    w = two_thirds_power(abs(r) + math.sqrt(q * q * q + r * r))
    E1 = (2.0 * r * w / (w * w + w * q + q * q) + m) / d
    s1, c1 = sincos_0_pi(E1)
    x2 = E1 * E1
    series = (
        E1
        * x2
        * (
            1.0 / 6.0
            - x2 * (1.0 / 120.0 - x2 * (1.0 / 5040.0 - x2 * (1.0 / 362880.0 - x2 / 39916800.0)))
        )
    )
    f0_small = (1.0 - e) * E1 + e * series - m
    f0_large = E1 - e * s1 - m
    f0 = f0_small if E1 < _SMALL_E else f0_large
    f1 = 1.0 - e * c1
    f2 = e * s1
    f3 = 1.0 - f1
    d3 = -f0 / (f1 - 0.5 * f0 * f2 / f1)
    d4 = -f0 / (f1 + 0.5 * d3 * f2 + d3 * d3 * f3 / 6.0)
    dE = -f0 / (f1 + 0.5 * d4 * f2 + d4 * d4 * f3 / 6.0 - d4 * d4 * d4 * f2 / 24.0)
    d2 = dE * dE
    cd = 1.0 - d2 * (0.5 - d2 / 24.0)
    sd = dE * (1.0 - d2 * (1.0 / 6.0 - d2 / 120.0))
    return sign * (E1 + dE), sign * (s1 * cd + c1 * sd), c1 * cd - s1 * sd


@jit(inline="always", error_model="numpy")
def rv_point(t, tp, n, e, cosw, sinw, K, root):
    M = n * (t - tp)
    M = M - math.floor((M + _PI) / _TWO_PI) * _TWO_PI
    _, sE, cE = markley(M, e)
    den = 1.0 - e * cE
    return K * ((cE - e) * cosw - root * sE * sinw) / den + K * e * cosw


@jit(error_model="numpy")
def ecc_anom_flat(M, e, out):
    for i in range(M.size):
        k = math.floor((M[i] + _PI) / _TWO_PI)
        out[i] = markley(M[i] - k * _TWO_PI, e[i])[0] + k * _TWO_PI


@jit(error_model="numpy")
def rv_flat(t, tp, n, e, cosw, sinw, K, out):
    for i in range(t.size):
        out[i] = rv_point(
            t[i], tp[i], n[i], e[i], cosw[i], sinw[i], K[i], math.sqrt(1.0 - e[i] * e[i])
        )


@jit(error_model="numpy")
def rv_rows(t, tp, n, e, cosw, sinw, K, out):
    for j in range(tp.size):
        root = math.sqrt(1.0 - e[j] * e[j])
        tpj, nj, ej, cj, sj, Kj = tp[j], n[j], e[j], cosw[j], sinw[j], K[j]
        for i in range(t.size):
            out[j, i] = rv_point(t[i], tpj, nj, ej, cj, sj, Kj, root)


@jit(error_model="numpy")
def white_noise_loglike(t, y, err2, inst, n_inst, X, tp, n, e, cosw, sinw, K, jit):
    """Marginal and profile Gaussian log-likelihoods for many parameter sets at once.

    One pass per set: the Keplerian sum, residuals, weights 1 / (err^2 + jitter^2), the
    normal equations A = X^T W X, b = X^T W r of the linear part, then a Cholesky solve
    of the small m x m system. Shapes: companions' parameters (S, n_comp), ``jit``
    (S, n_inst), ``X`` (n, m) with the instrument indicator columns first (``inst``
    gives each point's column, so only the trend columns are read from ``X``).
    Returns (S, 2): columns are -1/2 (r^T W r - b^T A^-1 b) + 1/2 sum ln w, and
    -1/2 ln|A|.
    The sum of ln w is taken as the log of products of 16 weights, one log call per 16
    points.
    """
    S, n_comp = tp.shape
    npts = t.size
    m = X.shape[1]
    out = np.empty((S, 2))
    resid = np.empty(npts)
    w = np.empty(npts)
    A = np.zeros((m, m))
    b = np.zeros(m)
    L = np.zeros((m, m))
    for s in range(S):
        out[s, 0], out[s, 1] = _white_row(
            t, y, err2, inst, n_inst, X, tp[s], n[s], e[s], cosw[s], sinw[s], K[s], jit[s],
            resid, w, A, b, L,
        )  # fmt: skip
    return out


@jit(error_model="numpy", inline="always")
def _white_row(t, y, err2, inst, n_inst, X, tp, n, e, cosw, sinw, K, jit, resid, w, A, b, L):
    """One parameter set of :func:`white_noise_loglike` (companions' parameters (n_comp,),
    ``jit`` (n_inst,)), in the scratch arrays given; returns its two columns."""
    npts = t.size
    m = X.shape[1]
    for i in range(npts):
        resid[i] = y[i]
    for c in range(tp.size):
        ec = e[c]
        root = math.sqrt(1.0 - ec * ec)
        tpc, nc, cc, sc, Kc = tp[c], n[c], cosw[c], sinw[c], K[c]
        for i in range(npts):
            resid[i] -= rv_point(t[i], tpc, nc, ec, cc, sc, Kc, root)
    for a in range(m):
        b[a] = 0.0
        for c2 in range(m):
            A[a, c2] = 0.0
    chi2 = 0.0
    for i in range(npts):
        k = inst[i]
        jj = jit[k]
        wi = 1.0 / (err2[i] + jj * jj)
        w[i] = wi
        wr = wi * resid[i]
        chi2 += wr * resid[i]
        b[k] += wr
        A[k, k] += wi
        for a in range(n_inst, m):  # trend columns
            xa = X[i, a]
            b[a] += wr * xa
            A[a, k] += wi * xa
            for c2 in range(n_inst, a + 1):
                A[a, c2] += wi * xa * X[i, c2]
    logw = 0.0
    i = 0
    while i < npts:
        prod = 1.0
        stop = min(i + 16, npts)
        for q in range(i, stop):
            prod *= w[q]
        logw += math.log(prod)
        i = stop
    # Cholesky A = L L^T (lower), then z = L^-1 b: b^T A^-1 b = z^T z
    logdet = 0.0
    red = 0.0
    for a in range(m):
        for c2 in range(a + 1):
            acc = A[a, c2]
            for q in range(c2):
                acc -= L[a, q] * L[c2, q]
            if a == c2:
                L[a, a] = math.sqrt(acc)
            else:
                L[a, c2] = acc / L[c2, c2]
        logdet += 2.0 * math.log(L[a, a])
    for a in range(m):
        acc = b[a]
        for q in range(a):
            acc -= L[a, q] * b[q]
        b[a] = acc / L[a, a]  # b now holds z
        red += b[a] * b[a]
    return -0.5 * (chi2 - red) + 0.5 * logw, -0.5 * logdet


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


# ---------------------------------------------------------------------------
# the argument types each kernel is called with, so that a first run can compile them
# all at once, in parallel and with progress (rvkep._kernel_cache.prepare); a test
# checks that a fit calls no other
# ---------------------------------------------------------------------------
_V, _M, _C = "float64[::1]", "float64[:, ::1]", "float64[:, :, ::1]"
_IV, _IM, _BV = "int64[::1]", "int64[:, ::1]", "boolean[::1]"


def _sig(*types: str) -> str:
    return "(" + ", ".join(types) + ")"


_PLAN = (_IM, _M, _BV, _BV, _BV, _IV, _V, _IV, _V, _V, _V, _BV, "float64",
         _V, _V, _V, _IV, "int64", _M)  # fmt: skip

#: kernel name -> the signatures rvkep calls it with
SIGNATURES = {
    "ecc_anom_flat": [_sig(_V, _V, _V)],
    "rv_flat": [_sig(*[_V] * 8)],
    "rv_rows": [_sig(*[_V] * 7, _M)],
    "white_noise_loglike": [_sig(_V, _V, _V, _IV, "int64", _M, *[_M] * 7)],
    "white_noise_logpost": [_sig(_M, *_PLAN, "boolean", "boolean", "float64")],
    "white_noise_profile_grad": [_sig(_V, *_PLAN, "float64")],
}
