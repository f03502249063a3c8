r"""The merit function of a coating design and its analytic gradient.

Form
----
Every requirement *i* of a spec (quantity R, T, A, phase, GD or GDD; condition ``<=``, ``>=`` or
``=``; weight :math:`w_i`) is sampled at its wavelengths (``filmstack.evaluate.requirement_wavelengths``)
and angles. With ``over: every`` each sample (angle, wavelength) gives one value :math:`q_{ik}`;
with ``over: average`` each angle gives one value, the band mean. The merit is the weighted
least-squares sum

.. math::

    F = \sum_i \frac{w_i}{W} \frac{1}{N_i} \sum_{k=1}^{N_i}
        \left(\frac{v_{ik}}{s_i}\right)^2 = \lVert \mathbf r \rVert^2 ,
    \qquad W = \sum_i w_i ,

where :math:`N_i` is the number of values of requirement *i*, :math:`s_i` its scale and
:math:`v_{ik}` the violation:

=========  ==========================================================================
condition  violation :math:`v`
=========  ==========================================================================
``<= L``   :math:`\max(0,\; q - (L - m_i))` — counts only where violated
``>= L``   :math:`\min(0,\; q - (L + m_i))` — counts only where violated
``= L``    :math:`q - L` everywhere (least squares towards the target; phase wrapped to ±π)
=========  ==========================================================================

:math:`m_i` is a design margin (``margin_fraction`` × :math:`s_i`, default 0.05 × scale) so that a
design that meets its samples keeps a little room for the 4× finer re-evaluation. The scales put
all quantities on one footing: :math:`s` = 0.01 for R, T, A (so *F* is in squared percentage
points), 1° for phase, 1 fs for GD, 10 fs² for GDD; a ``=`` condition with a tolerance uses the
tolerance as its scale. *F* = 0 exactly when every requirement holds (with its margin) at every
sample (values below ``MERIT_FLOOR`` = 1e-20, rounding noise, are taken as 0). Requirements of
weight 0 and colour requirements are not part of the merit (the check reports them).

The residual vector :math:`\mathbf r` (:math:`r_{ik} = \sqrt{w_i/(W N_i)}\, v_{ik}/s_i`) and its
Jacobian with respect to the free thicknesses come from the engine's analytic derivatives
(``filmstack.response.spectrum_derivatives``): an inactive inequality contributes a zero row, the
band average averages the derivative rows, and GD/GDD are five-point central differences of the phase in
angular frequency (relative step ``PHASE_STEP``, on wrapped phase differences, as
``filmstack.response.phase_response`` computes them for ordinary group delays), so their
derivatives are the same differences of the phase derivatives. The gradient is :math:`\nabla F = 2 J^\mathsf{T}\mathbf r`.

References: J. A. Dobrowolski, "Completely automatic synthesis of optical thin film systems",
Appl. Opt. 4, 937 (1965) (merit as a sum of squared deviations from targets); A. V. Tikhonravov,
M. K. Trubetskov, G. W. DeBell, Appl. Opt. 35, 5493 (1996) (merit of needle optimisation).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from .layout import Design, DesignProblem

__all__ = ["Merit", "Target", "QUANTITY_SCALE", "PHASE_STEP", "SPEED_OF_LIGHT_NM_PER_FS",
           "MERIT_FLOOR"]

#: Scale of each quantity in the merit (internal units: fractions, rad, fs, fs²).
QUANTITY_SCALE = {"R": 0.01, "T": 0.01, "A": 0.01, "phase": math.pi / 180.0, "GD": 1.0,
                  "GDD": 10.0}

#: A merit below this is 0: it means violations of at most 1e-10 of a scale (1e-12 in R),
#: below the engine's rounding, and a design that meets every target "with 4e-29 to spare" must
#: not lose to one that meets them exactly (layer trimming compares merits).
MERIT_FLOOR = 1e-20

#: Relative step in angular frequency for GD and GDD by central differences of the phase.
PHASE_STEP = 1e-3

#: Speed of light in vacuum, nm/fs (exact by the SI definition of the metre).
SPEED_OF_LIGHT_NM_PER_FS = 299.792458

_PHASE_QUANTITIES = ("phase", "GD", "GDD")
_OFFSETS = (-2, -1, 0, 1, 2)          # ω(1 + kδ): five-point central differences


def _floor(f: float) -> float:
    """The merit with rounding noise removed: below :data:`MERIT_FLOOR` it is 0."""
    return 0.0 if f < MERIT_FLOOR else f


def _wrap(x):
    """Angle(s) wrapped to (−π, π]."""
    return np.angle(np.exp(1j * np.asarray(x)))


@dataclass
class _Group:
    """One engine call: a set of angles, one polarisation, concatenated wavelengths."""

    angles: np.ndarray
    polarization: str
    phase: bool = False
    pieces: list = field(default_factory=list)
    grid: np.ndarray | None = None
    nk: dict = field(default_factory=dict)        # id(material) -> (G,) complex
    media: tuple | None = None                     # (n_incident (G,), n_substrate (G,))

    def add(self, wavelengths) -> slice:
        start = sum(p.size for p in self.pieces)
        self.pieces.append(np.asarray(wavelengths, float))
        return slice(start, start + self.pieces[-1].size)


@dataclass
class Target:
    """One requirement as the merit samples it.

    Attributes
    ----------
    requirement
        The :class:`~filmstack.spec.Requirement`.
    wavelengths_nm
        Sample wavelengths, shape (W,).
    angles_deg
        Angles, shape (A,).
    lo, hi
        The accepted interval of a value after the margin (internal units).
    scale
        :math:`s_i`.
    coef
        :math:`\\sqrt{w_i/(W N_i)}`.
    """

    requirement: object
    wavelengths_nm: np.ndarray
    angles_deg: np.ndarray
    lo: float
    hi: float
    scale: float
    coef: float
    group: int
    where: slice
    avg_weights: np.ndarray

    @property
    def quantity(self) -> str:
        return self.requirement.quantity

    @property
    def n_values(self) -> int:
        a, w = self.angles_deg.size, self.wavelengths_nm.size
        return a if self.requirement.over == "average" else a * w


class Merit:
    """Weighted least-squares merit of a design problem (see the module docstring).

    Parameters
    ----------
    problem
        The :class:`~filmstack.design.layout.DesignProblem`.
    requirements
        The spec's requirements (:class:`~filmstack.spec.Requirement`).
    refine
        Sampling refinement factor passed to ``requirement_wavelengths`` (1 = the spec's step,
        4 = four times finer).
    margin_fraction
        Design margin of inequality targets as a fraction of their scale.

    Attributes
    ----------
    targets
        The sampled requirements that enter the merit.
    skipped
        ``(requirement, reason)`` for requirements left out of the merit (weight 0, colour).
    n_evaluations
        Number of engine evaluations so far (values or Jacobians).
    """

    def __init__(self, problem: DesignProblem, requirements, *, refine: int = 1,
                 margin_fraction: float = 0.05):
        from ..evaluate import requirement_wavelengths

        self.problem = problem
        self.refine = int(refine)
        self.margin_fraction = float(margin_fraction)
        self.skipped: list = []
        self.n_evaluations = 0
        self._groups: list[_Group] = []
        keys: dict = {}
        pending = []
        for req in requirements:
            if req.quantity not in QUANTITY_SCALE:
                self.skipped.append((req, f"{req.quantity} requirements are checked but not "
                                          "optimised"))
                continue
            if not req.weight > 0:
                self.skipped.append((req, "weight 0"))
                continue
            if req.quantity in _PHASE_QUANTITIES and req.polarization not in ("s", "p"):
                raise InputError(f"{req.quantity} needs polarization s or p, got "
                                 f"'{req.polarization}'", key=req.key or None)
            wl = np.atleast_1d(np.asarray(requirement_wavelengths(req, refine=self.refine),
                                          float))
            angles = np.atleast_1d(np.asarray(req.angles_deg, float))
            pol = req.polarization
            if pol == "mean" and not np.any(angles):
                pol = "s"             # at normal incidence r_p = r_s (tilted admittances)
            gkey = (tuple(angles.tolist()), pol)
            if gkey not in keys:
                keys[gkey] = len(self._groups)
                self._groups.append(_Group(angles=angles, polarization=pol))
            gi = keys[gkey]
            grp = self._groups[gi]
            if req.quantity in ("GD", "GDD"):
                grid = np.concatenate([wl / (1.0 + k * PHASE_STEP) for k in _OFFSETS])
            else:
                grid = wl
            grp.phase = grp.phase or req.quantity in _PHASE_QUANTITIES
            pending.append((req, wl, angles, gi, grp.add(grid)))
        for grp in self._groups:
            grp.grid = np.concatenate(grp.pieces)
        wsum = sum(p[0].weight for p in pending)
        self.targets: list[Target] = []
        for req, wl, angles, gi, where in pending:
            scale = QUANTITY_SCALE[req.quantity]
            if req.op == "=" and req.tolerance > 0:
                scale = float(req.tolerance)
            m = self.margin_fraction * scale
            if req.op == "<=":
                lo, hi = -np.inf, req.limit - m
            elif req.op == ">=":
                lo, hi = req.limit + m, np.inf
            else:
                lo = hi = req.limit
            n_val = angles.size if req.over == "average" else angles.size * wl.size
            coef = math.sqrt(req.weight / (wsum * n_val))
            self.targets.append(Target(req, wl, angles, float(lo), float(hi), float(scale),
                                       coef, gi, where, _band_weights(wl)))

    @classmethod
    def from_spec(cls, spec, **kwargs) -> "Merit":
        """The merit of a :class:`~filmstack.spec.Spec` (see the class parameters)."""
        return cls(DesignProblem.from_spec(spec), spec.requirements, **kwargs)

    # -- sampling ------------------------------------------------------------------------------
    @property
    def groups(self) -> list:
        """The engine calls one evaluation makes (internal)."""
        return self._groups

    @property
    def n_residuals(self) -> int:
        """Length M of the residual vector."""
        return sum(t.n_values for t in self.targets)

    def group_media(self, gi: int):
        """(n_incident (G,), n_substrate (G,)) complex indices of group ``gi``."""
        g = self._groups[gi]
        if g.media is None:
            tmpl = self.problem.template
            g.media = (tmpl.incident.nk(g.grid), tmpl.substrate.nk(g.grid))
        return g.media

    def material_nk(self, gi: int, material) -> np.ndarray:
        """Complex index of ``material`` on group ``gi``'s wavelengths, shape (G,), cached."""
        g = self._groups[gi]
        key = id(material)
        if key not in g.nk:
            g.nk[key] = np.asarray(material.nk(g.grid), complex)
        return g.nk[key]

    def layer_indices(self, gi: int, layers) -> np.ndarray:
        """Indices of ``layers`` on group ``gi``'s wavelengths, shape (L, G)."""
        g = self._groups[gi]
        if not layers:
            return np.empty((0, g.grid.size), complex)
        return np.stack([self.material_nk(gi, l.material) for l in layers])

    # -- evaluation ----------------------------------------------------------------------------
    def residuals(self, design: Design) -> np.ndarray:
        """Residual vector r, shape (M,); the merit is ``r @ r``."""
        return self.evaluate(design, jacobian=False)[0]

    def value(self, design: Design) -> float:
        """Merit F of ``design`` (dimensionless, ≥ 0; 0 when every target is met; values below
        :data:`MERIT_FLOOR` are 0)."""
        r = self.residuals(design)
        return _floor(float(r @ r))

    def residuals_jacobian(self, design: Design):
        """Residuals r (M,) and their Jacobian J (M, F) w.r.t. the free thicknesses (1/nm)."""
        r, dr = self.evaluate(design, jacobian=True)
        return r, dr.T

    def value_gradient(self, design: Design):
        """Merit F and its gradient dF/dd (F,) w.r.t. the free thicknesses (1/nm)."""
        r, dr = self.evaluate(design, jacobian=True)
        return _floor(float(r @ r)), 2.0 * dr @ r

    def evaluate(self, design: Design, *, jacobian: bool = True, provider=None):
        """Residuals and their derivatives with respect to some parameters.

        Parameters
        ----------
        design
            The design.
        jacobian
            Also compute derivatives (else the second return value is None).
        provider
            ``provider(merit, group_index, stack, layer_indices) -> (values, derivatives)``
            giving, for one group, the sampled quantities ``values[q]`` of shape (A, G) and their
            derivatives ``derivatives[q]`` of shape (P, A, G) with respect to P parameters, for q
            in 'R', 'T', 'A', 'phase_r', 'phase_t' (phase only where needed). The default uses
            the engine's thickness derivatives (P = free layers).

        Returns
        -------
        r : (M,) residuals; dr : (P, M) their derivatives (or None).
        """
        if provider is None:
            provider = _engine_provider if jacobian else _engine_values
        stack = self.problem.stack(design)
        out = []
        for gi in range(len(self._groups)):
            out.append(provider(self, gi, stack, self.layer_indices(gi, stack.layers)))
        self.n_evaluations += 1
        rs, drs = [], []
        for t in self.targets:
            vals, ders = out[t.group]
            q, dq = _target_values(t, vals, ders if jacobian else None)
            r, dr = _target_residuals(t, q, dq)
            rs.append(r)
            drs.append(dr)
        r = np.concatenate(rs) if rs else np.zeros(0)
        if not jacobian:
            return r, None
        dr = np.concatenate(drs, axis=1) if drs else np.zeros((len(design), 0))
        return r, dr

    def target_values(self, design: Design) -> list:
        """Sampled values of every target, each of shape (A, W) ('every') or (A,) ('average')."""
        stack = self.problem.stack(design)
        out = [_engine_values(self, gi, stack, self.layer_indices(gi, stack.layers))
               for gi in range(len(self._groups))]
        res = []
        for t in self.targets:
            q, _ = _target_values(t, out[t.group][0], None)
            res.append(_band_average(t, q) if t.requirement.over == "average" else q)
        return res

    def satisfied(self, design: Design, value: float | None = None) -> bool:
        """True when every target holds at every sample with at least half the design margin
        (the least-squares search approaches a margin boundary from outside and may stop a hair
        short of it): inequalities within their accepted interval widened by half the margin,
        ``=`` targets within (1 − margin_fraction/2) × tolerance. ``value`` (the merit of
        ``design``) saves an evaluation when it is 0.
        """
        if value is not None and value <= 0.0:
            return True
        for t, q in zip(self.targets, self.target_values(design)):
            req = t.requirement
            half = 0.5 * self.margin_fraction * t.scale
            if req.op == "=":
                dev = _wrap(q - t.lo) if req.quantity == "phase" else q - t.lo
                if not np.all(np.abs(dev) <= req.tolerance * (1.0 - 0.5 * self.margin_fraction)):
                    return False
            elif not (np.all(q <= t.hi + half) and np.all(q >= t.lo - half)):
                return False
        return True

    def free_columns(self, stack_layers: int) -> slice:
        """Columns of the free layers among all front layers."""
        nb = len(self.problem.fixed_bottom)
        return slice(nb, stack_layers - len(self.problem.fixed_top))


# -- engine providers -------------------------------------------------------------------------

def _engine_call(merit: Merit, gi: int, stack, nk, derivatives: bool):
    from ..response import spectrum, spectrum_derivatives

    g = merit.groups[gi]
    fn = spectrum_derivatives if derivatives else spectrum
    res = fn(stack, g.grid, g.angles, g.polarization, layer_indices=nk)
    phase = res
    if g.phase and stack.substrate_mm is not None:
        # phase is that of the front coating on a semi-infinite substrate (as phase_response)
        from dataclasses import replace

        front = replace(stack, substrate_mm=None, back_layers=())
        phase = fn(front, g.grid, g.angles, g.polarization, layer_indices=nk)
    return res, phase


def _engine_values(merit: Merit, gi: int, stack, nk):
    res, ph = _engine_call(merit, gi, stack, nk, False)
    vals = {"R": np.asarray(res.R), "T": np.asarray(res.T), "A": np.asarray(res.A)}
    if merit.groups[gi].phase:
        vals["phase_r"] = np.angle(ph.r)
        vals["phase_t"] = np.angle(ph.t)
    return vals, None


def _engine_provider(merit: Merit, gi: int, stack, nk):
    res, ph = _engine_call(merit, gi, stack, nk, True)
    cols = merit.free_columns(len(stack.layers))
    vals = {"R": np.asarray(res.R), "T": np.asarray(res.T), "A": np.asarray(res.A)}
    ders = {"R": np.asarray(res.dR)[cols], "T": np.asarray(res.dT)[cols],
            "A": np.asarray(res.dA)[cols]}
    if merit.groups[gi].phase:
        vals["phase_r"] = np.angle(ph.r)
        vals["phase_t"] = np.angle(ph.t)
        ders["phase_r"] = np.imag(np.asarray(ph.dr)[cols] / ph.r)
        ders["phase_t"] = np.imag(np.asarray(ph.dt)[cols] / ph.t)
    return vals, ders


# -- from group responses to residuals --------------------------------------------------------

def _band_weights(wl: np.ndarray) -> np.ndarray:
    """Weights of the band mean over the sample wavelengths (W,): the trapezoid rule over
    ``[lo, hi]`` divided by its width (as ``filmstack.evaluate`` averages); [1] for one point."""
    if wl.size == 1:
        return np.ones(1)
    w = np.zeros(wl.size)
    dw = np.diff(wl)
    w[:-1] += dw / 2
    w[1:] += dw / 2
    return w / (wl[-1] - wl[0])


def _band_average(t: Target, q):
    return q @ t.avg_weights


def _target_values(t: Target, vals: dict, ders: dict | None):
    """Sampled quantity q (A, W) of target ``t`` and its derivatives (P, A, W) or None."""
    req = t.requirement
    qn = req.quantity
    sl = t.where
    if qn in ("R", "T", "A"):
        q = vals[qn][..., sl]
        dq = None if ders is None else ders[qn][..., sl]
        return q, dq
    key = "phase_r" if req.side == "reflected" else "phase_t"
    phi = vals[key][..., sl]
    dphi = None if ders is None else ders[key][..., sl]
    if qn == "phase":
        return phi, dphi
    w = t.wavelengths_nm.size
    omega = 2.0 * math.pi * SPEED_OF_LIGHT_NM_PER_FS / t.wavelengths_nm     # rad/fs
    h = PHASE_STEP * omega
    # grid layout: blocks of W at ω(1 + kδ), k = −2, −1, 0, 1, 2; phase differences to ω
    blk = {k: slice(i * w, (i + 1) * w) for i, k in enumerate(_OFFSETS)}
    p0 = phi[..., blk[0]]
    dlt = {k: _wrap(phi[..., blk[k]] - p0) for k in (-2, -1, 1, 2)}
    if dphi is not None:
        d0 = dphi[..., blk[0]]
        ddl = {k: dphi[..., blk[k]] - d0 for k in (-2, -1, 1, 2)}
    if qn == "GD":
        wts, div = {-2: 1.0, -1: -8.0, 1: 8.0, 2: -1.0}, 12.0 * h
    else:
        wts, div = {-2: -1.0, -1: 16.0, 1: 16.0, 2: -1.0}, 12.0 * h ** 2
    q = sum(c * dlt[k] for k, c in wts.items()) / div
    dq = None if dphi is None else sum(c * ddl[k] for k, c in wts.items()) / div
    return q, dq


def _target_residuals(t: Target, q, dq):
    """Residuals (N,) and their derivatives (P, N) (or None) of one target."""
    req = t.requirement
    if req.over == "average":
        q = _band_average(t, q)                       # (A,)
        if dq is not None:
            dq = dq @ t.avg_weights                   # (P, A)
    if req.op == "=":
        v = _wrap(q - t.lo) if req.quantity == "phase" else q - t.lo
        active = np.ones(np.shape(q), bool)
    else:
        v = np.where(q > t.hi, q - t.hi, np.where(q < t.lo, q - t.lo, 0.0))
        active = v != 0
    c = t.coef / t.scale
    r = (c * v).ravel()
    if dq is None:
        return r, None
    dr = np.where(active, c * dq, 0.0)
    return r, dr.reshape(dr.shape[0], -1)
