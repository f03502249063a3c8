r"""Coherent response of a thin-film stack by the characteristic-matrix method.

Conventions
-----------
- Complex index N = n + ik with k >= 0; time dependence exp(−iωt).
- Wavelength λ in nm (vacuum); thickness d in nm; angle θ0 in degrees in the incident medium
  (radians only inside).
- Layers are given in *deposition order*: ``n_layers[..., 0, :]`` touches the exit medium
  (the substrate); light arrives from the incident medium on the side of the last layer.
- Tilted admittances, in units of the free-space admittance: η_s = N cosθ, η_p = N / cosθ, so
  that r_p = r_s at normal incidence. N cosθ = sqrt(N² − n0² sin²θ0) is taken on the branch with
  Im ≥ 0 (a wave that decays or carries power away from the interface), which is right beyond the
  critical angle and in metals.
- ``r`` is the ratio of the reflected to the incident *tangential* electric field (for s this is
  the field itself; for p it follows the tilted-admittance sign convention above). ``t`` is the
  ratio of the full electric-field amplitudes, transmitted to incident.
- R = |r|²; T is the normal component of the Poynting vector carried into the exit medium over
  that of the incident wave: T = Re(η_exit) |E_exit,tan|² / (η0 |E_inc,tan|²), valid for an
  absorbing exit medium too; A = 1 − R − T is what the layers absorb.

With exp(−iωt) and Im δ >= 0 the characteristic matrix carries −i off the diagonal (the
complex conjugate of the matrix written for exp(+iωt) and N = n − ik).

Symbols
-------
====================  ===========================  =====================================
symbol                variable                     meaning
====================  ===========================  =====================================
δ_j = k_z,j d_j        ``delta``                    phase thickness of layer j (rad)
k_z,j = 2π N_j cosθ_j/λ ``kz``                      normal wavenumber (rad/nm)
η_j                    ``eta``                      tilted admittance
[B, C]                 ``v``                        tangential (E, H) at an interface, E = 1
                                                    and H = η_exit at the exit side
====================  ===========================  =====================================

.. math::

    \begin{bmatrix}B\\C\end{bmatrix} = \prod_{j=L-1}^{0}
    \begin{bmatrix}\cos δ_j & −i \sin δ_j/η_j\\ −i η_j \sin δ_j & \cos δ_j\end{bmatrix}
    \begin{bmatrix}1\\η_{exit}\end{bmatrix},\qquad
    r = \frac{η_0 B − C}{η_0 B + C},\qquad
    T = \frac{4 η_0 \,\mathrm{Re}(η_{exit})}{|η_0 B + C|^2}

Numerical stability: each layer's matrix is scaled by exp(−|Im δ|) (a 10 µm metal layer or an
evanescent gap does not overflow) and [B, C] is renormalised every few layers; the scale is
carried as a logarithm. When every layer is lossless and propagating in a chunk of points, a
real-arithmetic path is used (cos δ, sin δ and η are real).

References: H. A. Macleod, *Thin-Film Optical Filters*, 4th ed. (CRC Press, 2010), ch. 2;
M. Born & E. Wolf, *Principles of Optics*, 7th ed. (Cambridge, 1999), §1.6.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._grid import Problem, check_polarization, chunk_terms, prepare, run_chunks

__all__ = ["CoherentResponse", "CoherentDerivatives", "StackVectors", "coherent_response",
           "coherent_derivatives", "stack_vectors"]

_RENORM_EVERY = 16


@dataclass
class CoherentResponse:
    """Result of :func:`coherent_response`; arrays shaped (..., A, W).

    ``r``, ``t`` are complex amplitudes (None for ``polarization='mean'``); ``R``, ``T``, ``A``
    are power fractions.
    """

    R: np.ndarray
    T: np.ndarray
    A: np.ndarray
    r: np.ndarray | None
    t: np.ndarray | None
    polarization: str


@dataclass
class CoherentDerivatives(CoherentResponse):
    """Result of :func:`coherent_derivatives`.

    Besides the response, derivatives with respect to every layer thickness (per nm), shaped
    (..., L, A, W): ``dR``, ``dT``, ``dA`` and, for 's' or 'p', ``dr``, ``dt`` (complex) and
    ``phase_r`` (..., A, W), ``dphase_r`` (rad/nm; the phase of r is arg r).
    """

    dR: np.ndarray = None
    dT: np.ndarray = None
    dA: np.ndarray = None
    dr: np.ndarray | None = None
    dt: np.ndarray | None = None
    phase_r: np.ndarray | None = None
    dphase_r: np.ndarray | None = None


@dataclass
class StackVectors:
    """Tangential fields and adjoint covectors at every interface (see :func:`stack_vectors`).

    kz, eta: (..., L, A, W); eta_in, eta_exit, r: (..., A, W); v, w_num, w_den:
    (..., L+1, 2, A, W). Interface 0 is the exit side (the substrate), interface j+1 the top of
    layer j.
    """

    kz: np.ndarray
    eta: np.ndarray
    eta_in: np.ndarray
    eta_exit: np.ndarray
    v: np.ndarray
    w_num: np.ndarray
    w_den: np.ndarray
    r: np.ndarray
    polarization: str


# --------------------------------------------------------------------------------------------
# Per-layer trigonometric terms


def _layer_trig(kz_row, d_row, real):
    """cos δ, sin δ and the log-scale |Im δ| removed from them, for one layer over a chunk."""
    if real:
        delta = kz_row.real * d_row
        return np.cos(delta), np.sin(delta), None
    delta = kz_row * d_row
    x, y = delta.real, delta.imag
    ay = np.abs(y)
    e2 = np.exp(-2.0 * ay)
    ch = 0.5 * (1.0 + e2)
    sh = np.copysign(0.5 * (1.0 - e2), y)
    cx, sx = np.cos(x), np.sin(x)
    return cx * ch - 1j * (sx * sh), sx * ch + 1j * (cx * sh), ay


def _is_real(terms, pols):
    if np.any(terms["kz_u"].imag != 0):
        return False
    return all(not np.any(terms["eta_u"][p].imag != 0) for p in pols)


# --------------------------------------------------------------------------------------------
# Forward sweep


def _forward(problem: Problem, terms, pols, store=False):
    """Sweep [B, C] from the exit side up through every layer, for each polarisation.

    Returns {pol: (B, C, logscale, stored)} with B, C (X,) complex at the top and logscale the
    log of the factor removed ((X,), or one float on the real path). With ``store``, ``stored`` is
    (v, ls, cos, sin, real): the vectors at every interface — (L+1, 4, X) float (Br, Bi, Cr, Ci)
    on the real path, (L+1, 2, X) complex (B, C) otherwise — their log scales ((L+1,) or
    (L+1, X)), cos δ and sin δ per layer (L, X), and whether the real path was taken.
    """
    inv, d = problem.inv, terms["d"]
    L = inv.size
    X = terms["b"].size
    real = _is_real(terms, pols)
    kz_u = terms["kz_u"]
    etas = {p: (terms["eta_u"][p].real if real else terms["eta_u"][p]) for p in pols}
    state = {}
    for p in pols:
        ee = terms["etae"][p]
        if real:
            state[p] = [np.ones(X), np.zeros(X), ee.real.copy(), ee.imag.copy()]
        else:
            state[p] = [np.ones(X, dtype=complex), ee.astype(complex)]
    ls = {p: (0.0 if real else np.zeros(X)) for p in pols}
    stored = {}
    if store:
        for p in pols:
            v = np.empty((L + 1, len(state[p]), X), dtype=float if real else complex)
            for k in range(len(state[p])):
                v[0, k] = state[p][k]
            lsv = np.zeros((L + 1,) if real else (L + 1, X))
            stored[p] = (v, lsv)
        cos_all = np.empty((L, X), dtype=float if real else complex)
        sin_all = np.empty_like(cos_all)
    for j in range(L):
        u = inv[j]
        dj = d[j]
        c, s, ay = _layer_trig(kz_u[u], dj, real)
        if store:
            cos_all[j] = c
            sin_all[j] = s
        for p in pols:
            e = etas[p][u]
            so = s / e
            es = s * e
            st = state[p]
            if real:
                Br, Bi, Cr, Ci = st
                st[0] = c * Br + so * Ci
                st[1] = c * Bi - so * Cr
                st[2] = c * Cr + es * Bi
                st[3] = c * Ci - es * Br
            else:
                B, C = st
                st[0] = c * B - 1j * (so * C)
                st[1] = c * C - 1j * (es * B)
                ls[p] = ls[p] + ay
            if (j + 1) % _RENORM_EVERY == 0:
                if real:
                    ls[p] = ls[p] + _renormalise_common(st)
                else:
                    _renormalise(st, ls[p])
            if store:
                v, lsv = stored[p]
                for k in range(len(st)):
                    v[j + 1, k] = st[k]
                lsv[j + 1] = ls[p]
    out = {}
    for p in pols:
        st = state[p]
        if real:
            B = st[0] + 1j * st[1]
            C = st[2] + 1j * st[3]
        else:
            B, C = st
        out[p] = (B, C, ls[p], (stored[p] + (cos_all, sin_all, real)) if store else None)
    return out


def _renormalise_common(st):
    """Real path: divide [B, C] of the whole chunk by one factor when they grow past 1e100.

    In a lossless stack |η0 B + C| is bounded below (T <= 1), so one factor per chunk never
    underflows a point. Returns the log of the factor (0 when nothing was done).
    """
    m = max(float(np.max(np.abs(a))) for a in st)
    if m < 1e100:
        return 0.0
    for i in range(len(st)):
        st[i] = st[i] / m
    return float(np.log(m))


def _renormalise(st, ls):
    """Divide [B, C] by a per-point positive factor, in place, and add its log to ``ls``."""
    m = np.abs(st[0])
    for a in st[1:]:
        m = np.maximum(m, np.abs(a))
    m = np.where(m > 0, m, 1.0)
    for i in range(len(st)):
        st[i] = st[i] / m
    ls += np.log(m)


def _top(terms, p, B, C, ls):
    """r, t (full-field), T from [B, C] at the top of the stack."""
    eta0 = terms["eta0"][p]
    etae = terms["etae"][p]
    D = eta0 * B + C
    r = (eta0 * B - C) / D
    with np.errstate(under="ignore", over="ignore"):
        t_tan = 2.0 * eta0 * np.exp(-ls) / D
    T = etae.real / eta0 * np.abs(t_tan) ** 2
    if p == "p":
        t = t_tan * (terms["q0"] / terms["n0"]) / (terms["qe"] / terms["Ne"])
    else:
        t = t_tan
    return r, t, T, D


# --------------------------------------------------------------------------------------------
# Public functions


def _stored_chunk(L: int) -> int:
    """Points per chunk when the fields at all L+1 interfaces are stored (bounded memory)."""
    from . import _grid
    return max(1, min(_grid.CHUNK_POINTS, max(256, 2 ** 21 // max(L, 1))))


def _out_shape(problem: Problem):
    return problem.batch + (problem.A, problem.W)


def coherent_response(n_layers, thickness_nm, n_incident, n_exit, wavelength_nm, angle_deg=0.0,
                      polarization="s", *, snell_invariant=None) -> CoherentResponse:
    """Reflectance, transmittance and amplitudes of a coherent multilayer.

    Parameters
    ----------
    n_layers : array_like, complex, shape (..., L, W)
        Index N = n + ik of each layer at each wavelength, deposition order (index 0 touches the
        exit medium).
    thickness_nm : array_like, shape (..., L)
        Physical thicknesses in nm (>= 0).
    n_incident : float or array_like, shape (..., W)
        Real index of the incident medium (it must not absorb).
    n_exit : complex or array_like, shape (..., W)
        Index of the exit medium (may absorb).
    wavelength_nm : array_like, shape (W,)
        Vacuum wavelengths in nm.
    angle_deg : float or array_like, shape (A,)
        Angles of incidence in the incident medium, degrees in [0, 90).
    polarization : {'s', 'p', 'mean'}
        'mean' averages the s and p powers (unpolarised light); amplitudes are then None.
    snell_invariant : array_like, shape (A, W), optional
        n·sinθ of the light, used instead of ``n_incident·sin(angle)`` (for light arriving from
        inside a substrate whose index varies with wavelength: the invariant of the outer medium).

    Returns
    -------
    CoherentResponse with R, T, A (and r, t) shaped (..., A, W), where ``...`` is the broadcast
    of the batch dimensions of all inputs.

    References: Macleod, *Thin-Film Optical Filters* (2010), §2.2–2.4 (characteristic matrix,
    tilted admittances).
    """
    pols = check_polarization(polarization)
    problem = prepare(n_layers, thickness_nm, n_incident, n_exit, wavelength_nm, angle_deg,
                      snell_invariant)
    P = problem.n_points
    R = {p: np.empty(P) for p in pols}
    T = {p: np.empty(P) for p in pols}
    amp = len(pols) == 1
    r_all = np.empty(P, dtype=complex) if amp else None
    t_all = np.empty(P, dtype=complex) if amp else None

    def work(start, stop):
        terms = chunk_terms(problem, start, stop, pols)
        res = _forward(problem, terms, pols)
        for p in pols:
            B, C, ls, _ = res[p]
            r, t, Tp, _ = _top(terms, p, B, C, ls)
            R[p][start:stop] = np.abs(r) ** 2
            T[p][start:stop] = Tp
            if amp:
                r_all[start:stop] = r
                t_all[start:stop] = t

    run_chunks(work, problem)
    shape = _out_shape(problem)
    Rm = sum(R[p] for p in pols) / len(pols)
    Tm = sum(T[p] for p in pols) / len(pols)
    return CoherentResponse(R=Rm.reshape(shape), T=Tm.reshape(shape),
                            A=(1.0 - Rm - Tm).reshape(shape),
                            r=r_all.reshape(shape) if amp else None,
                            t=t_all.reshape(shape) if amp else None,
                            polarization=polarization)


def _adjoint(problem, terms, p, stored, eta0):
    """Backward sweep: covectors [η0, −1]·P and [η0, 1]·P at each interface (common scale).

    Yields, for j = L−1 … 0, (j, w_num, w_den) with the covectors at interface j+1 (the top of
    layer j), each a pair of (X,) complex arrays; after the loop the covectors at interface 0 are
    returned by a final yield with j = −1.
    """
    cos_all, sin_all = stored[2], stored[3]
    inv = problem.inv
    L = inv.size
    eta_u = terms["eta_u"][p]
    wn = [eta0.astype(complex), -np.ones_like(eta0, dtype=complex)]
    wd = [eta0.astype(complex), np.ones_like(eta0, dtype=complex)]
    for j in range(L - 1, -1, -1):
        yield j, wn, wd
        e = eta_u[inv[j]]
        c, s = cos_all[j], sin_all[j]
        ies = -1j * e * s
        iso = -1j * s / e
        wn = [wn[0] * c + wn[1] * ies, wn[0] * iso + wn[1] * c]
        wd = [wd[0] * c + wd[1] * ies, wd[0] * iso + wd[1] * c]
        if (L - j) % _RENORM_EVERY == 0:
            m = np.maximum.reduce([np.abs(a) for a in wd + wn])
            m = np.where(m > 0, m, 1.0)
            wn = [a / m for a in wn]
            wd = [a / m for a in wd]
    yield -1, wn, wd


def _as_complex_vectors(v, real):
    """Stored interface vectors → (L+1, 2, X) complex [B, C]."""
    if not real:
        return v
    return np.stack([v[:, 0] + 1j * v[:, 1], v[:, 2] + 1j * v[:, 3]], axis=1)


def _derivatives_complex(problem, terms, p, stored):
    """Yield (j, dN/D, dD/D) for every layer j: general (absorbing or evanescent) case.

    Ratios are taken at the same interface, so the per-point scaling cancels.
    """
    v = stored[0]
    eta_u = terms["eta_u"][p]
    kz_u = terms["kz_u"]
    for j, wn, wd in _adjoint(problem, terms, p, stored, terms["eta0"][p]):
        if j < 0:
            return
        u = problem.inv[j]
        Bj, Cj = v[j + 1, 0], v[j + 1, 1]
        e = eta_u[u]
        k1, k2 = -1j * Cj / e, -1j * e * Bj
        kz_D = kz_u[u] / (wd[0] * Bj + wd[1] * Cj)
        yield j, kz_D * (wn[0] * k1 + wn[1] * k2), kz_D * (wd[0] * k1 + wd[1] * k2)


def _real_to_ratios(parts, D, r, T, direct):
    """Turn the real kernel's terms into (j, dN/D, dD/D); or, with ``direct`` = (dR, dT, start,
    stop), write dR and dT straight into those arrays in real arithmetic and yield nothing.

    dR = 2 Re(r* dN/D) − 2|r|² Re(dD/D) and dT = −2 T Re(dD/D), expanded over Sr, Si, Qr, Qi.
    """
    invD = 1.0 / D
    if direct is None:
        for j, g, Sr, Si, Qr, Qi in parts:
            gD = g * invD
            yield j, gD * ((Sr - Qr) + 1j * (Si - Qi)), gD * ((Sr + Qr) + 1j * (Si + Qi))
        return
    dR, dT, start, stop = direct
    a = np.conj(r) * invD
    r2 = r.real ** 2 + r.imag ** 2
    ir, ii = invD.real, invD.imag
    c1, c2 = a.real - r2 * ir, -a.real - r2 * ir
    c3, c4 = -a.imag + r2 * ii, a.imag + r2 * ii
    for j, g, Sr, Si, Qr, Qi in parts:
        dR[j, start:stop] = 2.0 * g * (c1 * Sr + c2 * Qr + c3 * Si + c4 * Qi)
        dT[j, start:stop] = -2.0 * T * g * (ir * (Sr + Qr) - ii * (Si + Qi))
    return


def _derivatives_real(problem, terms, p, stored):
    """Yield (j, g, Sr, Si, Qr, Qi) for every layer j when all layers are lossless and propagating.

    With N = η0 B − C and D = η0 B + C at the top: ∂N/∂d_j = g·((Sr − Qr) + i(Si − Qi)) and
    ∂D/∂d_j = g·((Sr + Qr) + i(Si + Qi)), all real arrays (g includes k_z,j and the scale).

    The covectors [η0, ∓1]·P are carried as two real pairs: (p1, p2) from the η0 part and
    (q1, q2) from the unit part, w_∓ = [p1 ∓ i q1, i p2 ∓ q2]; the fields as real (Br, Bi, Cr,
    Ci). Everything stays in real arithmetic; scaling is one common factor per chunk.
    """
    v, lsv, cos_all, sin_all, _ = stored
    inv = problem.inv
    L = inv.size
    eta_u = terms["eta_u"][p].real
    kz_u = terms["kz_u"].real
    eta0 = terms["eta0"][p].real
    p1, p2 = eta0.copy(), np.zeros_like(eta0)
    q1, q2 = np.zeros_like(eta0), np.ones_like(eta0)
    lsw = 0.0
    for j in range(L - 1, -1, -1):
        u = inv[j]
        e = eta_u[u]
        Br, Bi, Cr, Ci = v[j + 1]
        cre, cie = Cr / e, Ci / e
        ebr, ebi = e * Br, e * Bi
        Sr = -p1 * cie - p2 * ebr
        Si = p1 * cre - p2 * ebi
        Qr = -q1 * cre - q2 * ebi
        Qi = -q1 * cie + q2 * ebr
        # K = −i[[0, 1/η], [η, 0]]: dN = g·((Sr − Qr) + i(Si − Qi)), dD = g·((Sr + Qr) + i(Si + Qi))
        g = -kz_u[u] * np.exp(lsv[j + 1] + lsw - lsv[L])
        yield j, g, Sr, Si, Qr, Qi
        c, s = cos_all[j], sin_all[j]
        es, so = e * s, s / e
        p1, p2 = c * p1 + es * p2, c * p2 - so * p1
        q1, q2 = c * q1 - es * q2, c * q2 + so * q1
        if (L - j) % _RENORM_EVERY == 0:
            m = max(float(np.max(np.abs(a))) for a in (p1, p2, q1, q2))
            if m > 1e100:
                p1, p2, q1, q2 = p1 / m, p2 / m, q1 / m, q2 / m
                lsw += float(np.log(m))


def coherent_derivatives(n_layers, thickness_nm, n_incident, n_exit, wavelength_nm,
                         angle_deg=0.0, polarization="s", *, snell_invariant=None) -> CoherentDerivatives:
    """Response and its derivatives with respect to every layer thickness, in one pass.

    Parameters are those of :func:`coherent_response`. A forward sweep stores the tangential
    fields [B, C] at every interface; a backward sweep carries the covectors [η0, ∓1]·P (P the
    product of the characteristic matrices above an interface). Since dM_j/dd_j = k_z,j M_j K_j
    with K_j = [[0, −i/η_j], [−i η_j, 0]],

    .. math:: \\frac{∂(η_0 B ∓ C)}{∂d_j} = k_{z,j}\\, w_∓^{(j+1)} K_j v^{(j+1)}

    and dr = r (dN/N − dD/D) is formed from ratios at the same interface, which are free of the
    scaling used for stability. dR = 2 Re(r* dr), dT = −2 T Re(dD/D), A = 1 − R − T.

    Returns
    -------
    CoherentDerivatives: R, T, A (..., A, W); dR, dT, dA (..., L, A, W) per nm; for 's'/'p'
    also r, t, dr, dt, phase_r = arg r and dphase_r = Im(r* dr)/|r|².

    References: Macleod (2010), §2.2; the adjoint (forward/backward partial product) form is
    standard linear algebra (derivative of a matrix product).
    """
    pols = check_polarization(polarization)
    problem = prepare(n_layers, thickness_nm, n_incident, n_exit, wavelength_nm, angle_deg,
                      snell_invariant)
    P, L = problem.n_points, problem.L
    R = {p: np.empty(P) for p in pols}
    T = {p: np.empty(P) for p in pols}
    dR = {p: np.empty((L, P)) for p in pols}
    dT = {p: np.empty((L, P)) for p in pols}
    amp = len(pols) == 1
    if amp:
        r_all = np.empty(P, dtype=complex)
        t_all = np.empty(P, dtype=complex)
        dr_all = np.empty((L, P), dtype=complex)
        dt_all = np.empty((L, P), dtype=complex)

    def work(start, stop):
        terms = chunk_terms(problem, start, stop, pols)
        res = _forward(problem, terms, pols, store=True)
        for p in pols:
            B, C, ls, stored = res[p]
            r, t, Tp, D = _top(terms, p, B, C, ls)
            R[p][start:stop] = np.abs(r) ** 2
            T[p][start:stop] = Tp
            if stored[-1]:
                derivs = _real_to_ratios(_derivatives_real(problem, terms, p, stored), D,
                                         r, Tp, None if amp else (dR[p], dT[p], start, stop))
            else:
                derivs = _derivatives_complex(problem, terms, p, stored)
            for j, dN_D, dD_D in derivs:
                drj = dN_D - r * dD_D
                dR[p][j, start:stop] = 2.0 * (np.conj(r) * drj).real
                dT[p][j, start:stop] = -2.0 * Tp * dD_D.real
                if amp:
                    dr_all[j, start:stop] = drj
                    dt_all[j, start:stop] = -t * dD_D
            if amp:
                r_all[start:stop] = r
                t_all[start:stop] = t

    run_chunks(work, problem, chunk=_stored_chunk(L))
    shape = _out_shape(problem)
    dshape = problem.batch + (L, problem.A, problem.W)

    def lay(a):  # (L, P) → (..., L, A, W)
        return np.moveaxis(a.reshape((L,) + shape), 0, len(problem.batch))

    n = len(pols)
    Rm = sum(R[p] for p in pols) / n
    Tm = sum(T[p] for p in pols) / n
    dRm = lay(sum(dR[p] for p in pols) / n)
    dTm = lay(sum(dT[p] for p in pols) / n)
    out = CoherentDerivatives(R=Rm.reshape(shape), T=Tm.reshape(shape),
                              A=(1.0 - Rm - Tm).reshape(shape), r=None, t=None,
                              polarization=polarization, dR=dRm.reshape(dshape),
                              dT=dTm.reshape(dshape), dA=-(dRm + dTm).reshape(dshape))
    if amp:
        r = r_all.reshape(shape)
        dr = lay(dr_all)
        out.r, out.t, out.dr, out.dt = r, t_all.reshape(shape), dr, lay(dt_all)
        out.phase_r = np.angle(r)
        rr = np.expand_dims(r, -3)
        with np.errstate(invalid="ignore", divide="ignore"):
            out.dphase_r = (np.conj(rr) * dr).imag / np.abs(rr) ** 2
    return out


def stack_vectors(n_layers, thickness_nm, n_incident, n_exit, wavelength_nm, angle_deg=0.0,
                  polarization="s", *, snell_invariant=None) -> StackVectors:
    """Fields and adjoint covectors at every interface, for field profiles and needle functions.

    Parameters are those of :func:`coherent_response` with ``polarization`` 's' or 'p'.

    Returns
    -------
    StackVectors with
      - ``kz`` (..., L, A, W): normal wavenumber of each layer, rad/nm;
      - ``eta`` (..., L, A, W): tilted admittance of each layer; ``eta_in``, ``eta_exit``
        (..., A, W);
      - ``v`` (..., L+1, 2, A, W): tangential (E, H) at each interface, normalised to the
        incident wave's tangential E (interface 0 at the exit side, j+1 the top of layer j).
        Inside layer j, at height z above its bottom, v(z) = M_j(k_z,j z) v[j];
      - ``w_num``, ``w_den`` (..., L+1, 2, A, W): covectors with w_num[j]·v[j] = r and
        w_den[j]·v[j] = 1 at every interface; inside a layer w(z) = w[j+1] M_j(k_z,j (d_j − z)).
        Inserting a layer of admittance η_n and wavenumber k_n, ε thin, at a point changes r by
        ε k_n (w_num K_n v − r w_den K_n v), K_n = [[0, −i/η_n], [−i η_n, 0]], and
        M_j(δ) = [[cos δ, −i sin δ/η_j], [−i η_j sin δ, cos δ]] (time dependence exp(−iωt)).
      - ``r`` (..., A, W).

    Under a very thick metal the normalised fields underflow towards 0 and the covectors grow
    accordingly (their product stays exact).

    References: Macleod (2010), §2.2 and §13 (fields in the stack).
    """
    if polarization not in ("s", "p"):
        raise ValueError(f"stack_vectors needs polarization 's' or 'p', got {polarization!r}")
    pols = (polarization,)
    problem = prepare(n_layers, thickness_nm, n_incident, n_exit, wavelength_nm, angle_deg,
                      snell_invariant)
    P, L = problem.n_points, problem.L
    kz = np.empty((L, P), dtype=complex)
    eta = np.empty((L, P), dtype=complex)
    eta_in = np.empty(P, dtype=complex)
    eta_exit = np.empty(P, dtype=complex)
    V = np.empty((L + 1, 2, P), dtype=complex)
    WN = np.empty((L + 1, 2, P), dtype=complex)
    WD = np.empty((L + 1, 2, P), dtype=complex)
    r_all = np.empty(P, dtype=complex)

    def work(start, stop):
        terms = chunk_terms(problem, start, stop, pols)
        res = _forward(problem, terms, pols, store=True)
        B, C, ls, stored = res[polarization]
        r, t, Tp, D = _top(terms, polarization, B, C, ls)
        real = stored[-1]
        v, lsv = _as_complex_vectors(stored[0], real), stored[1]
        if real:
            lsv = lsv[:, None]
        eta0 = terms["eta0"][polarization]
        with np.errstate(under="ignore"):
            vn = v * (2.0 * eta0 / D * np.exp(lsv - ls))[:, None, :]
        V[:, :, start:stop] = vn
        for j, wn, wd in _adjoint(problem, terms, polarization, (v,) + stored[1:], eta0):
            i = j + 1
            norm = wd[0] * vn[i, 0] + wd[1] * vn[i, 1]
            WN[i, 0, start:stop] = wn[0] / norm
            WN[i, 1, start:stop] = wn[1] / norm
            WD[i, 0, start:stop] = wd[0] / norm
            WD[i, 1, start:stop] = wd[1] / norm
        kz[:, start:stop] = terms["kz_u"][problem.inv]
        eta[:, start:stop] = terms["eta_u"][polarization][problem.inv]
        eta_in[start:stop] = eta0
        eta_exit[start:stop] = terms["etae"][polarization]
        r_all[start:stop] = r

    run_chunks(work, problem, chunk=_stored_chunk(L))
    shape = _out_shape(problem)
    nbd = len(problem.batch)

    def lay(a, lead):
        return np.moveaxis(a.reshape(lead + shape), list(range(len(lead))),
                           list(range(nbd, nbd + len(lead))))

    return StackVectors(kz=lay(kz, (L,)), eta=lay(eta, (L,)), eta_in=eta_in.reshape(shape),
                        eta_exit=eta_exit.reshape(shape), v=lay(V, (L + 1, 2)),
                        w_num=lay(WN, (L + 1, 2)), w_den=lay(WD, (L + 1, 2)),
                        r=r_all.reshape(shape), polarization=polarization)
