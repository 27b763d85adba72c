"""The reference solver's numerical core: the nonlinear Poisson equation of a p-core/n-shell
cylinder (n-core designs are solved as their mirror image), batched over designs.

Unknown y(r) = E_F - E_v(r) [eV]; with E_F = 0 it equals the electrostatic potential up to a
constant. Poisson in a cylinder (docs/physics.md section 8):

    (1/r) d/dr (eps r dy/dr) = -q (p - n + N_net),   p = N_v F(-y/kT),  n = N_c F((y - E_g)/kT)

with F = F_1/2 (Fermi-Dirac) or exp (Boltzmann), dy/dr = 0 on the axis and
eps dy/dr = sigma_s = -q D_it (y(R) - E_cnl) at the surface (Gauss's law, wire neutral as a
whole; Sze & Ng, Physics of Semiconductor Devices, 3rd ed., sec. 8.2 for the surface-state
charge). Discretisation: vertex-centred finite volumes with faces at the midpoints and face
areas proportional to r (so charge is conserved exactly; S. Selberherr, Analysis and Simulation
of Semiconductor Devices, Springer 1984, sec. 6.1), dopant charge integrated exactly over each
control volume. Incomplete ionisation (``_ionisation``, docs/physics.md section 4.1): where ``p``
holds the dopant levels (core_E, core_g, core_s, shell_E, shell_g, shell_s), N_A and N_D are
scaled by the ionised fraction at each node's y (acceptor core: x = (y - E_i)/kT; donor shell:
x = (E_g - E_i - y)/kT), its y-derivative entering the Jacobian's diagonal. Newton's method with the tridiagonal Jacobian, each node's update limited to
``STEP_LIMIT_KT`` kT; converged designs (``Y_TOL``) leave the working set.
"""

from __future__ import annotations

import numpy as np

from .._constants import Q
from .._ionisation import unionised

from ._occupancy import occupancy
from ._tridiag import solve_tridiagonal

STEP_LIMIT_KT = 10.0  #: largest change of y per node and Newton step, in units of kT
#: converged when every node's Newton update is below ``Y_TOL`` [V] and at most ``CONTRACTION`` times
#: the step before (a Newton sequence that contracts: the error left after that update is at most
#: step * rho / (1 - rho) for a contraction rho, and of order step^2 in Newton's quadratic regime;
#: measured <= 3.8e-11 V on V_bi against updates below 1e-9 V, 11 % fewer steps), or below ``Y_TOL_ANY``
Y_TOL = 1e-6
CONTRACTION = 0.01
Y_TOL_ANY = 1e-9
MAX_ITER = 200  #: Newton iterations before a design is declared not converged


def control_volumes(r, a, b):
    """Control-volume data of grid ``r`` (N, B) [m]: volumes per radian and length V = r dr
    integrated [m^2], face coefficients r_face / dr [1] and the exact integral of the doping
    sign pattern over each volume: core (r < a) and shell (r > b) areas [m^2]."""
    rh = 0.5 * (r[1:] + r[:-1])  # faces (N-1, B)
    lo = np.vstack([np.zeros_like(r[:1]), rh])
    hi = np.vstack([rh, r[-1:]])
    vol = 0.5 * (hi * hi - lo * lo)
    core = 0.5 * (np.minimum(hi, a) ** 2 - np.minimum(lo, a) ** 2)
    shell = 0.5 * (np.maximum(hi, b) ** 2 - np.maximum(lo, b) ** 2)
    face = rh / np.diff(r, axis=0)
    return vol, face, core, shell


def carriers(y, p, statistics):
    """Hole and electron densities [m^-3] and their derivatives in y [m^-3/eV]."""
    kt = p["kT"]
    fp, dfp = occupancy(-y / kt, statistics)
    fn, dfn = occupancy((y - p["Eg"]) / kt, statistics)
    return p["Nv"] * fp, -p["Nv"] * dfp / kt, p["Nc"] * fn, p["Nc"] * dfn / kt


def dopant_charge(y, p):
    """Ionised dopant charge per node over q [m^-2 per radian], N_D+ shell - N_A- core areas,
    and its derivative in y [m^-2/eV]; full ionisation (derivative 0) unless ``p`` holds the
    dopant levels."""
    fixed = p["ND"] * p["shell"] - p["NA"] * p["core"]
    if "core_s" not in p:
        return fixed, 0.0
    kt = p["kT"]
    uc, duc = unionised((y - p["core_E"]) / kt, p["core_g"], p["core_s"])  # acceptor core (frame)
    us, dus = unionised((p["Eg"] - p["shell_E"] - y) / kt, p["shell_g"], p["shell_s"])  # donor shell
    charge = p["ND"] * p["shell"] * (1.0 - us) - p["NA"] * p["core"] * (1.0 - uc)
    return charge, (p["ND"] * p["shell"] * dus + p["NA"] * p["core"] * duc) / kt


def ionised(y, p):
    """Ionised acceptors (core) and donors (shell) [m^-3] at the nodes of y: N_A, N_D themselves
    under full ionisation, else scaled by the ionised fraction at each node's y."""
    if "core_s" not in p:
        return p["NA"], p["ND"]
    kt = p["kT"]
    uc, _ = unionised((y - p["core_E"]) / kt, p["core_g"], p["core_s"])
    us, _ = unionised((p["Eg"] - p["shell_E"] - y) / kt, p["shell_g"], p["shell_s"])
    return p["NA"] * (1.0 - uc), p["ND"] * (1.0 - us)


def residual(y, p, statistics, jacobian=True):
    """Finite-volume residual G [C/m per radian] of every node and, optionally, the
    tridiagonal Jacobian (lower, diag, upper)."""
    eps, face = p["eps"], p["face"]
    hole, dhole, elec, delec = carriers(y, p, statistics)
    flux = eps * face * np.diff(y, axis=0)  # eps r dy/dr at each face
    dop, ddop = dopant_charge(y, p)
    G = Q * (p["vol"] * (hole - elec) + dop)
    G[:-1] += flux
    G[1:] -= flux
    G[-1] += p["R"] * (-Q * p["Dit"] * (y[-1] - p["Ecnl"]))
    if not jacobian:
        return G
    c = eps * face
    diag = Q * (p["vol"] * (dhole - delec) + ddop)
    diag[:-1] -= c
    diag[1:] -= c
    diag[-1] -= p["R"] * Q * p["Dit"]
    lower = np.vstack([np.zeros_like(c[:1]), c])
    upper = np.vstack([c, np.zeros_like(c[:1])])
    return G, lower, diag, upper


def newton(y0, p, statistics, max_iter=MAX_ITER, tol=None, tridiagonal="cyclic-reduction"):
    """Solve for y (N, B) from ``y0``. ``p``: dict of per-design arrays, (B,) or (N, B).
    ``tridiagonal``: the linear solver of each step (``_tridiag.solve_tridiagonal``).

    ``tol``: the update below which a contracting sequence stops [V] (default ``Y_TOL``).

    Returns (y, iterations (B,), converged (B,), last max update (B,))."""
    tol = Y_TOL if tol is None else tol
    y = y0.copy()
    B = y.shape[1]
    iters = np.zeros(B, dtype=np.int32)
    conv = np.zeros(B, dtype=bool)
    last = np.full(B, np.inf)
    act = np.arange(B)
    prev = np.full(B, np.inf)  # the active designs' previous step
    pa, ya = p, y
    for it in range(1, max_iter + 1):
        G, lo, di, up = residual(ya, pa, statistics)
        dy = solve_tridiagonal(lo, di, up, -G, tridiagonal)
        limit = STEP_LIMIT_KT * pa["kT"]
        dy = np.clip(dy, -limit, limit)
        ya = ya + dy
        step = np.max(np.abs(dy), axis=0)
        ok = np.isfinite(step)
        done = (step < Y_TOL_ANY) | ((step < tol) & (step <= CONTRACTION * prev)) | ~ok
        prev = step
        y[:, act] = ya
        last[act] = step
        iters[act] = it
        if done.any():
            conv[act[done & ok]] = True
            keep = ~done
            act = act[keep]
            prev = prev[keep]
            if not act.size:
                break
            ya = ya[:, keep]
            pa = {k: (v[..., keep] if np.ndim(v) else v) for k, v in pa.items()}
    return y, iters, conv, last
