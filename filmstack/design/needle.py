r"""Needle optimisation and gradual evolution.

Needle function
---------------
Insert into a stack, at height *z* inside layer *j*, a "needle" of material *m* (tilted
admittance :math:`\eta_m`, normal wavenumber :math:`k_m`) and thickness ε. The engine
(``filmstack.optics.stack_vectors``) gives the forward vectors :math:`v = [B, C]` (tangential E, H
at every interface, normalised to the incident wave) and covectors :math:`w_N, w_D` with
:math:`w_N\cdot v = r` and :math:`w_D\cdot v = 1` at every interface, so that :math:`r = N/D`
with :math:`N = w_N\cdot v`, :math:`D = w_D\cdot v` (the unnormalised D is
:math:`\eta_0 B + C`). Inside layer *j*, :math:`v(z) = M_j(k_j z)\, v_j` and
:math:`w(z) = w_{j+1} M_j(k_j (d_j - z))` with the characteristic matrix (time dependence
exp(−iωt)) :math:`M(\delta) = [[\cos\delta, -i\sin\delta/\eta], [-i\eta\sin\delta, \cos\delta]]`.
The needle's matrix is :math:`M_m(k_m\varepsilon) = I + \varepsilon k_m K_m + O(\varepsilon^2)`,
:math:`K_m = [[0, -i/\eta_m], [-i\eta_m, 0]]`, so with :math:`w(z) = [a, b]`, :math:`v(z) = [B, C]`

.. math::

    N' = \frac{dN}{d\varepsilon} = k_m\, w_N(z) K_m v(z)
        = -i k_m \left(a_N \frac{C}{\eta_m} + b_N \eta_m B\right),\qquad
    D' = -i k_m \left(a_D \frac{C}{\eta_m} + b_D \eta_m B\right),

and then

.. math::

    \frac{dr}{d\varepsilon} = \frac{N' - r D'}{D},\quad
    \frac{dR}{d\varepsilon} = 2\,\mathrm{Re}\!\left(\bar r \frac{dr}{d\varepsilon}\right),\quad
    \frac{dT}{d\varepsilon} = -2T\,\mathrm{Re}\frac{D'}{D},\quad
    \frac{dA}{d\varepsilon} = -\frac{dR}{d\varepsilon} - \frac{dT}{d\varepsilon},

since on a semi-infinite substrate :math:`T = 4\eta_0\,\mathrm{Re}\,\eta_\text{exit}/|\eta_0 B + C|^2`
(here evaluated as :math:`\mathrm{Re}\,\eta_\text{exit} |B_\text{exit}|^2/\eta_0` with the normalised
vectors); :math:`d\varphi_r/d\varepsilon = \mathrm{Im}(r'/r)` and, as :math:`t \propto 1/D`,
:math:`d\varphi_t/d\varepsilon = -\mathrm{Im}(D'/D)`; 'mean' polarisation averages s and p.
These go through the merit's residual map exactly as thickness derivatives do, giving the needle
function :math:`P(z, m) = dF/d\varepsilon = 2\,\mathbf r\cdot d\mathbf r/d\varepsilon` at every
depth and for every allowed material from one set of partial products. Where P < 0, a thin needle
there lowers the merit.

For a thick (incoherent) substrate the same derivatives come from the engine's thickness
derivatives of an expanded stack: every free layer split at the probe depths with a zero-thickness
layer of each material in every cut (a zero-thickness layer changes nothing, and the derivative
with respect to its thickness is the needle derivative) — still one engine call per group.

Algorithms
----------
Needle optimisation: refine; compute P; insert a needle of the most negative P (a short line
search picks its first thickness), refine, remove thin layers and merge neighbours, keep it if the
merit fell; try the next-best candidates if not; stop when no insertion helps or a limit (layers,
total thickness, time) is reached. Gradual evolution: after needle optimisation converges, add a
layer on top (a quarter wave at the reference wavelength) and optimise again, so the total
thickness grows step by step while the best design is kept.

References: A. V. Tikhonravov, M. K. Trubetskov, G. W. DeBell, "Application of the needle
optimization technique to the design of optical coatings", Appl. Opt. 35, 5493 (1996);
A. V. Tikhonravov, "Some theoretical aspects of thin-film optics and their applications",
Appl. Opt. 32, 5417 (1993); A. V. Tikhonravov, M. K. Trubetskov, G. W. DeBell, "Optical coating
design approaches based on the needle optimization technique", Appl. Opt. 46, 704 (2007)
(gradual evolution); H. A. Macleod, *Thin-Film Optical Filters*, 4th ed., ch. 2 (characteristic
matrices, tilted admittances).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..stack import Layer, qwot_to_nm
from .layout import Design

__all__ = ["NeedleScan", "needle_function", "insert_needle", "needle_optimise",
           "gradual_evolution", "trim_layers", "DEFAULT_PROBE_STEP_NM"]

#: Default spacing of the probe depths (nm).
DEFAULT_PROBE_STEP_NM = 2.0


@dataclass
class NeedleScan:
    """The needle function of a design.

    Attributes
    ----------
    materials
        Material symbols, shape (Mn,).
    layer
        Free-layer index of each probe depth, shape (P,) (−1 when the design has no free layers).
    z_nm
        Height of each probe above the bottom of its layer, nm, shape (P,).
    depth_nm
        Height of each probe above the substrate (bottom of the whole front stack), nm, (P,).
    values
        dF/dε in 1/nm, shape (Mn, P); NaN where inserting that material means nothing (it is the
        material of the layer or of a neighbour at the probe).
    merit
        The merit F of the design.
    multiplier
        Lagrange multiplier λ ≥ 0 of the total-thickness limit when the design sits on it: a
        needle then has to take its thickness from the other layers, which costs λ per nm, so
        the useful insertions are those with P + λ < 0 (0 when the limit is not reached).
    """

    materials: tuple
    layer: np.ndarray
    z_nm: np.ndarray
    depth_nm: np.ndarray
    values: np.ndarray
    merit: float
    multiplier: float = 0.0

    def ranked(self):
        """Candidates (value, material index, probe index) with value + multiplier < 0, most
        negative first (see :func:`needle_function` for the multiplier)."""
        v = np.where(np.isfinite(self.values), self.values + self.multiplier, np.inf)
        order = np.argsort(v, axis=None, kind="stable")
        out = []
        for flat in order:
            m, p = np.unravel_index(flat, v.shape)
            if not v[m, p] < 0:
                break
            out.append((float(v[m, p]), int(m), int(p)))
        return out


# ---------------------------------------------------------------------------------------------
# probe depths
# ---------------------------------------------------------------------------------------------

def _probes(problem, design: Design, step_nm: float):
    """Probe positions: free-layer index f, height z in it (both ends where meaningful)."""
    fs, zs = [], []
    n = len(design)
    if n == 0:
        return np.array([-1]), np.array([0.0])
    for f, d in enumerate(design.thicknesses_nm):
        k = max(1, int(math.ceil(d / step_nm)))
        z = np.linspace(0.0, d, k + 1)
        if f < n - 1:
            z = z[:-1]          # the top of layer f is the bottom of layer f + 1
        fs.append(np.full(z.size, f))
        zs.append(z)
    return np.concatenate(fs), np.concatenate(zs)


def _excluded(problem, design: Design, f, z, symbols):
    """Mask (Mn, P): True where a needle of that material is no new layer."""
    mats = problem.materials
    below0 = problem.fixed_bottom[-1].material if problem.fixed_bottom else \
        problem.template.substrate
    above_top = problem.fixed_top[0].material if problem.fixed_top else problem.template.incident
    n = len(design)
    out = np.zeros((len(symbols), f.size), bool)
    for p in range(f.size):
        fi = int(f[p])
        if fi < 0:
            neighbours = {id(below0), id(above_top)}
            for mi, s in enumerate(symbols):
                out[mi, p] = id(mats[s]) in neighbours
            continue
        d = design.thicknesses_nm[fi]
        host = design.symbols[fi]
        for mi, s in enumerate(symbols):
            if s == host:
                out[mi, p] = True
            elif z[p] <= 0.0:
                below = design.symbols[fi - 1] if fi > 0 else None
                out[mi, p] = (s == below) or (fi == 0 and mats[s] is below0)
            elif z[p] >= d and fi == n - 1:
                out[mi, p] = mats[s] is above_top
    return out


# ---------------------------------------------------------------------------------------------
# needle derivatives: analytic (semi-infinite substrate) and expanded-stack (any substrate)
# ---------------------------------------------------------------------------------------------

def _analytic_provider(jj, zz, needle_materials):
    """Provider for Merit.evaluate: derivatives w.r.t. needles at full-stack (layer jj, z zz).

    jj (P,) full-stack layer indices (−1: the stack has no layers), zz (P,) heights in nm.
    Parameters are ordered material-major: P_total = Mn × P.
    """
    from ..optics import stack_vectors

    def provider(merit, gi, stack, nk):
        g = merit.groups[gi]
        n0, ns = merit.group_media(gi)
        d = stack.thicknesses_nm
        L = d.size
        nn = np.stack([merit.material_nk(gi, m) for m in needle_materials])[:, None, :]
        pols = ("s", "p") if g.polarization == "mean" else (g.polarization,)
        acc_d = {}
        for pol in pols:
            ders = _needle_one_pol(nk, d, n0, ns, g.grid, g.angles, pol, nn, jj, zz, L,
                                   stack_vectors)
            for k in ders:
                acc_d[k] = acc_d.get(k, 0) + ders[k] / len(pols)
        # the values themselves (residuals) exactly as the merit has them: from the engine
        from .merit import _engine_values

        vals, _ = _engine_values(merit, gi, stack, nk)
        return vals, acc_d

    return provider


def _needle_one_pol(nk, d, n0, ns, grid, angles, pol, nn, jj, zz, L, stack_vectors):
    sv = stack_vectors(nk, d, n0, ns, grid, angles, pol)
    v = np.asarray(sv.v)
    wn, wd = np.asarray(sv.w_num), np.asarray(sv.w_den)
    num = np.sum(wn[L] * v[L], axis=0)                     # (A, G)
    den = np.sum(wd[L] * v[L], axis=0)
    r = num / den
    eta_in, eta_ex = np.asarray(sv.eta_in), np.asarray(sv.eta_exit)
    T = eta_ex.real * np.abs(v[0, 0] / den) ** 2 / eta_in.real
    # needle materials' kz and eta (a zero-thickness one-layer stack per material)
    nv = stack_vectors(nn, np.zeros(nn.shape[:-1]), n0, ns, grid, angles, pol)
    kn = np.asarray(nv.kz)[:, 0][:, None]                  # (Mn, 1, A, G)
    en = np.asarray(nv.eta)[:, 0][:, None]
    if L == 0:
        B, C = v[0, 0][None], v[0, 1][None]                # (1, A, G)
        an, bn = wn[0, 0][None], wn[0, 1][None]
        ad, bd = wd[0, 0][None], wd[0, 1][None]
    else:
        kz = np.asarray(sv.kz)[jj]                          # (P, A, G)
        eta = np.asarray(sv.eta)[jj]
        vj = v[jj]                                          # (P, 2, A, G)
        z = np.asarray(zz, float)[:, None, None]
        up = (d[jj] - np.asarray(zz, float))[:, None, None]
        c1, s1 = np.cos(kz * z), np.sin(kz * z)
        B = c1 * vj[:, 0] - 1j * s1 / eta * vj[:, 1]
        C = -1j * eta * s1 * vj[:, 0] + c1 * vj[:, 1]
        c2, s2 = np.cos(kz * up), np.sin(kz * up)
        wnj, wdj = wn[jj + 1], wd[jj + 1]
        an = wnj[:, 0] * c2 - wnj[:, 1] * 1j * eta * s2
        bn = -wnj[:, 0] * 1j * s2 / eta + wnj[:, 1] * c2
        ad = wdj[:, 0] * c2 - wdj[:, 1] * 1j * eta * s2
        bd = -wdj[:, 0] * 1j * s2 / eta + wdj[:, 1] * c2
    dN = -1j * kn * (an * C / en + bn * en * B)            # (Mn, P, A, G)
    dD = -1j * kn * (ad * C / en + bd * en * B)
    dr = (dN - r * dD) / den
    dR = 2.0 * np.real(np.conj(r) * dr)
    dT = -2.0 * T * np.real(dD / den)
    mn, p = dN.shape[:2]

    def flat(x):
        return x.reshape((mn * p,) + x.shape[2:])

    return {"R": flat(dR), "T": flat(dT), "A": flat(-dR - dT),
            "phase_r": flat(np.imag(dr / r)), "phase_t": flat(-np.imag(dD / den))}


def _expanded_provider(problem, design: Design, f, z, symbols):
    """Provider using the engine's thickness derivatives of an expanded stack (any substrate)."""
    mats = [problem.materials[s] for s in symbols]
    layers = list(problem.fixed_bottom)
    needle_cols = []                                         # (P, Mn) columns
    order = np.lexsort((z, f))
    for fi in range(-1, len(design)):
        sel = order[f[order] == fi]
        if fi >= 0:
            host = problem.materials[design.symbols[fi]]
            prev = 0.0
            for p in sel:
                layers.append(Layer(host, max(float(z[p]) - prev, 0.0)))
                prev = float(z[p])
                needle_cols.append((p, len(layers)))
                layers.extend(Layer(m, 0.0) for m in mats)
            layers.append(Layer(host, max(design.thicknesses_nm[fi] - prev, 0.0)))
        else:
            for p in sel:
                needle_cols.append((p, len(layers)))
                layers.extend(Layer(m, 0.0) for m in mats)
    layers.extend(problem.fixed_top)
    cols = np.zeros((len(mats), f.size), int)
    for p, c in needle_cols:
        cols[:, p] = c + np.arange(len(mats))
    from dataclasses import replace

    expanded = replace(problem.template, layers=tuple(layers))

    def provider(merit, gi, stack, nk):
        from ..response import spectrum_derivatives

        g = merit.groups[gi]
        res = spectrum_derivatives(expanded, g.grid, g.angles, g.polarization,
                                   layer_indices=merit.layer_indices(gi, expanded.layers))
        idx = cols.ravel()
        vals = {"R": np.asarray(res.R), "T": np.asarray(res.T), "A": np.asarray(res.A)}
        ders = {"R": np.asarray(res.dR)[idx], "T": np.asarray(res.dT)[idx],
                "A": np.asarray(res.dA)[idx]}
        if g.phase:
            vals["phase_r"], vals["phase_t"] = np.angle(res.r), np.angle(res.t)
            ders["phase_r"] = np.imag(np.asarray(res.dr)[idx] / res.r)
            ders["phase_t"] = np.imag(np.asarray(res.dt)[idx] / res.t)
        return vals, ders

    return provider


def needle_function(merit, design: Design, *, step_nm: float = DEFAULT_PROBE_STEP_NM,
                    method: str = "auto") -> NeedleScan:
    """The needle function P(z, m) = dF/dε of ``design`` at probe depths every ``step_nm``.

    Parameters
    ----------
    merit
        The :class:`~filmstack.design.merit.Merit`.
    design
        The design (free layers).
    step_nm
        Probe spacing inside every free layer (nm); both faces of every layer are probed.
    method
        'analytic' (partial products of ``stack_vectors``; semi-infinite substrate only),
        'expanded' (engine derivatives of an expanded stack; any substrate) or 'auto'.

    Returns
    -------
    :class:`NeedleScan` with values (Mn, P) in 1/nm.
    """
    problem = merit.problem
    symbols = tuple(problem.materials)
    f, z = _probes(problem, design, step_nm)
    if method == "auto":
        method = "analytic" if problem.template.substrate_mm is None else "expanded"
    nb = len(problem.fixed_bottom)
    if method == "analytic":
        n_all = nb + len(design) + len(problem.fixed_top)
        if f[0] < 0:                    # no free layers: the interface between the fixed groups
            if nb < n_all:
                jj, zz = np.array([nb]), np.array([0.0])
            elif n_all:
                jj, zz = np.array([n_all - 1]), np.array([problem.fixed_bottom[-1].thickness_nm])
            else:
                jj, zz = np.array([0]), np.array([0.0])
        else:
            jj, zz = f + nb, z
        provider = _analytic_provider(jj, zz, [problem.materials[s] for s in symbols])
    elif method == "expanded":
        provider = _expanded_provider(problem, design, f, z, symbols)
    else:
        raise ValueError(f"method must be 'analytic', 'expanded' or 'auto', got {method!r}")
    r, dr = merit.evaluate(design, jacobian=True, provider=provider)
    vals = (2.0 * dr @ r).reshape(len(symbols), f.size)
    lam = 0.0
    cap = problem.free_total_nm
    if cap is not None and len(design) and design.d.sum() >= cap * (1.0 - 1e-6):
        _, g = merit.value_gradient(design)
        free = design.d > problem.thinnest_nm * 1.001
        if np.any(free):
            lam = max(0.0, -float(np.mean(g[free])))
    vals = np.where(_excluded(problem, design, f, z, symbols), np.nan, vals)
    base = sum(l.thickness_nm for l in problem.fixed_bottom)
    starts = np.concatenate([[0.0], np.cumsum(design.d)])[:-1] if len(design) else np.zeros(1)
    depth = base + starts[np.maximum(f, 0)] + z
    return NeedleScan(symbols, f, z, depth, vals, float(r @ r), lam)


def insert_needle(design: Design, layer: int, z_nm: float, symbol: str,
                  thickness_nm: float) -> Design:
    """``design`` with a layer of ``symbol`` (``thickness_nm``) inserted at height ``z_nm`` of
    free layer ``layer`` (splitting it, or between layers at a face; ``layer = -1``: empty)."""
    syms, ds = list(design.symbols), list(design.thicknesses_nm)
    if layer < 0 or not syms:
        return Design((symbol,), (thickness_nm,))
    d = ds[layer]
    if z_nm <= 1e-9:
        syms.insert(layer, symbol)
        ds.insert(layer, thickness_nm)
    elif z_nm >= d - 1e-9:
        syms.insert(layer + 1, symbol)
        ds.insert(layer + 1, thickness_nm)
    else:
        host = syms[layer]
        syms[layer:layer + 1] = [host, symbol, host]
        ds[layer:layer + 1] = [z_nm, thickness_nm, d - z_nm]
    return Design(tuple(syms), tuple(ds))


# ---------------------------------------------------------------------------------------------
# algorithms
# ---------------------------------------------------------------------------------------------

def _fits(problem, design: Design) -> bool:
    lim = problem.free_max_layers
    return lim is None or len(design) <= lim


def _needle_thickness(merit, design, scan, m, p):
    """First thickness of a needle: best of a few trial thicknesses (nm) by merit value."""
    sym = scan.materials[m]
    cap = merit.problem.free_total_nm
    best = None
    for eps in (0.5, 1.0, 2.0, 4.0, 8.0):
        trial = insert_needle(design, int(scan.layer[p]), float(scan.z_nm[p]), sym, eps)
        if cap is not None and trial.d.sum() > cap:
            trial = trial.with_d(trial.d * (cap / trial.d.sum()))
        val = merit.value(trial)
        if best is None or val < best[0]:
            best = (val, trial)
    return best[1]


def needle_optimise(merit, design: Design, value: float, *, refine, clock, accept,
                    step_nm: float = DEFAULT_PROBE_STEP_NM, tries: int = 3,
                    min_gain: float = 0.01, patience: int = 3):
    """Needle optimisation from an already refined ``design`` (merit ``value``).

    Parameters
    ----------
    merit
        The merit.
    design, value
        Refined start and its merit.
    refine
        ``refine(design) -> (design, value)``: refinement with clean-up.
    clock
        Object with ``check()`` raising when time is up.
    accept
        ``accept(design, value, stage)`` called for every improvement (records history).
    step_nm
        Probe spacing.
    tries
        Candidates tried per step before concluding that no insertion helps.
    min_gain, patience
        The search also ends after ``patience`` accepted steps in a row that each lowered the
        merit by less than the fraction ``min_gain``.

    Returns
    -------
    (design, value, reason): the best design, its merit and why the search ended.
    """
    problem = merit.problem
    small = 0
    while True:
        clock.check()
        if merit.satisfied(design, value):
            return design, value, "every target met"
        if small >= patience:
            return design, value, f"{patience} needle steps in a row gained less than " \
                                  f"{100 * min_gain:g} %"
        lim = problem.free_max_layers
        if lim is not None and len(design) >= lim:
            return design, value, "layer limit reached"
        scan = needle_function(merit, design, step_nm=step_nm)
        cands = scan.ranked()
        improved = False
        used = set()
        n_tried = 0
        for val, m, p in cands:
            key = (m, int(scan.layer[p]), round(float(scan.z_nm[p]) / (4 * step_nm)))
            if key in used:               # neighbours of a tried probe give the same result
                continue
            used.add(key)
            trial = insert_needle(design, int(scan.layer[p]), float(scan.z_nm[p]),
                                  scan.materials[m], 1.0)
            if not _fits(problem, trial):
                continue
            n_tried += 1
            trial = _needle_thickness(merit, design, scan, m, p)
            trial, tval = refine(trial)
            if tval < value * (1.0 - 1e-6) and not problem.violations(trial):
                small = small + 1 if tval > value * (1.0 - min_gain) else 0
                design, value = trial, tval
                accept(design, value, "needle")
                improved = True
                break
            if n_tried >= tries:
                break
        if not improved:
            reason = "no insertion lowers the merit" if cands else \
                "the needle function is non-negative everywhere"
            return design, value, reason


def gradual_evolution(merit, design: Design, value: float, *, refine, clock, accept,
                      step_nm: float = DEFAULT_PROBE_STEP_NM, patience: int = 3,
                      max_total_nm: float | None = None):
    """Gradual evolution: grow the stack by a top layer, then needle-optimise; keep the best.

    Each stage adds on top a quarter wave (at the reference wavelength) of the allowed material
    that differs from the current top layer and whose needle value at the top is lowest, then
    refines and runs :func:`needle_optimise`. Stops at the thickness or layer limits, after
    ``patience`` stages without improvement, or when every target is met.

    Returns (design, value, reason) of the best design found.
    """
    problem = merit.problem
    best, best_val = design, value
    current, cur_val = design, value
    cap = problem.free_total_nm if problem.free_total_nm is not None else max_total_nm
    stale = 0
    ref = problem.template.reference_nm
    while True:
        clock.check()
        if merit.satisfied(best, best_val):
            return best, best_val, "every target met"
        lim = problem.free_max_layers
        if lim is not None and len(current) + 1 > lim:
            return best, best_val, "layer limit reached"
        top = current.symbols[-1] if len(current) else None
        scan = needle_function(merit, current, step_nm=step_nm)
        top_p = int(np.argmax(scan.depth_nm))
        choices = [(scan.values[i, top_p] if np.isfinite(scan.values[i, top_p]) else np.inf, s)
                   for i, s in enumerate(scan.materials) if s != top]
        if not choices:
            return best, best_val, "only one material: nothing to grow with"
        sym = min(choices)[1]
        add = qwot_to_nm(1.0, problem.materials[sym], ref)
        total = float(current.d.sum())
        if cap is not None and total + add > cap:
            add = cap - total
            if add < problem.thinnest_nm:
                return best, best_val, "total thickness limit reached"
        grown = Design(current.symbols + (sym,), current.thicknesses_nm + (add,))
        current, cur_val = refine(grown)

        def keep(d, v, stage):
            nonlocal best, best_val
            if v < best_val and not problem.violations(d):
                best, best_val = d, v
                accept(d, v, stage)

        keep(current, cur_val, "evolution")
        current, cur_val, _ = needle_optimise(merit, current, cur_val, refine=refine,
                                              clock=clock, accept=keep, step_nm=step_nm)
        if best_val < value * (1.0 - 1e-6):
            stale = 0
            value = best_val
        else:
            stale += 1
            if stale >= patience:
                return best, best_val, f"{patience} growth steps without improvement"


def trim_layers(merit, design: Design, value: float, *, refine, clock, accept, tries: int = 6):
    """Remove layers that do not earn their place: the thinnest ``tries`` layers and the bottom
    layer are tried one by one — removed, their neighbours merged, the rest refined — and a
    removal is kept when the merit does not rise; repeated until no removal is kept.

    Needle optimisation adds a layer whenever that lowers the merit at all, and near the end
    (especially on the total-thickness limit, where the attainable merit is set by the total
    thickness) its last insertions gain little: a few thin layers that the refined stack no longer
    needs. Removing them is free, and fewer and thicker layers are easier to make. The bottom
    layer is what is left below the first needle of a thick start layer; when its material
    matches the substrate (silica on fused silica) it does nothing but add thickness.

    Returns (design, value).
    """
    problem = merit.problem
    while len(design) > 1:
        clock.check()
        kept = False
        order = [int(i) for i in np.argsort(design.d, kind="stable")[:tries]]
        if 0 not in order:
            order.append(0)     # the rest of a thick start layer often ends up at the bottom
        for i in order:
            trial = Design(design.symbols[:i] + design.symbols[i + 1:],
                           design.thicknesses_nm[:i] + design.thicknesses_nm[i + 1:]).merged()
            t, tv = refine(trial)
            if tv <= value and len(t) < len(design) and not problem.violations(t):
                design, value = t, tv
                accept(design, value, "trim")
                kept = True
                break
        if not kept:
            break
    return design, value

