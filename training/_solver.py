"""Reference solver API: ``solve(designs)`` answers design-table rows with the full nonlinear
Poisson solution (``_poisson``), batched and optionally spread over threads; numpy only.

Regime criterion (documented in README and DEVELOPERS.md): a region keeps a neutral part when
its majority-carrier density reaches at least half its doping somewhere in it. Margins:
``core_majority_ln = ln(2 max p_core / N_core)`` and ``shell_majority_ln = ln(2 max n_shell /
N_shell)`` (majority carriers; named apart from the depletion engine's geometric
``core_margin``/``shell_margin`` because their scale differs), positive where the region keeps
a neutral part, zero on the boundary.
"""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor

import numpy as np

from .._constants import NM, Q
from .._depletion import prepare, row_status, outputs, material_arrays, solve_pcore
from .._design import REGIMES, DesignTable, normalize_designs
from .._profiles import fermi_minus_ev
from .._roots import solve_bracketed
from .._statistics import check_statistics, occupancy

from ._grid import graded_grid
from ._poisson import MAX_ITER, carriers, control_volumes, newton, residual

SOLVER_VERSION = "1.0"  #: recorded in every training row; bump when results can change
NODES = 400  #: grid nodes per design: V_bi within 0.1 mV of a 4x finer grid (benchmarks/bench_solver.py)
BATCH = 256  #: designs per Newton batch
H0_DEBYE = 0.5  #: spacing at an edge, in Debye lengths of the heavier doping
H0_MAX_NM = 1.0  #: ... but at most this [nm]
HMAX_FRACTION = 0.08  #: largest spacing as a fraction of the outer radius


def _neutral_level(N, dos_major, dos_minor, Eg, kt, statistics):
    """E_F - E_majority-band-edge solving exact neutrality majority - minority = N [eV],
    returned as y = E_F - E_v of a p-type region with N acceptors (mirrored frame)."""
    p = dict(N=N, Nv=dos_major, Nc=dos_minor, Eg=Eg, kT=kt)

    def f(y, q):  # increasing in y: N - (p - n)
        fp, dfp = occupancy(-y / q["kT"], statistics)
        fn, dfn = occupancy((y - q["Eg"]) / q["kT"], statistics)
        return q["N"] - q["Nv"] * fp + q["Nc"] * fn, (q["Nv"] * dfp + q["Nc"] * dfn) / q["kT"]

    lo = np.full_like(N, -3.0)
    hi = Eg + 3.0
    with np.errstate(all="ignore"):
        y, _ = solve_bracketed(f, p, lo, hi, xtol=1e-13)
    return y


def _physics(table: DesignTable, statistics: str):
    """Per-design arrays of the mirrored p-core problem, plus the depletion start."""
    prob, cnl = prepare(table, statistics)
    v = table.values
    mat = material_arrays(table.material, v["temperature_K"], statistics)
    pc = table.p_core
    ok = table.ok
    kt = np.where(ok, mat["kT_eV"], 0.025)
    nv = np.where(ok, np.where(pc, mat["nv_cm3"], mat["nc_cm3"]), 1e18) * 1e6  # majority band of the core
    nc = np.where(ok, np.where(pc, mat["nc_cm3"], mat["nv_cm3"]), 1e18) * 1e6
    il = np.where(ok, v["interlayer_nm"], 0.0) * NM
    with np.errstate(all="ignore"):
        sol = solve_pcore(**prob)
        da_out = outputs(sol, **prob)
    da_ok = (row_status(table, prob, sol, da_out, cnl) == "ok") & (il == 0)
    y_core = _neutral_level(prob["NA"], nv, nc, prob["Eg"], kt, statistics)
    y_shell = prob["Eg"] - _neutral_level(prob["ND"], nc, nv, prob["Eg"], kt, statistics)
    return dict(prob=prob, sol=sol, da_ok=da_ok, kT=kt, Nv=nv, Nc=nc, b=prob["a"] + il,
                y_core=y_core, y_shell=y_shell)


def _chunk(ph: dict, sel, statistics: str, nodes: int, profiles: bool = False, max_iter: int = MAX_ITER) -> dict:
    """Solve the designs ``sel`` of the prepared physics ``ph``; returns output arrays (and
    the grids ``r`` [m], solutions ``y`` [eV] and carrier densities if ``profiles``)."""
    pr = {k: v[sel] for k, v in ph["prob"].items()}
    sol = {k: (v[sel] if np.ndim(v) else v) for k, v in ph["sol"].items() if k != "iterations" and k != "mean_iterations"}
    a, b, R = pr["a"], ph["b"][sel], pr["R"]
    kt, eps = ph["kT"][sel], pr["eps"]
    cap = H0_MAX_NM * NM
    ld = lambda n: np.minimum(H0_DEBYE * np.sqrt(eps * kt / (Q * n)), cap)  # noqa: E731
    h_core, h_shell = ld(pr["NA"]), ld(pr["ND"])
    da_ok = ph["da_ok"][sel]
    r_n = np.where(da_ok, np.minimum(a * np.sqrt(sol["w"]), R), b)
    edges = np.vstack([np.zeros_like(a), np.where(da_ok, a * np.sqrt(sol["u"]), a), a, b, r_n,
                       np.where(da_ok, R * np.sqrt(sol["v"]), R), R])
    h0 = np.vstack([h_core, h_core, np.minimum(h_core, h_shell), np.minimum(h_core, h_shell), h_shell, h_shell,
                    np.minimum(h_shell, cap / 4)])  # surface: accumulation layers are thin
    r = graded_grid(edges, h0, a, b, R, np.maximum(HMAX_FRACTION * R, h0.max(0)), nodes)
    vol, face, core, shell = control_volumes(r, a, b)
    yc, ys = ph["y_core"][sel], ph["y_shell"][sel]
    step = np.where(r < 0.5 * (a + b), yc, ys)
    with np.errstate(all="ignore"):
        y0 = np.where(da_ok, fermi_minus_ev(pr, sol, r), step)
    y0 = np.where(np.isfinite(y0), y0, step)
    p = dict(eps=eps, face=face, vol=vol, core=core, shell=shell, NA=pr["NA"], ND=pr["ND"], R=R, Dit=pr["Dit"],
             Ecnl=pr["Ecnl"], kT=kt, Eg=pr["Eg"], Nv=ph["Nv"][sel], Nc=ph["Nc"][sel])
    with np.errstate(all="ignore"):
        y, iters, conv, last = newton(y0, p, statistics, max_iter=max_iter)
        out = analyse(y, r, p, a, b, statistics)
    # docs/design-table.md: bending from the shell's neutral level where it keeps one (negative when
    # the surface accumulates), else from the shell's potential extremum
    out["surface_bending_V"] = np.where(out["shell_majority_ln"] >= 0, ys - y[-1], out["surface_bending_V"])
    out.update(iterations=iters, converged=conv, last_update_V=last, vbi0_V=ys - yc)
    if profiles:
        hole, _, elec, _ = carriers(y, p, statistics)
        out.update(r=r, y=y, hole=hole, elec=elec, Eg=p["Eg"])
    return out


def _crossing(r, ln_ratio, idx, inner):
    """Radius where ln(density / half doping) crosses zero between node idx and its neighbour
    (idx+1 if not inner else idx-1), linear in ln density; idx (B,)."""
    cols = np.arange(r.shape[1])
    j = np.clip(idx + (1 if not inner else -1), 0, r.shape[0] - 1)
    f0, f1 = ln_ratio[idx, cols], ln_ratio[j, cols]
    t = np.where(f0 != f1, f0 / (f0 - f1), 0.0)
    return r[idx, cols] + np.clip(t, 0.0, 1.0) * (r[j, cols] - r[idx, cols])


def _vertex(y, r, k, sign, mask):
    """Extremum of the parabola through nodes k-1, k, k+1 (k (B,), an extreme node of ``sign``
    * y inside ``mask``); falls back to the node value at region ends or if not curved."""
    B = y.shape[1]
    cols = np.arange(B)
    N = y.shape[0]
    km, kp = np.clip(k - 1, 0, N - 1), np.clip(k + 1, 0, N - 1)
    interior = (k > 0) & (k < N - 1) & mask[km, cols] & mask[kp, cols]
    x0, x1, x2 = r[km, cols], r[k, cols], r[kp, cols]
    y0, y1, y2 = sign * y[km, cols], sign * y[k, cols], sign * y[kp, cols]
    with np.errstate(all="ignore"):
        f01 = (y1 - y0) / (x1 - x0)
        f12 = (y2 - y1) / (x2 - x1)
        f012 = (f12 - f01) / (x2 - x0)
        xs = np.clip(0.5 * (x0 + x1) - f01 / (2.0 * f012), x0, x2)
        top = y0 + f01 * (xs - x0) + f012 * (xs - x0) * (xs - x1)
    use = interior & (f012 < 0) & np.isfinite(top)
    return sign * np.where(use, np.maximum(top, y1), y1)


def analyse(y, r, p, a, b, statistics):
    """Design-table outputs of solved profiles y (N, B) on grids r (N, B)."""
    hole, _, elec, _ = carriers(y, p, statistics)
    core_m, shell_m = r <= a, r >= b
    ln_p = np.log(np.maximum(hole, 1e-300) / (0.5 * p["NA"]))
    ln_n = np.log(np.maximum(elec, 1e-300) / (0.5 * p["ND"]))
    core_margin = np.where(core_m, ln_p, -np.inf).max(0)
    shell_margin = np.where(shell_m, ln_n, -np.inf).max(0)
    # extremes refined by a parabola through the extreme node and its neighbours (second-order
    # accurate like the discretisation; the bare node value would be first-order in h)
    y_max_shell = _vertex(y, r, np.where(shell_m, y, -np.inf).argmax(0), 1.0, shell_m)
    y_min_core = _vertex(y, r, np.where(core_m, y, np.inf).argmin(0), -1.0, core_m)
    core_neutral, shell_neutral = core_margin >= 0, shell_margin >= 0
    N = r.shape[0]
    idx = np.arange(N)[:, None]
    last_core = np.where(core_m & (ln_p >= 0), idx, -1).max(0)
    rp = np.where(last_core >= 0, _crossing(r, ln_p, np.maximum(last_core, 0), False), 0.0)
    rp = np.where(r[np.maximum(last_core, 0), np.arange(r.shape[1])] >= a, a, rp)
    first_sh = np.where(shell_m & (ln_n >= 0), idx, N).min(0)
    last_sh = np.where(shell_m & (ln_n >= 0), idx, -1).max(0)
    fs, ls = np.minimum(first_sh, N - 1), np.maximum(last_sh, 0)
    lo = np.where(r[fs, np.arange(r.shape[1])] <= b, b, _crossing(r, ln_n, fs, True))
    hi = np.where(ls == N - 1, r[-1], _crossing(r, ln_n, ls, False))
    G = residual(y, p, statistics, jacobian=False)
    sigma_R = p["R"] * Q * p["Dit"] * np.abs(y[-1] - p["Ecnl"])
    scale = Q * (p["NA"] * p["core"].sum(0) + p["ND"] * p["shell"].sum(0)) + sigma_R
    regime = np.where(core_neutral, np.where(shell_neutral, 0, 2), np.where(shell_neutral, 1, 3))
    return dict(regime_code=regime, vbi_V=y_max_shell - y_min_core, core_neutral_radius_m=np.where(core_neutral, rp, 0.0),
                shell_neutral_m=np.where(shell_neutral, np.maximum(hi - lo, 0.0), 0.0),
                surface_bending_V=y_max_shell - y[-1], core_majority_ln=core_margin, shell_majority_ln=shell_margin,
                charge_residual=np.abs(G.sum(0)) / scale)


def solve(designs, statistics: str = "fermi-dirac", nodes: int = NODES, batch: int = BATCH,
          n_jobs: int = 1, max_iter: int = MAX_ITER) -> dict:
    """Regime and built-in potential of each design by the reference solver.

    ``designs``: as for ``radialpn.deplete``. ``statistics``: ``"fermi-dirac"`` or
    ``"boltzmann"``. ``nodes``: grid nodes per design. ``n_jobs``: worker threads over batches
    of ``batch`` designs (-1: one per core; numpy releases the interpreter lock in the array
    work, and results do not depend on the thread count). Returns the output columns of the
    design table plus ``core_majority_ln``, ``shell_majority_ln`` (see module docstring),
    ``charge_residual`` (|bulk + surface charge| over the total dopant charge), ``iterations``
    and ``solver_version``. A design that does not converge carries the reason in ``status``
    and no numbers. ``max_iter``: Newton steps before a design is declared not converged.
    """
    statistics = check_statistics(statistics)
    table = designs if isinstance(designs, DesignTable) else normalize_designs(designs)
    ph = _physics(table, statistics)
    rows = np.flatnonzero(table.ok)
    parts = [rows[i:i + batch] for i in range(0, rows.size, batch)]
    workers = (os.cpu_count() or 1) if n_jobs == -1 else max(1, int(n_jobs))
    if workers == 1 or len(parts) <= 1:
        results = [_chunk(ph, s, statistics, nodes, max_iter=max_iter) for s in parts]
    else:
        with ThreadPoolExecutor(min(workers, len(parts))) as pool:
            results = list(pool.map(lambda s: _chunk(ph, s, statistics, nodes, max_iter=max_iter), parts))
    return _assemble(table, rows, parts, results)


def _assemble(table, rows, parts, results) -> dict:
    n = table.n
    nan = np.full(n, np.nan)
    cols = {k: nan.copy() for k in ("vbi_V", "vbi0_V", "core_neutral_radius_nm", "shell_neutral_nm",
                                    "surface_bending_V", "core_majority_ln", "shell_majority_ln", "charge_residual")}
    regime = np.full(n, "", dtype=object)
    iters = np.zeros(n, dtype=np.int32)
    status = table.status.copy()
    names = np.array(REGIMES, dtype=object)
    for sel, res in zip(parts, results):
        good = res["converged"] & np.isfinite(res["vbi_V"])
        ok_rows, bad_rows = sel[good], sel[~good]
        for k in ("vbi_V", "vbi0_V", "surface_bending_V", "core_majority_ln", "shell_majority_ln", "charge_residual"):
            cols[k][ok_rows] = res[k][good]
        cols["core_neutral_radius_nm"][ok_rows] = res["core_neutral_radius_m"][good] / NM
        cols["shell_neutral_nm"][ok_rows] = res["shell_neutral_m"][good] / NM
        regime[ok_rows] = names[res["regime_code"][good]]
        iters[sel] = res["iterations"]
        status[bad_rows] = [f"solver: no convergence in {it} Newton steps (last update {u:.2g} V)"
                            for it, u in zip(res["iterations"][~good], res["last_update_V"][~good])]
    return dict(regime=regime, **{k: cols[k] for k in ("vbi_V", "vbi0_V", "core_neutral_radius_nm",
                                                        "shell_neutral_nm", "surface_bending_V")},
                engine=np.full(n, "solver", dtype=object), status=status, core_majority_ln=cols["core_majority_ln"],
                shell_majority_ln=cols["shell_majority_ln"], charge_residual=cols["charge_residual"], iterations=iters,
                solver_version=np.full(n, SOLVER_VERSION, dtype=object))
