"""Model values and Jacobian of a fit, for a batch of parameter vectors (private).

The measured points of one :class:`~filmstack.io.measured.Measurement` (all its channels, in
order) form a vector of length M. :class:`Evaluator` computes the model at those points for a
batch of parameter vectors ``X`` of shape (S, P) — the sites of a wafer map, or the grid of the
global search — through the engine's batch dimensions:

- thickness derivatives come from :func:`filmstack.response.spectrum_derivatives` (analytic);
- index parameters (scale, Cauchy) from one batched forward call in which the real index of each
  parametrised material is raised by ``H_INDEX`` (a forward difference; the chain rule then gives
  ∂/∂s = n₀ ∂/∂n, ∂/∂A = ∂/∂n, ∂/∂B = λ⁻² ∂/∂n, ∂/∂C = λ⁻⁴ ∂/∂n (λ in µm), since the value at λ depends
  only on n(λ));
- a wavelength shift from a forward difference of ``H_SHIFT_NM``;
- a photometric scale c exactly: ∂(c·Q)/∂c = Q.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .parameters import FitModel

H_INDEX = 1e-6
H_SHIFT_NM = 1e-3


@dataclass
class _Group:
    """The channels measured in one polarisation, on the union of their angles/wavelengths."""

    pol: str
    wl: np.ndarray          # (Wu,)
    angles: np.ndarray      # (Au,)
    parts: list             # (offset, n, ia, iw (n,), quantity)


class Evaluator:
    """Model values at the measured points for batches of parameter vectors.

    Parameters
    ----------
    model
        The fit model.
    channels
        The measured channels (sequence of :class:`~filmstack.io.measured.Channel`); only their
        quantity, angle, polarisation and wavelengths are used.
    """

    def __init__(self, model: FitModel, channels):
        self.model = model
        self.n_points = 0
        groups: dict[str, list] = {}
        for c in channels:
            key = "mean0" if c.polarization == "mean" and c.angle_deg == 0.0 else c.polarization
            groups.setdefault(key, []).append((self.n_points, c))
            self.n_points += c.wavelength_nm.size
        self.groups: list[_Group] = []
        for pol, items in groups.items():
            if pol == "mean0":
                # At normal incidence s and p coincide (η_p = N/cosθ = η_s = N cosθ there), so
                # the unpolarised mean is the s value: half the work.
                pol = "s"
            wl = np.unique(np.concatenate([c.wavelength_nm for _, c in items]))
            angles = np.unique([c.angle_deg for _, c in items])
            parts = [(off, c.wavelength_nm.size, int(np.searchsorted(angles, c.angle_deg)),
                      np.searchsorted(wl, c.wavelength_nm), c.quantity) for off, c in items]
            self.groups.append(_Group(pol, wl, angles, parts))
        self.wavelength_nm = np.concatenate([c.wavelength_nm for c in channels])
        self._thick = model.of_kind("thickness")
        self._shift = model.of_kind("shift")
        self._scale = model.of_kind("scale")
        self._index_groups = model.index_groups()
        self._base: dict = {}

    # -- helpers ---------------------------------------------------------------------------
    def _base_indices(self, wl: np.ndarray) -> np.ndarray:
        key = wl.tobytes()
        if key not in self._base:
            if len(self._base) > 8:
                self._base.clear()
            self._base[key] = self.model.stack.layer_indices(wl)
        return self._base[key]

    def _gather(self, g: _Group, Q: dict, out: np.ndarray) -> None:
        """Copy Q[quantity][..., ia, iw] (batch dims first) into out[..., offset:offset+n]."""
        for off, n, ia, iw, q in g.parts:
            out[..., off:off + n] = Q[q][..., ia, iw]

    def _call(self, wl, g: _Group, d, N, derivatives: bool):
        from ..response import spectrum, spectrum_derivatives

        fn = spectrum_derivatives if derivatives else spectrum
        return fn(self.model.stack, wl, g.angles, g.pol, thicknesses_nm=d, layer_indices=N)

    # -- evaluation ------------------------------------------------------------------------
    def __call__(self, X, jac: bool = False):
        """Model values F (S, M) and, with ``jac``, the Jacobian J (S, M, P) at ``X`` (S, P)."""
        X = np.atleast_2d(np.asarray(X, dtype=float))
        S, P = X.shape
        F = np.empty((S, self.n_points))
        J = np.zeros((S, self.n_points, P)) if jac else None
        if self._shift:
            shifts = X[:, self._shift[0]]
            uniq, inv = np.unique(shifts, return_inverse=True)
            for u, value in enumerate(uniq):
                sel = np.nonzero(inv == u)[0]
                Fs, Js = self._eval(X[sel], float(value), jac)
                F[sel] = Fs
                if jac:
                    J[sel] = Js
        else:
            F, J = self._eval(X, 0.0, jac)
        return F, J

    def _eval(self, X, shift: float, jac: bool):
        model = self.model
        S, P = X.shape
        F = np.empty((S, self.n_points))
        J = np.zeros((S, self.n_points, P)) if jac else None
        d = model.thicknesses(X)                                     # (S, L)
        for g in self.groups:
            wl = g.wl + shift
            N0 = self._base_indices(wl) if self._index_groups else None
            N = model.layer_indices(X, wl, base=N0)                  # (S, L, W) or None
            need_d = jac and bool(self._thick)
            res = self._call(wl, g, d, N, need_d)
            Q = {"R": np.asarray(res.R), "T": np.asarray(res.T)}
            self._gather(g, Q, F)
            if not jac:
                continue
            if self._thick:
                dQ = {"R": np.asarray(res.dR), "T": np.asarray(res.dT)}   # (S, L, A, W)
                for j in self._thick:
                    p = model.parameters[j]
                    Qj = {q: v[:, p.layers[0]] * p.nm_per_unit for q, v in dQ.items()}
                    self._gather_col(g, Qj, J, j)
            if self._index_groups:
                self._index_jacobian(X, g, wl, d, N, N0, Q, J)
            if self._shift:
                N1 = model.layer_indices(X, wl + H_SHIFT_NM)
                r1 = self._call(wl + H_SHIFT_NM, g, d, N1, False)
                Q1 = {"R": (np.asarray(r1.R) - Q["R"]) / H_SHIFT_NM,
                      "T": (np.asarray(r1.T) - Q["T"]) / H_SHIFT_NM}
                self._gather_col(g, Q1, J, self._shift[0])
        if self._scale:
            c = X[:, self._scale[0]][:, None]
            if jac:
                J *= c[..., None]
                J[:, :, self._scale[0]] = F
            F = F * c
        return F, J

    def _gather_col(self, g: _Group, Q: dict, J: np.ndarray, j: int) -> None:
        for off, n, ia, iw, q in g.parts:
            J[:, off:off + n, j] = Q[q][..., ia, iw]

    def _index_jacobian(self, X, g, wl, d, N, N0, Q, J) -> None:
        """Columns of J for index parameters via one batched, perturbed forward call."""
        groups = [grp for grp in self._index_groups if grp["params"]]
        if not groups:
            return
        S = X.shape[0]
        G = len(groups)
        Np = np.broadcast_to(N[:, None], (S, G) + N.shape[1:]).copy()   # (S, G, L, W)
        for k, grp in enumerate(groups):
            Np[:, k, list(grp["layers"]), :] += H_INDEX
        dp = np.broadcast_to(d[:, None, :], (S, G, d.shape[-1]))
        res = self._call(wl, g, dp, Np, False)
        for k, grp in enumerate(groups):
            dn = {q: (np.asarray(getattr(res, q))[:, k] - Q[q]) / H_INDEX for q in ("R", "T")}
            n0 = N0[grp["layers"][0]].real                                   # (W,)
            for coef, j in grp["params"].items():
                um = wl * 1e-3                                     # λ in µm
                factor = {"s": n0, "A": 1.0, "B": um**-2.0, "C": um**-4.0}[coef]
                self._gather_col(g, {q: v * factor for q, v in dn.items()}, J, j)
