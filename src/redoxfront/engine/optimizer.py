"""Geometry optimisation on the engine interface.

Rational-function optimisation (RFO; Banerjee, Adams, Simons & Shepard, J. Phys.
Chem. 1985, 89, 52) in Cartesian coordinates with a trust radius and BFGS updates,
started from the Lindh model Hessian (Lindh, Bernhardsson, Karlström & Malmqvist,
Chem. Phys. Lett. 1995, 241, 423). The model Hessian carries the bond, angle and
torsion curvature of the molecule, so the first steps are already close to
Newton steps; this is where most of the saving over a plain quasi-Newton start
with a unit Hessian comes from.

Units: bohr and Hartree inside; the engine interface takes Angstrom.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import scipy.linalg
import scipy.linalg.lapack

from redoxfront.campaign import OptimizerSettings
from redoxfront.engine.xtb import Engine, EngineResult
from redoxfront.units import ANGSTROM_BOHR, BOHR_ANGSTROM

# Lindh 1995 model Hessian parameters (atomic units), rows = periods 1, 2, >=3.
_LINDH_ALPHA = np.array([[1.0000, 0.3949, 0.3949], [0.3949, 0.2800, 0.2800], [0.3949, 0.2800, 0.2800]])
_LINDH_RREF = np.array([[1.35, 2.10, 2.53], [2.10, 2.87, 3.40], [2.53, 3.40, 3.40]])
_LINDH_K_STRETCH, _LINDH_K_BEND, _LINDH_K_TORSION = 0.45, 0.15, 0.005
_NEIGHBOUR_RHO = 0.05  # pairs with rho above this span angles and torsions
_REBUILD_EVERY = 25  # optimisation steps between refreshes of the internal modes


def _period_index(numbers: np.ndarray) -> np.ndarray:
    z = np.asarray(numbers)
    return np.where(z <= 2, 0, np.where(z <= 10, 1, 2))


def lindh_rho(numbers: np.ndarray, coords_bohr: np.ndarray) -> np.ndarray:
    """Pair factors rho_ij = exp(alpha_ij (r_ref,ij^2 - r_ij^2)) of the Lindh model."""
    p = _period_index(numbers)
    alpha = _LINDH_ALPHA[p[:, None], p[None, :]]
    rref = _LINDH_RREF[p[:, None], p[None, :]]
    d2 = ((coords_bohr[:, None, :] - coords_bohr[None, :, :]) ** 2).sum(-1)
    rho = np.exp(alpha * (rref**2 - d2))
    np.fill_diagonal(rho, 0.0)
    return rho


def _stretch_b(x: np.ndarray, i: np.ndarray, j: np.ndarray) -> np.ndarray:
    u = x[i] - x[j]
    u /= np.linalg.norm(u, axis=1)[:, None]
    return np.stack([u, -u], axis=1)


def _bend_b(x: np.ndarray, i: np.ndarray, j: np.ndarray, k: np.ndarray):
    u, v = x[i] - x[j], x[k] - x[j]
    lu, lv = np.linalg.norm(u, axis=1), np.linalg.norm(v, axis=1)
    uh, vh = u / lu[:, None], v / lv[:, None]
    cos = np.clip((uh * vh).sum(1), -1.0, 1.0)
    sin = np.sqrt(1.0 - cos**2)
    ok = sin > 1e-3
    sin = np.where(ok, sin, 1.0)
    gi = (cos[:, None] * uh - vh) / (lu * sin)[:, None]
    gk = (cos[:, None] * vh - uh) / (lv * sin)[:, None]
    return np.stack([gi, -(gi + gk), gk], axis=1), ok


def _torsion_b(x: np.ndarray, i, j, k, l):
    # Blondel & Karplus, J. Comput. Chem. 1996, 17, 1132: singularity-free torsion derivatives.
    f, g, h = x[i] - x[j], x[j] - x[k], x[l] - x[k]
    a, b = np.cross(f, g), np.cross(h, g)
    a2, b2 = (a * a).sum(1), (b * b).sum(1)
    lg = np.linalg.norm(g, axis=1)
    ok = (a2 > 1e-6) & (b2 > 1e-6)
    a2, b2 = np.where(ok, a2, 1.0), np.where(ok, b2, 1.0)
    fg = ((f * g).sum(1) / (a2 * lg))[:, None]
    hg = ((h * g).sum(1) / (b2 * lg))[:, None]
    gi = -(lg / a2)[:, None] * a
    gl = (lg / b2)[:, None] * b
    gj = (lg / a2)[:, None] * a + fg * a - hg * b
    gk = -(lg / b2)[:, None] * b - fg * a + hg * b
    return np.stack([gi, gj, gk, gl], axis=1), ok


def _accumulate(h: np.ndarray, atoms: np.ndarray, grads: np.ndarray, weights: np.ndarray) -> None:
    """H += sum_t w_t b_t b_t^T for terms t with atoms (T, m) and B rows (T, m, 3)."""
    if atoms.size == 0:
        return
    t, m = atoms.shape
    idx = (3 * atoms[:, :, None] + np.arange(3)).reshape(t, 3 * m)
    b = grads.reshape(t, 3 * m)
    outer = weights[:, None, None] * b[:, :, None] * b[:, None, :]
    np.add.at(h, (idx[:, :, None], idx[:, None, :]), outer)


def lindh_hessian(numbers: np.ndarray, coords_bohr: np.ndarray) -> np.ndarray:
    """Lindh (1995) model Hessian in Cartesian coordinates, Eh/bohr^2, shape (3N, 3N)."""
    x = np.asarray(coords_bohr, dtype=float)
    n = len(x)
    h = np.zeros((3 * n, 3 * n))
    rho = lindh_rho(numbers, x)
    # stretches over all pairs with non-negligible rho
    i, j = np.nonzero(np.triu(rho > 1e-4, 1))
    _accumulate(h, np.stack([i, j], 1), _stretch_b(x, i, j), _LINDH_K_STRETCH * rho[i, j])
    # bends i-j-k over neighbour pairs (j the centre)
    near = rho > _NEIGHBOUR_RHO
    nb = [np.flatnonzero(near[a]) for a in range(n)]
    tri = [(a, c, b) for c in range(n) for ai, a in enumerate(nb[c]) for b in nb[c][ai + 1:]]
    if tri:
        t = np.array(tri)
        g, ok = _bend_b(x, t[:, 0], t[:, 1], t[:, 2])
        w = _LINDH_K_BEND * rho[t[:, 0], t[:, 1]] * rho[t[:, 1], t[:, 2]]
        _accumulate(h, t[ok], g[ok], w[ok])
    # torsions i-j-k-l around neighbour pairs j-k
    quads = [
        (a, c, d, b)
        for c in range(n)
        for d in nb[c]
        if d > c
        for a in nb[c]
        if a != d
        for b in nb[d]
        if b != c and b != a
    ]
    if quads:
        q = np.array(quads)
        g, ok = _torsion_b(x, q[:, 0], q[:, 1], q[:, 2], q[:, 3])
        w = _LINDH_K_TORSION * rho[q[:, 0], q[:, 1]] * rho[q[:, 1], q[:, 2]] * rho[q[:, 2], q[:, 3]]
        _accumulate(h, q[ok], g[ok], w[ok])
    return h


def _rigid_body_basis(x: np.ndarray) -> np.ndarray:
    """Orthonormal basis (3N, <=6) of translations and infinitesimal rotations."""
    n = len(x)
    c = x - x.mean(0)
    vecs = []
    for axis in range(3):
        t = np.zeros((n, 3))
        t[:, axis] = 1.0
        vecs.append(t.ravel())
        r = np.cross(np.eye(3)[axis], c)
        vecs.append(r.ravel())
    q, s, _ = np.linalg.svd(np.array(vecs).T, full_matrices=False)
    return q[:, s > 1e-6 * s.max()]


def is_converged(
    settings: OptimizerSettings, gradient: np.ndarray, step: np.ndarray, energy_change: float | None
) -> bool:
    """Convergence test shared by our optimiser and the baseline (Eh, bohr).

    Max and RMS force below threshold, and either max and RMS step below threshold
    or the last energy change below ``energy_change_eh``; or the max force 100 times
    below its threshold.
    """
    fmax, frms = np.abs(gradient).max(), np.sqrt((gradient**2).mean())
    if fmax < settings.max_force_eh_per_bohr / 100.0:
        return True
    if fmax >= settings.max_force_eh_per_bohr or frms >= settings.rms_force_eh_per_bohr:
        return False
    small_step = (np.abs(step).max() < settings.max_step_bohr
                  and np.sqrt((step**2).mean()) < settings.rms_step_bohr)
    flat = energy_change is not None and abs(energy_change) < settings.energy_change_eh
    return bool(small_step or flat)


def rfo_step(hessian: np.ndarray, gradient: np.ndarray) -> np.ndarray:
    """Rational-function step: from the lowest eigenvector v of [[H, g], [g, 0]], dq = v[:-1] / v[-1].

    Only the lowest eigenpair is computed (LAPACK's MRRR driver), which is the whole
    per-step linear algebra of the optimiser (Banerjee et al., J. Phys. Chem. 1985, 89, 52).
    """
    m = len(gradient)
    aug = np.empty((m + 1, m + 1))
    aug[:m, :m] = hessian
    aug[:m, m] = aug[m, :m] = gradient
    aug[m, m] = 0.0
    # LAPACK dsyevr directly (scipy.linalg.eigh adds a workspace query per call)
    _, vec, _, _, info = scipy.linalg.lapack.dsyevr(aug, range="I", il=1, iu=1, overwrite_a=1)
    if info != 0:
        raise np.linalg.LinAlgError(f"dsyevr failed in the RFO step (info {info})")
    v = vec[:, 0]
    if abs(v[m]) < 1e-10:  # step would be unbounded: fall back to steepest descent
        return -gradient
    return v[:m] / v[m]


def internal_modes(numbers: np.ndarray, coords_bohr: np.ndarray, hessian: np.ndarray,
                   floor: float = 1e-3) -> tuple[np.ndarray, np.ndarray]:
    """Approximate normal coordinates: eigenvectors of the Hessian without rigid-body motion.

    Returns (V, w): V (3N, 3N - 6 or 3N - 5) orthonormal internal modes, w their
    curvatures (Eh/bohr^2) floored at ``floor``. Optimising in this fixed basis avoids a
    projection and a full diagonalisation at every step (approximate normal coordinates:
    Eckert, Pulay & Werner, J. Comput. Chem. 1997, 18, 1473; from memory).
    """
    x = np.asarray(coords_bohr, dtype=float).reshape(-1, 3)
    n3 = x.size
    rb = _rigid_body_basis(x)
    proj = np.eye(n3) - rb @ rb.T
    w, v = np.linalg.eigh(proj @ hessian @ proj)
    keep = np.sort(np.argsort(np.abs(v.T @ rb).sum(1))[: n3 - rb.shape[1]])
    return v[:, keep], np.maximum(w[keep], floor)


@dataclass(frozen=True)
class OptimizationResult:
    """Outcome of one optimisation. Positions Angstrom; energies Eh."""

    positions_angstrom: np.ndarray
    result: EngineResult
    gradient_calls: int
    converged: bool
    iterations: int


def optimize_geometry(
    engine: Engine,
    numbers: np.ndarray,
    positions_angstrom: np.ndarray,
    charge: int,
    uhf: int,
    settings: OptimizerSettings = OptimizerSettings(),
    *,
    spin_polarized: bool = False,
    initial: EngineResult | None = None,
) -> OptimizationResult:
    """Minimise the engine energy from ``positions_angstrom`` by trust-radius RFO.

    Steps are taken in approximate normal coordinates of the Lindh model Hessian,
    updated by BFGS. Convergence (Eh, bohr): :func:`is_converged` with the
    :class:`~redoxfront.campaign.OptimizerSettings` thresholds. ``initial``: the
    engine result at the start geometry when it is already known (same state and
    settings); it is used instead of a first call. ``gradient_calls`` counts the gradient
    evaluations the path took, the start point included whoever computed it, so it does not
    depend on whether the start point was known. Each point's SCC starts from the previous
    point's wavefunction (``guess``): the path depends only on the start geometry.
    """
    numbers = np.asarray(numbers)
    x = np.asarray(positions_angstrom, dtype=float).ravel() * ANGSTROM_BOHR
    modes, w = internal_modes(numbers, x, lindh_hessian(numbers, x.reshape(-1, 3)))
    hq = np.diag(w)
    trust = settings.trust_radius_bohr
    if initial is None:
        # at the geometry as given, not its bohr round trip: the same point, to the last bit,
        # as an ``initial`` result computed there by someone else
        res = engine.compute(numbers, np.asarray(positions_angstrom, dtype=float), charge, uhf,
                             spin_polarized=spin_polarized)
        calls = 1
    else:
        res, calls = initial, 1
    converged = False
    it = 0
    last_change: float | None = None
    for it in range(1, settings.max_iterations + 1):
        if w.size == 0:  # a single atom has nothing to optimise
            converged = True
            break
        if it % _REBUILD_EVERY == 0:  # refresh the modes at the current geometry
            modes, w = internal_modes(numbers, x, modes @ hq @ modes.T)
            hq = np.diag(w)
        g = res.gradient_eh_per_bohr.ravel()
        gq = modes.T @ g
        dq = rfo_step(hq, gq)
        norm = np.linalg.norm(dq)
        if norm > trust:
            dq *= trust / norm
        step = modes @ dq
        predicted = gq @ dq + 0.5 * dq @ hq @ dq
        if is_converged(settings, modes @ gq, step, last_change):
            converged = True
            break
        x_new = x + step
        new = engine.compute(numbers, x_new.reshape(-1, 3) * BOHR_ANGSTROM, charge, uhf,
                             spin_polarized=spin_polarized, guess=res)
        calls += 1
        actual = new.energy_eh - res.energy_eh
        last_change = actual
        ratio = actual / predicted if predicted < 0 else -1.0
        if ratio < 0.25:
            trust = max(0.25 * np.linalg.norm(dq), 0.01)
        elif ratio > 0.75 and np.linalg.norm(dq) > 0.8 * trust:
            trust = min(2.0 * trust, 1.0)
        # BFGS update in the mode basis; skipped when the curvature condition fails
        y = modes.T @ new.gradient_eh_per_bohr.ravel() - gq
        sy = dq @ y
        if sy > 1e-10:
            hs = hq @ dq
            hq = hq + np.outer(y, y) / sy - np.outer(hs, hs) / (dq @ hs)
        x, res = x_new, new
    return OptimizationResult(
        positions_angstrom=x.reshape(-1, 3) * BOHR_ANGSTROM,
        result=res,
        gradient_calls=calls,
        converged=converged,
        iterations=it,
    )


def optimize_geometry_lbfgs_baseline(
    engine: Engine,
    numbers: np.ndarray,
    positions_angstrom: np.ndarray,
    charge: int,
    uhf: int,
    settings: OptimizerSettings = OptimizerSettings(),
) -> OptimizationResult:
    """Plain scipy L-BFGS in Cartesians with the same convergence test (benchmark baseline).

    Each L-BFGS iteration is checked with :func:`is_converged` on the gradient at the
    new point, the step just taken and the energy change; scipy's own tests are set
    so tight that only this one stops it.
    """
    from scipy.optimize import minimize

    numbers = np.asarray(numbers)
    seen: dict[bytes, EngineResult] = {}
    state: dict[str, Any] = {"x": None, "e": None}

    last: dict[str, EngineResult | None] = {"r": None}

    def fun(xf: np.ndarray):
        r = engine.compute(numbers, xf.reshape(-1, 3) * BOHR_ANGSTROM, charge, uhf, guess=last["r"])
        last["r"] = r
        seen.clear()
        seen[xf.tobytes()] = r
        return r.energy_eh, r.gradient_eh_per_bohr.ravel()

    def check(intermediate_result) -> None:
        x = intermediate_result.x
        r = seen.get(x.tobytes())
        if r is not None and state["x"] is not None:
            step, change = x - state["x"], r.energy_eh - state["e"]
            if is_converged(settings, r.gradient_eh_per_bohr.ravel(), step, change):
                raise StopIteration
        state["x"], state["e"] = x.copy(), float(intermediate_result.fun)

    x0 = np.asarray(positions_angstrom, dtype=float).ravel() * ANGSTROM_BOHR
    state["x"], state["e"] = x0.copy(), fun(x0)[0]
    out = minimize(
        fun, x0, jac=True, method="L-BFGS-B", callback=check,
        options={"gtol": 1e-12, "ftol": 1e-16, "maxiter": 10 * settings.max_iterations},
    )
    final = seen.get(out.x.tobytes()) or engine.compute(numbers, out.x.reshape(-1, 3) * BOHR_ANGSTROM, charge, uhf)
    return OptimizationResult(
        positions_angstrom=out.x.reshape(-1, 3) * BOHR_ANGSTROM,
        result=final,
        gradient_calls=int(out.nfev) + 1,
        converged=bool(np.abs(final.gradient_eh_per_bohr).max() < settings.max_force_eh_per_bohr),
        iterations=int(out.nit),
    )
