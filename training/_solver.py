"""Reference solver API: ``solve(designs)`` answers design-table rows with the full nonlinear
Poisson solution (``_poisson``), batched and optionally spread over threads; numpy only.

Regime criterion (documented in README, DEVELOPERS.md and docs/physics.md section 8.5): a region
keeps a neutral part when its majority-carrier density reaches at least half its doping
somewhere in it (with incomplete ionisation: half the neutral bulk's majority density, the
ionised share of the doping) (for a degenerate region this is reached with the bands still short of their
bulk position, so V_bi may fall below V_bi0 while both regions keep a neutral part). Margins:
``core_majority_ln = ln(2 max p_core / N_core)`` and ``shell_majority_ln = ln(2 max n_shell /
N_shell)`` (majority carriers; named apart from the depletion engine's geometric
``core_margin``/``shell_margin`` because their scale differs), positive where the region keeps
a neutral part, zero on the boundary.
"""

from __future__ import annotations

import multiprocessing
import sys
import threading
from concurrent.futures import ProcessPoolExecutor, ThreadPoolExecutor

import numpy as np

from .._constants import K_B_EV, NM, Q
from .._cpu import available_cores
from .._qcommon import _check_count
from .._depletion import prepare, row_status, outputs, solve_pcore
from .._bulk import exact_levels
from .._design import REGIMES, DesignTable, normalize_designs
from .._errors import DesignError
from .._ionisation import check_ionisation, ionisation_column, row_dopants
from .._profiles import fermi_minus_ev
from .._statistics import ETA_LO, check_statistics, occupancy
from .._tunnel import tunnel_log10
from .._validity import beyond_parabolic, penetration_text

from ._grid import graded_grid
from ._poisson import MAX_ITER, carriers, control_volumes, ionised, newton, residual
from ._tridiag import METHODS as TRIDIAGONAL_METHODS

#: recorded in every training row; bump when results can change. 1.2: incomplete ionisation (default
#: "auto": on below 200 K and for deep dopants); rows resolved to full ionisation answer as in 1.1.
#: 1.3: a surface layer's edge at its region's zero-charge level instead of interpolated between
#: nodes, and the node at b judged by the shell's charge too (``analyse``): about 3 % of
#: whole-domain designs move (380 of 12,872), nearly all by less than 0.2 mV, a few by tens of mV
#: up to 262 mV (1.2's grid error on them); the bulk levels' search starts next to its root
SOLVER_VERSION = "1.3"
#: earlier versions a bundle may have been fitted on and still be recalibrated and validated
#: against this one (``_recalibrate``: new quantiles from this solver's answers): 1.1 answers
#: as 1.2 under full ionisation; 1.2 as 1.3 but on the rows above, 3 % of the whole domain and
#: at most 1 in 3,000 of a shipped bundle's domain beyond 0.1 mV (ge-ncore; 11 bundles within 0.034 mV)
RECALIBRATES_FROM = ("1.1", "1.2")
NODES = 400  #: grid nodes per design: V_bi within 0.1 mV of a 4x finer grid (benchmarks/bench_solver.py)
NODES_RANGE = (50, 10_000)  #: nodes a caller may ask for: every region keeps its 6 intervals; memory stays ~0.1 GB
BATCH = 128  #: designs per Newton batch: each working array (NODES x BATCH) stays in a core's L2 cache
H0_DEBYE = 0.5  #: spacing at an edge, in Debye lengths of the heavier doping
H0_MAX_NM = 1.0  #: ... but at most this [nm]
HMAX_FRACTION = 0.08  #: largest spacing as a fraction of the outer radius
#: continuation in the dopants' localised share for designs Newton does not converge from the
#: depletion start under incomplete ionisation: first stage and smallest stage (``_continue_ionisation``)
IONISATION_STEP = 0.25
IONISATION_MIN_STEP = 1.0 / 64
#: how ``solve(n_jobs > 1)`` spreads its batches: "processes" (forked workers, each with its own
#: interpreter: ~1.7x the throughput of threads on 2 cores, where the threads' interpreter lock
#: and small-array calls serialise part of the work), "threads", or "auto" (default): processes
#: where forking is safe (``fork_safe``), else threads. Answers are bit-identical either way
#: (the same batches through the same code)
PARALLEL = ("auto", "processes", "threads")
_FORKED = None  #: the prepared physics a forked worker reads (set only while a process pool runs)


def _physics(table: DesignTable, statistics: str, ionisation: str = "full"):
    """Per-design arrays of the mirrored p-core problem, plus the depletion start and the
    dopant levels (``_ionisation.row_dopants``) where ionisation is incomplete."""
    incomplete, refused, dop = row_dopants(table, ionisation)
    if refused is not None:
        table = DesignTable(table.n, table.material, table.p_core, table.values, refused)
    dop = dop if incomplete.any() else None
    prob, cnl = prepare(table, statistics, dop)
    v = table.values
    ok = table.ok
    il = np.where(ok, v["interlayer_nm"], 0.0) * NM
    with np.errstate(all="ignore"):
        sol = solve_pcore(**prob)
        da_out = outputs(sol, **prob)
    da_ok = (row_status(table, prob, sol, da_out, cnl) == "ok") & (il == 0)
    lv = exact_levels(table, prob, dop, statistics)  # exact neutrality, both carriers
    y_int = intrinsic_level(prob["Eg"], lv["Nv"], lv["Nc"], lv["kT"], statistics)
    return dict(prob=prob, sol=sol, da_ok=da_ok, kT=lv["kT"], Nv=lv["Nv"], Nc=lv["Nc"], b=prob["a"] + il,
                y_core=lv["y_core"], y_shell=lv["y_shell"], y_int=y_int, dopants=dop, table=table,
                incomplete=incomplete)


def intrinsic_level(Eg, Nv, Nc, kT, statistics: str, steps: int = 3) -> np.ndarray:
    """y = E_F - E_v [eV] where n = p, for gap ``Eg`` [eV], band densities of states ``Nv``, ``Nc``
    [m^-3] and ``kT`` [eV]: the level at which an undoped region's space charge changes sign.
    Newton on ln n - ln p from the non-degenerate value E_g/2 + (kT/2) ln(N_v/N_c) (Sze & Ng,
    Physics of Semiconductor Devices, 3rd ed., sec. 1.4.1, from memory); near mid-gap F_1/2 differs from the
    exponential by ~e^eta/2^(3/2), so ``steps`` = 3 reaches rounding."""
    with np.errstate(all="ignore"):
        y = 0.5 * Eg + 0.5 * kT * np.log(Nv / Nc)
        for _ in range(steps):
            lp, dlp = _ln_occupancy(-y / kT, statistics)
            ln_, dln = _ln_occupancy((y - Eg) / kT, statistics)
            g = np.log(Nc) + ln_ - np.log(Nv) - lp
            y = y - g / ((dln + dlp) / kT)
    return y


def _ln_occupancy(eta, statistics: str):
    """ln F(eta) [1] and its eta-derivative [1] without underflow: n and p at mid-gap of a wide
    gap at low temperature are below the smallest float (GaN at 25 K: e^-800), their logarithms
    are not. Below ``ETA_LO`` F_1/2 = e^eta (1 - e^eta / 2^(3/2)) (the series the runtime uses)."""
    if statistics == "boltzmann":
        return eta, np.ones_like(eta)
    f, df = occupancy(np.maximum(eta, ETA_LO), statistics)
    e = np.exp(np.minimum(eta, ETA_LO))
    deep = eta < ETA_LO
    return (np.where(deep, eta + np.log1p(-e / 2.0 ** 1.5), np.log(f)),
            np.where(deep, (1.0 - e / 2.0 ** 0.5) / (1.0 - e / 2.0 ** 1.5), df / f))


def _chunk(ph: dict, sel, statistics: str, nodes: int, profiles: bool = False, max_iter: int = MAX_ITER,
           tridiagonal: str = "cyclic-reduction") -> dict:
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
    levels = dict(core=yc, shell=ys, intrinsic=ph["y_int"][sel])  # where each region's space charge is zero
    if ph["dopants"] is not None and ph["incomplete"][sel].any():  # only then the charge model's extra work
        p.update({k: v[sel] for k, v in ph["dopants"].items()})
        # the regime criterion's reference: the majority density of the neutral bulk (N itself
        # under full ionisation, the ionised share when the dopants freeze out)
        inc = ph["incomplete"][sel]
        p["NA_ref"] = np.where(inc, p["Nv"] * occupancy(-yc / kt, statistics)[0], p["NA"])
        p["ND_ref"] = np.where(inc, p["Nc"] * occupancy((ys - p["Eg"]) / kt, statistics)[0], p["ND"])
    with np.errstate(all="ignore"):
        y, iters, conv, last = newton(y0, p, statistics, max_iter=max_iter, tridiagonal=tridiagonal)
        if "core_s" in p and not conv.all():
            _continue_ionisation(y0, y, iters, conv, last, p, statistics, max_iter, tridiagonal)
        out = analyse(y, r, p, a, b, statistics, levels)
    out.update(iterations=iters, converged=conv, last_update_V=last, vbi0_V=ys - yc, y_core=yc, y_shell=ys,
               Eg=p["Eg"], tunnel_log10=tunnel_log10(out["peak_field_V_per_m"], p["Eg"], p["Nc"] / 1e6,
                                                    p["Nv"] / 1e6, kt / K_B_EV))
    if profiles:
        hole, _, elec, _ = carriers(y, p, statistics)
        out.update(r=r, y=y, hole=hole, elec=elec, **{k: p[k] for k in ("NA_ref", "ND_ref") if k in p})
    return out


def fork_safe() -> bool:
    """True where ``solve`` may fork worker processes: Linux (fork is the platform's own model;
    macOS system libraries and Windows do not support it), not inside a daemonic process (a
    Dask or multiprocessing worker may not have children) and with this process's only thread
    running (a fork copies no other thread, so no lock another thread holds can be left locked)."""
    return (sys.platform.startswith("linux") and "fork" in multiprocessing.get_all_start_methods()
            and not multiprocessing.current_process().daemon and threading.active_count() == 1)


def _chunk_forked(args):
    """``_chunk`` in a forked worker, over the physics the parent prepared before forking."""
    sel, statistics, nodes, max_iter, tridiagonal = args
    return _chunk(_FORKED, sel, statistics, nodes, max_iter=max_iter, tridiagonal=tridiagonal)


def _run_parallel(ph, parts, statistics, nodes, max_iter, tridiagonal, workers, parallel):
    """``_chunk`` over ``parts`` on ``workers`` threads or forked processes (``PARALLEL``)."""
    global _FORKED
    if parallel == "processes" and not fork_safe():
        raise DesignError("parallel", "'processes' on Linux, outside a daemonic worker, from a single-threaded "
                                      "process ('auto' picks threads elsewhere)", parallel)
    n = min(workers, len(parts))
    if parallel == "threads" or (parallel == "auto" and not fork_safe()):
        with ThreadPoolExecutor(n) as pool:
            return list(pool.map(lambda s: _chunk(ph, s, statistics, nodes, max_iter=max_iter,
                                                  tridiagonal=tridiagonal), parts))
    _FORKED = ph  # the workers inherit it with the fork (nothing pickled but row indices and results)
    try:
        with ProcessPoolExecutor(n, mp_context=multiprocessing.get_context("fork")) as pool:
            return list(pool.map(_chunk_forked, [(s, statistics, nodes, max_iter, tridiagonal) for s in parts],
                                 chunksize=max(1, len(parts) // (4 * n))))
    finally:
        _FORKED = None


def _continue_ionisation(y0, y, iters, conv, last, p, statistics, max_iter, tridiagonal="cyclic-reduction"):
    """Designs with incomplete ionisation that Newton did not converge from the depletion start
    (cold, lightly doped wires with a deep level, where the ionised share switches within a few
    kT): solved again, one by one, by continuation in the dopants' localised share s, scaled from
    0 (full ionisation) to 1 (the model) in stages of ``IONISATION_STEP`` that halve after a
    failed stage (down to ``IONISATION_MIN_STEP``) and grow by half after a converged one, each
    started from the last converged stage. Updates y, iters (all stages counted), conv and last
    in place."""
    for c in np.flatnonzero(~conv & ((p["core_s"] > 0) | (p["shell_s"] > 0))):
        sub = {k: (v[..., c:c + 1] if np.ndim(v) else v) for k, v in p.items()}
        yc, total, frac, step, ok = y0[:, c:c + 1], 0, 0.0, 0.0, True
        while ok:
            target = min(1.0, frac + step)
            stage = dict(sub, core_s=sub["core_s"] * target, shell_s=sub["shell_s"] * target)
            yn, it, cv, ls = newton(yc, stage, statistics, max_iter=max_iter, tridiagonal=tridiagonal)
            total += int(it[0])
            if cv[0]:
                yc, frac = yn, target
                if frac >= 1.0:
                    break
                step = IONISATION_STEP if step == 0.0 else min(1.5 * step, 1.0 - frac)
            else:
                step *= 0.5
                ok = step >= IONISATION_MIN_STEP
        y[:, c:c + 1], iters[c], conv[c], last[c] = yc if ok else yn, iters[c] + total, ok, 0.0 if ok else ls[0]


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


def _between(level, y0, y1):
    """``level`` clipped to the interval spanned by y0 and y1 (all (B,) [eV]): rounding in the
    zero-charge level never takes it outside the two nodes whose charges bracket it."""
    return np.clip(level, np.minimum(y0, y1), np.maximum(y0, y1))


def _masked_vertex(y, r, mask, sign):
    """Extreme (``sign`` +1: largest, -1: smallest) of y over ``mask`` (N, B), refined by the
    parabola through the extreme node and its neighbours inside the mask."""
    k = np.where(mask, sign * y, -np.inf).argmax(0)
    return _vertex(y, r, k, sign, mask), k


def analyse(y, r, p, a, b, statistics, levels):
    """Design-table outputs of solved profiles y (N, B) on grids r (N, B), in the mirrored
    p-core frame (docs/physics.md section 8.6).

    V_bi is the largest y over r >= a minus the smallest over r <= b (an interlayer counts on both
    sides, so V_bi >= 0: the node at a belongs to both). Where the surface accumulates (surface
    charge > 0, so y rises into the surface), the accumulation layer, the run of nodes from R
    inwards with net negative space charge (n - p > N_D in the shell, continued into the
    interlayer and core while they are inverted, n > p), is left out of the shell's maximum, which
    is taken up to the point where the space charge changes sign (see below); the share
    it would add is ``surface_accumulation_V``. Likewise, where a depleting surface's layer (net
    positive charge) runs through the shell and interlayer into the core and accumulates holes
    there beyond N_A, the core's minimum is taken inside the layer's edge and the share left out
    is ``surface_accumulation_V``. The surface bending is measured at the surface:
    from the potential extremum nearest the surface inside the shell (a maximum when the surface
    depletes; on accumulation the minimum over the layer, which is its inner edge, the shell's
    neutral level where the shell keeps one) to y(R); negative on accumulation, exactly zero
    where D_it = 0 (zero surface field: the surface is itself the extremum). The peak field is
    the largest |dy/dr| between the core's minimum and the shell's maximum (the junction).

    Where a layer's criterion changes sign between two nodes, y there is the level at which it
    vanishes: within a region it is a monotone function of y alone (carriers and ionised dopants
    depend on the local y only), so the sign change lies exactly at ``levels`` (B,) [eV]:
    ``"core"`` (neutral core, p - n = N_A-), ``"shell"`` (neutral shell, n - p = N_D+) or
    ``"intrinsic"`` (n = p: the interlayer, and the core, where the accumulation layer's
    criterion is inversion, n > p, rather than the space charge). Interpolating y linearly
    between the nodes instead would put an error of up to the step of y between them into V_bi,
    tens of mV where a thin lightly doped shell meets an accumulating surface (solver 1.2).
    """
    hole, _, elec, _ = carriers(y, p, statistics)
    NA, ND = ionised(y, p)  # the dopants' space charge (p["NA"], p["ND"] under full ionisation)
    N, B = r.shape
    cols = np.arange(B)
    idx = np.arange(N)[:, None]
    core_m, shell_m = r <= a, r >= b
    core_side, shell_side = r <= b, r >= a
    ln_p = np.log(np.maximum(hole, 1e-300) / (0.5 * p.get("NA_ref", p["NA"])))
    ln_n = np.log(np.maximum(elec, 1e-300) / (0.5 * p.get("ND_ref", p["ND"])))
    core_margin = np.where(core_m, ln_p, -np.inf).max(0)
    shell_margin = np.where(shell_m, ln_n, -np.inf).max(0)
    # extremes refined by a parabola through the extreme node and its neighbours (second-order
    # accurate like the discretisation; the bare node value would be first-order in h)
    y_min_core, k_lo = _masked_vertex(y, r, core_side, -1.0)
    # a depleting surface whose layer (net positive charge) runs through a thin shell and the
    # interlayer into the core, where it accumulates holes beyond N_A (a nearly intrinsic core):
    # the core's minimum is taken inside that layer's inner edge
    pos = (hole - elec + np.where(r > b, ND, np.where(r > a, 0.0, -NA))) > 0
    k_run = np.where(~pos, idx, -1).max(0) + 1
    into_core = (k_run < N) & (r[np.clip(k_run, 0, N - 1), cols] <= a) & ~((p["Dit"] > 0) & (y[-1] < p["Ecnl"]))
    inner = core_side & (idx < k_run)
    y_min_inner, k_lo_inner = _masked_vertex(y, r, inner, -1.0)
    y_min_inner = np.where(inner.any(0), y_min_inner, y[0])
    kr = np.clip(k_run, 1, N - 1)
    q0, q1 = pos[kr - 1, cols], pos[kr, cols]  # sign change between kr-1 (not pos) and kr (pos)
    r_kr = r[kr, cols]
    zero = np.where(r_kr > b, levels["shell"], np.where(r_kr > a, levels["intrinsic"], levels["core"]))
    y_cut = np.where(~q0 & q1, _between(zero, y[kr - 1, cols], y[kr, cols]), y[kr - 1, cols])
    y_min_cut = np.minimum(y_min_inner, y_cut)
    core_share = np.where(into_core, np.maximum(y_min_cut - y_min_core, 0.0), 0.0)
    y_min_core = np.where(into_core, y_min_cut, y_min_core)
    k_lo = np.where(into_core, np.where(inner.any(0), k_lo_inner, 0), k_lo)
    y_max_all, _ = _masked_vertex(y, r, shell_side, 1.0)
    # surface layer of an accumulating surface: shell nodes from R inwards with n - p > N_D
    accumulating = (p["Dit"] > 0) & (y[-1] < p["Ecnl"])
    # the layer: negative space charge in the shell (n - p > N_D), continued into the interlayer
    # and the core where these are inverted (n > p), as in a nearly intrinsic core
    # the node at b bounds the shell as well: judged by the shell's charge there, so that a shell
    # whose y stays below its neutral level only at its inner edge ends the layer in the shell
    # (as the continuum does) on every grid, rather than only where a node falls inside that strip
    net = elec - hole - np.where(r >= b, ND, 0.0)  # [m^-3]
    negative = net > 0
    k_edge = np.where(~negative, idx, -1).max(0) + 1  # first node of the run ending at R (N: none)
    accumulating &= k_edge < N
    ke = np.clip(k_edge, 1, N - 1)
    c0, c1 = net[ke - 1, cols], net[ke, cols]
    t = np.clip(np.where(c1 > c0, -c0 / (c1 - c0), 1.0), 0.0, 1.0)  # where the space charge changes sign
    y_edge = y[ke - 1, cols] + t * (y[ke, cols] - y[ke - 1, cols])
    flips = (c0 <= 0) & (c1 > 0)  # a true sign change: there y is the region's zero-charge level
    zero = np.where(r[ke, cols] > b, levels["shell"], levels["intrinsic"])
    y_edge = np.where(flips, _between(zero, y[ke - 1, cols], y[ke, cols]), y_edge)
    layer = idx >= k_edge
    outside = shell_side & (idx < k_edge)
    y_max_junction, k_hi_acc = _masked_vertex(y, r, outside, 1.0)
    k_hi_acc = np.where(outside.any(0), k_hi_acc, np.minimum(ke, N - 1))
    y_max_junction = np.maximum(y_max_junction, y_edge)
    y_min_layer, _ = _masked_vertex(y, r, layer | (idx == N - 1), -1.0)
    y_min_layer = np.minimum(y_min_layer, y_edge)
    # depleting surface: walk inwards from R while y rises; stop at the first local maximum
    rise = np.vstack([np.zeros((1, B), bool), y[:-1] <= y[1:]])  # node k: y(k-1) <= y(k)
    k_top = np.where(rise & shell_side & (idx > 0), idx, -1).max(0)
    k_top = np.where(k_top < 0, np.where(shell_side, idx, N).min(0), k_top)
    y_top = _vertex(y, r, k_top, 1.0, shell_side)
    bending = np.where(accumulating, y_min_layer - y[-1], np.maximum(y_top - y[-1], 0.0))
    bending = np.where(p["Dit"] > 0, bending, 0.0)
    # the core's part of such a layer counts on both sides (as an interlayer does): V_bi >= 0
    y_max_shell = np.where(accumulating, y_max_junction, np.where(into_core, np.maximum(y_max_all, y_cut), y_max_all))
    k_hi = np.where(accumulating, k_hi_acc, np.where(shell_side, y, -np.inf).argmax(0))
    # junction peak field: faces between the core's minimum and the shell's maximum
    field = np.abs(np.diff(y, axis=0) / np.diff(r, axis=0))  # [V/m] at faces
    lo_k, hi_k = np.minimum(k_lo, k_hi), np.maximum(k_lo, k_hi)
    fidx = np.arange(N - 1)[:, None]
    peak = np.where((fidx >= lo_k) & (fidx < hi_k), field, 0.0).max(0)
    core_neutral, shell_neutral = core_margin >= 0, shell_margin >= 0
    last_core = np.where(core_m & (ln_p >= 0), idx, -1).max(0)
    rp = np.where(last_core >= 0, _crossing(r, ln_p, np.maximum(last_core, 0), False), 0.0)
    rp = np.where(r[np.maximum(last_core, 0), cols] >= a, a, rp)
    first_sh = np.where(shell_m & (ln_n >= 0), idx, N).min(0)
    last_sh = np.where(shell_m & (ln_n >= 0), idx, -1).max(0)
    fs, ls = np.minimum(first_sh, N - 1), np.maximum(last_sh, 0)
    lo = np.where(r[fs, cols] <= b, b, _crossing(r, ln_n, fs, True))
    hi = np.where(ls == N - 1, r[-1], _crossing(r, ln_n, ls, False))
    G = residual(y, p, statistics, jacobian=False)
    sigma_R = p["R"] * Q * p["Dit"] * np.abs(y[-1] - p["Ecnl"])
    scale = Q * (p["NA"] * p["core"].sum(0) + p["ND"] * p["shell"].sum(0)) + sigma_R
    regime = np.where(core_neutral, np.where(shell_neutral, 0, 2), np.where(shell_neutral, 1, 3))
    return dict(regime_code=regime, vbi_V=y_max_shell - y_min_core, core_neutral_radius_m=np.where(core_neutral, rp, 0.0),
                shell_neutral_m=np.where(shell_neutral, np.maximum(hi - lo, 0.0), 0.0),
                surface_bending_V=bending, surface_accumulation_V=np.where(accumulating, y_max_all - y_max_junction, core_share),
                peak_field_V_per_m=peak, y_surface=y[-1].copy(), core_majority_ln=core_margin,
                shell_majority_ln=shell_margin, charge_residual=np.abs(G.sum(0)) / scale)


def solve(designs, statistics: str = "fermi-dirac", nodes: int = NODES, batch: int = BATCH,
          n_jobs: int = 1, max_iter: int = MAX_ITER, ionisation: str = "auto",
          tridiagonal: str = "cyclic-reduction", parallel: str = "auto") -> dict:
    """Regime and built-in potential of each design by the reference solver.

    ``designs``: as for ``radialpn.deplete``. ``statistics``: ``"fermi-dirac"`` or
    ``"boltzmann"``. ``nodes``: grid nodes per design. ``n_jobs``: workers over batches of
    ``batch`` designs (-1: one per core this process may run on); ``parallel``: ``"auto"``,
    ``"processes"`` or ``"threads"`` (``PARALLEL``); results depend on neither. Returns the output columns of the
    design table plus ``core_majority_ln``, ``shell_majority_ln`` (see module docstring),
    ``charge_residual`` (|bulk + surface charge| over the total dopant charge), ``iterations``
    and ``solver_version``. A design that does not converge carries the reason in ``status``
    and no numbers. ``max_iter``: Newton steps before a design is declared not converged.
    ``ionisation``: ``"auto"`` (default), ``"full"`` or ``"incomplete"`` (docs/physics.md section
    4.1); the column ``ionisation`` says which model each row used.
    ``tridiagonal``: the linear solver of each Newton step, ``"cyclic-reduction"`` (default) or
    ``"thomas"`` (the method of solver 1.1, kept for comparison); both give the same answers to
    rounding (Newton stops on the same rule either way, ``_poisson.Y_TOL``).
    """
    statistics = check_statistics(statistics)
    ionisation = check_ionisation(ionisation)
    nodes = _check_count("nodes", nodes, *NODES_RANGE)
    batch = _check_count("batch", batch, 1, 100_000)
    max_iter = _check_count("max_iter", max_iter, 1, 10_000)
    if not (n_jobs == -1 and not isinstance(n_jobs, bool)):
        try:
            n_jobs = _check_count("n_jobs", n_jobs, 1, 1024)
        except DesignError:
            raise DesignError("n_jobs", "-1 (every core) or a whole number in [1, 1024]", n_jobs) from None
    if tridiagonal not in TRIDIAGONAL_METHODS:
        raise DesignError("tridiagonal", f"one of {', '.join(TRIDIAGONAL_METHODS)}", tridiagonal)
    if parallel not in PARALLEL:
        raise DesignError("parallel", f"one of {', '.join(PARALLEL)}", parallel)
    table = designs if isinstance(designs, DesignTable) else normalize_designs(designs)
    ph = _physics(table, statistics, ionisation)
    table = ph["table"]
    rows = np.flatnonzero(table.ok)
    parts = [rows[i:i + batch] for i in range(0, rows.size, batch)]
    workers = available_cores() if n_jobs == -1 else max(1, int(n_jobs))
    if workers == 1 or len(parts) <= 1:
        results = [_chunk(ph, s, statistics, nodes, max_iter=max_iter, tridiagonal=tridiagonal) for s in parts]
    else:
        results = _run_parallel(ph, parts, statistics, nodes, max_iter, tridiagonal, workers, parallel)
    out = _assemble(table, rows, parts, results)
    out["ionisation"] = np.where(out["status"] == "ok", ionisation_column(table, ph["incomplete"]), "").astype(object)
    return out



_FLOAT_OUT = ("vbi_V", "vbi0_V", "core_neutral_radius_nm", "shell_neutral_nm", "surface_bending_V",
              "core_majority_ln", "shell_majority_ln", "charge_residual", "surface_accumulation_V",
              "peak_field_V_per_cm", "tunnel_log10")


def _validity(res, p_core, dit):
    """Status per design of a solved chunk: "ok", or why the row gets no number (first failure
    wins): no convergence, a non-finite output, a Fermi level beyond the parabolic-band limit in
    the neutral core, the neutral shell or at a charged surface (``_validity``)."""
    n = res["converged"].size
    status = np.full(n, "ok", dtype=object)

    def fail(mask, texts):
        sel = np.flatnonzero(mask & (status == "ok"))
        for i in sel:
            status[i] = texts(i)

    fail(~res["converged"], lambda i: f"solver: no convergence in {res['iterations'][i]} Newton steps "
                                      f"(last update {res['last_update_V'][i]:.2g} V)")
    finite = np.ones(n, dtype=bool)
    for k in ("vbi_V", "vbi0_V", "surface_bending_V", "core_majority_ln", "shell_majority_ln", "charge_residual",
              "core_neutral_radius_m", "shell_neutral_m", "surface_accumulation_V", "peak_field_V_per_m"):
        finite &= np.isfinite(res[k])
    fail(~finite, lambda i: "solver: an output is not finite (carrier densities under- or overflow at this "
                            "temperature and doping); outside the solver's numerical range")
    Eg, mirrored = res["Eg"], ~p_core
    fail(beyond_parabolic(res["y_core"], Eg), lambda i: penetration_text("neutral core's", res["y_core"][i], Eg[i],
                                                                        mirrored[i]))
    fail(beyond_parabolic(res["y_shell"], Eg), lambda i: penetration_text("neutral shell's", res["y_shell"][i], Eg[i],
                                                                         mirrored[i]))
    fail(beyond_parabolic(res["y_surface"], Eg) & (dit > 0),
         lambda i: penetration_text("surface", res["y_surface"][i], Eg[i], mirrored[i]) + "; surface pinned inside a band")
    return status


def _assemble(table, rows, parts, results) -> dict:
    n = table.n
    nan = np.full(n, np.nan)
    cols = {k: nan.copy() for k in _FLOAT_OUT}
    regime = np.full(n, "", dtype=object)
    iters = np.zeros(n, dtype=np.int32)
    status = table.status.copy()
    names = np.array(REGIMES, dtype=object)
    dit = table.values["dit_cm2eV"]
    for sel, res in zip(parts, results):
        st = _validity(res, table.p_core[sel], dit[sel])
        good = st == "ok"
        ok_rows = sel[good]
        status[sel] = st
        for k in ("vbi_V", "vbi0_V", "surface_bending_V", "core_majority_ln", "shell_majority_ln", "charge_residual",
                  "surface_accumulation_V", "tunnel_log10"):
            cols[k][ok_rows] = res[k][good]
        cols["core_neutral_radius_nm"][ok_rows] = res["core_neutral_radius_m"][good] / NM
        cols["shell_neutral_nm"][ok_rows] = res["shell_neutral_m"][good] / NM
        cols["peak_field_V_per_cm"][ok_rows] = res["peak_field_V_per_m"][good] / 100.0
        regime[ok_rows] = names[res["regime_code"][good]]
        iters[sel] = res["iterations"]
    return dict(regime=regime, **{k: cols[k] for k in ("vbi_V", "vbi0_V", "core_neutral_radius_nm",
                                                        "shell_neutral_nm", "surface_bending_V")},
                engine=np.full(n, "solver", dtype=object), status=status, core_majority_ln=cols["core_majority_ln"],
                shell_majority_ln=cols["shell_majority_ln"], charge_residual=cols["charge_residual"], iterations=iters,
                surface_accumulation_V=cols["surface_accumulation_V"], peak_field_V_per_cm=cols["peak_field_V_per_cm"],
                tunnel_log10=cols["tunnel_log10"], solver_version=np.full(n, SOLVER_VERSION, dtype=object))
