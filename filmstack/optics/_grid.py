"""Input checking, broadcasting and chunking shared by the engine's functions (private).

The engine works on a flat list of *points*: one point is one (batch element, angle, wavelength).
Points are processed in chunks of a few thousand so that the per-layer working arrays stay in the
processor's cache and peak memory stays bounded whatever the batch size. Chunks run on a small
thread pool (numpy releases the GIL inside its array loops).
"""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np

from ..errors import InputError

TWO_PI = 2.0 * np.pi

#: Points per chunk for the forward sweep (cache-sized working arrays).
CHUNK_POINTS = 8192


def _threads() -> int:
    env = os.environ.get("FILMSTACK_THREADS")
    if env:
        return max(1, int(env))
    return max(1, min(2, os.cpu_count() or 1))


def check_polarization(polarization: str) -> tuple[str, ...]:
    """The list of polarisations to compute for 's', 'p' or 'mean'."""
    if polarization == "mean":
        return ("s", "p")
    if polarization in ("s", "p"):
        return (polarization,)
    raise InputError(f"polarization must be 's', 'p' or 'mean', got {polarization!r}")


@dataclass
class Problem:
    """A validated, broadcast problem ready to be chunked.

    N_u: (nbN, U, W) complex — the distinct layer-index rows; inv: (L,) row of each layer.
    d: (nbd, L) thicknesses nm; n0: (nb0, W) real; ne: (nbe, W) complex; wl: (W,);
    sin_theta: (A,); batch: broadcast batch shape; nb: its size.
    """

    N_u: np.ndarray
    inv: np.ndarray
    d: np.ndarray
    n0: np.ndarray
    ne: np.ndarray
    wl: np.ndarray
    sin_theta: np.ndarray
    cos_theta0: np.ndarray
    batch: tuple
    nb: int
    invariant: np.ndarray | None = None

    @property
    def L(self) -> int:
        return self.inv.size

    @property
    def A(self) -> int:
        return self.sin_theta.size

    @property
    def W(self) -> int:
        return self.wl.size

    @property
    def n_points(self) -> int:
        return self.nb * self.A * self.W


def fmt(x) -> str:
    """A number for a message: plain Python repr, not numpy's (``-5.0``, not ``np.float64(-5.0)``)."""
    x = np.asarray(x).item()
    return repr(x)


def _finite(name, a):
    if not np.all(np.isfinite(a)):
        bad = a[~np.isfinite(a)].ravel()[0]
        raise InputError(f"{name} must be finite, got {fmt(bad)}")


def prepare(n_layers, thickness_nm, n_incident, n_exit, wavelength_nm, angle_deg,
            snell_invariant=None) -> Problem:
    """Validate the engine's inputs and broadcast them (see :func:`coherent_response`)."""
    wl = np.asarray(wavelength_nm, dtype=float)
    if wl.ndim == 0:
        wl = wl[None]
    if wl.ndim != 1 or wl.size == 0:
        raise InputError(f"wavelength_nm must be a non-empty 1-D array, got shape {wl.shape}")
    _finite("wavelength_nm", wl)
    if np.any(wl <= 0):
        raise InputError(f"wavelength_nm must be > 0, got {fmt(wl.min())}")
    W = wl.size

    theta = np.atleast_1d(np.asarray(angle_deg, dtype=float))
    if theta.ndim != 1 or theta.size == 0:
        raise InputError(f"angle_deg must be a scalar or a non-empty 1-D array, got shape {theta.shape}")
    _finite("angle_deg", theta)
    if np.any(theta < 0) or np.any(theta >= 90):
        bad = theta[(theta < 0) | (theta >= 90)][0]
        raise InputError(f"angle_deg must be in [0, 90) degrees, got {fmt(bad)}")
    rad = np.deg2rad(theta)
    invariant = None
    if snell_invariant is not None:
        invariant = np.broadcast_to(np.asarray(snell_invariant, dtype=float),
                                    (theta.size, wl.size))

    N = np.asarray(n_layers, dtype=complex)
    if N.ndim < 2 or N.shape[-1] != W:
        raise InputError(f"n_layers must have shape (..., L, W) with W = {W} wavelengths, "
                         f"got shape {N.shape}")
    _finite("n_layers", N)
    if np.any(N.imag < 0):
        raise InputError(f"n_layers: k must be >= 0 (absorption), got k = {fmt(N.imag.min())}")
    if np.any(N.real <= 0):
        raise InputError(f"n_layers: n must be > 0, got n = {fmt(N.real.min())}")
    L = N.shape[-2]

    d = np.asarray(thickness_nm, dtype=float)
    if d.ndim < 1 or d.shape[-1] != L:
        raise InputError(f"thickness_nm must have shape (..., L) with L = {L} layers, got shape {d.shape}")
    _finite("thickness_nm", d)
    if np.any(d < 0):
        raise InputError(f"thickness_nm must be >= 0, got {fmt(d.min())}")

    n0 = np.asarray(n_incident, dtype=complex)
    if n0.ndim == 0:
        n0 = np.broadcast_to(n0, (W,))
    if n0.shape[-1] != W:
        raise InputError(f"n_incident must be a scalar or have shape (..., W), got {n0.shape}")
    _finite("n_incident", n0)
    if np.any(n0.imag != 0) or np.any(n0.real <= 0):
        raise InputError("n_incident must be real and > 0: the incident medium cannot absorb")
    ne = np.asarray(n_exit, dtype=complex)
    if ne.ndim == 0:
        ne = np.broadcast_to(ne, (W,))
    if ne.shape[-1] != W:
        raise InputError(f"n_exit must be a scalar or have shape (..., W), got {ne.shape}")
    _finite("n_exit", ne)
    if np.any(ne.imag < 0) or np.any(ne.real <= 0):
        raise InputError("n_exit must have n > 0 and k >= 0")

    try:
        batch = np.broadcast_shapes(N.shape[:-2], d.shape[:-1], n0.shape[:-1], ne.shape[:-1])
    except ValueError:
        raise InputError(f"batch dimensions do not broadcast: n_layers {N.shape[:-2]}, "
                         f"thickness_nm {d.shape[:-1]}, n_incident {n0.shape[:-1]}, "
                         f"n_exit {ne.shape[:-1]}") from None
    nb = int(np.prod(batch)) if batch else 1

    def flat(a, core):
        """(…, core) → (1 or nb, core)."""
        if a.shape[:a.ndim - len(core)] == ():
            return a.reshape((1,) + core)
        return np.broadcast_to(a, batch + core).reshape((nb,) + core)

    Nf = flat(N, (L, W))
    # Distinct layer rows (layers of one material share their angle terms).
    inv = np.zeros(L, dtype=np.intp)
    rows: list[int] = []
    if L:
        seen: dict[bytes, int] = {}
        for j in range(L):
            key = np.ascontiguousarray(Nf[:, j, :]).tobytes()
            if key not in seen:
                seen[key] = len(rows)
                rows.append(j)
            inv[j] = seen[key]
    N_u = np.ascontiguousarray(Nf[:, rows, :]) if L else Nf[:, :0, :]
    return Problem(N_u=N_u, inv=inv, d=np.ascontiguousarray(flat(d, (L,))),
                   n0=np.ascontiguousarray(flat(n0.real, (W,))),
                   ne=np.ascontiguousarray(flat(ne, (W,))), wl=wl,
                   sin_theta=np.sin(rad), cos_theta0=np.cos(rad), batch=batch, nb=nb,
                   invariant=invariant)


def normal_index(N, s0):
    """N·cosθ = sqrt(N² − s0²) on the branch with Im ≥ 0 (decaying or power-carrying wave).

    Parameters: N complex index, s0 = n0·sinθ0 the Snell invariant (broadcastable arrays).
    References: Born & Wolf, Principles of Optics, §1.5 (Snell's law with complex angles).
    """
    q = np.sqrt(N * N - s0 * s0)
    return np.where((q.imag < 0) | ((q.imag == 0) & (q.real < 0)), -q, q)


def tilted_admittance(N, q, pol):
    """Tilted admittance in units of the free-space admittance: η_s = N cosθ, η_p = N / cosθ."""
    return q if pol == "s" else N * N / q


def point_chunks(problem: Problem, chunk: int | None = None):
    """Yield (start, stop) ranges of the flat point index (batch, angle, wavelength).

    ``chunk`` points per range; None reads :data:`CHUNK_POINTS` at call time.
    """
    if chunk is None:
        chunk = CHUNK_POINTS
    P = problem.n_points
    for start in range(0, P, chunk):
        yield start, min(P, start + chunk)


def chunk_terms(problem: Problem, start: int, stop: int, pols):
    """Angle terms of one chunk of points.

    Returns a dict with: ``b`` (X,) batch index, ``w`` (X,) wavelength index, ``kz_u`` (U, X)
    normal wavenumbers of the distinct layer rows [rad/nm], ``eta_u`` {pol: (U, X)}, ``eta0``
    {pol: (X,)}, ``etae`` {pol: (X,)}, ``q0`` (X,), ``qe`` (X,), ``Ne`` (X,), ``s0`` (X,),
    ``d`` (L, X) or (L, 1) thicknesses.
    """
    p = np.arange(start, stop)
    A, W = problem.A, problem.W
    b = p // (A * W)
    a = (p // W) % A
    w = p % W
    n0 = problem.n0[b if problem.n0.shape[0] > 1 else 0, w]
    if problem.invariant is None:
        s0 = n0 * problem.sin_theta[a]
        q0 = n0 * problem.cos_theta0[a]
    else:  # light arriving from inside a substrate: the invariant n0 sinθ0 of the outer medium
        s0 = problem.invariant[a, w]
        q0 = np.sqrt(np.maximum(n0 * n0 - s0 * s0, 1e-30))
    bN = b if problem.N_u.shape[0] > 1 else np.zeros_like(b)
    Nu = problem.N_u[bN, :, w].T                     # (U, X)
    qu = normal_index(Nu, s0)
    k0 = TWO_PI / problem.wl[w]
    Ne = problem.ne[b if problem.ne.shape[0] > 1 else 0, w]
    qe = normal_index(Ne, s0)
    if problem.d.shape[0] > 1:
        d = problem.d[b].T                           # (L, X)
    else:
        d = problem.d[0][:, None]                    # (L, 1)
    out = {"b": b, "a": a, "w": w, "kz_u": qu * k0, "q0": q0, "qe": qe, "Ne": Ne, "s0": s0,
           "n0": n0, "d": d, "eta_u": {}, "eta0": {}, "etae": {}, "Nu": Nu}
    for pol in pols:
        out["eta_u"][pol] = tilted_admittance(Nu, qu, pol)
        out["eta0"][pol] = q0 if pol == "s" else n0 * n0 / q0
        out["etae"][pol] = tilted_admittance(Ne, qe, pol)
    return out


def run_chunks(func, problem: Problem, chunk: int | None = None):
    """Call ``func(start, stop)`` for every chunk, on a small thread pool; returns nothing.

    ``chunk`` points per chunk; None reads :data:`CHUNK_POINTS` at call time.
    """
    ranges = list(point_chunks(problem, chunk))
    n = _threads()
    if n == 1 or len(ranges) == 1:
        for r in ranges:
            func(*r)
        return
    with ThreadPoolExecutor(max_workers=n) as pool:
        for f in [pool.submit(func, *r) for r in ranges]:
            f.result()
