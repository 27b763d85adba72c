"""A tabulated model of a measured series: every wire's outputs on a grid over the unknowns
that affect it, interpolated multilinearly inside the sampler.

Why a table: an inference takes 1e5-1e6 model evaluations (walkers x steps x wires). The
surrogate answers about 1e4 rows/s in numpy, so it is evaluated once per grid node (a 20-wire
series over three unknowns: about 2e4 rows), and the sampler reads the table (about 1e7
interpolated rows/s). Grid spacing (``SPACING``) is chosen so that the interpolation error on
V_bi and the surface bending stays well below the measurement uncertainties growers quote
(tens of mV); tests/test_calibrate.py measures it against direct evaluation.

Quantities tabulated per node (``QUANTITIES``): V_bi [V], the engine's own 1-sigma V_bi
uncertainty [V], surface bending [V], core neutral radius [nm], shell neutral thickness [nm]
and the four regime probabilities [1] (surrogate: its temperature-scaled softmax; depletion
and solver engines: 1 for the regime they give). A node without an answer holds NaN; an
interpolated value touching one is NaN and the likelihood is zero there.
"""

from __future__ import annotations

import itertools
import math

import numpy as np

from ._design import REGIMES
from ._engines import answer
from ._errors import RadialpnError

#: grid spacing in the working coordinate z of each unknown (log10 for D_it and dopings)
SPACING = {"dit_cm2eV": 1 / 3, "cnl_eV": 0.4 / 6, "shell_doping_cm3": 0.15, "core_doping_cm3": 0.15}
MIN_POINTS = 3  #: nodes per unknown at least
MAX_NODES = 3_000_000  #: table rows (wires x nodes) above which a calibration is refused
QUANTITIES = ("vbi_V", "vbi_sd_V", "surface_bending_V", "core_neutral_radius_nm", "shell_neutral_nm",
              "p_both", "p_core_depleted", "p_shell_depleted", "p_all_depleted")
#: continuous quantities whose interpolation error is estimated and stored after QUANTITIES
INTERPOLATED = ("vbi_V", "surface_bending_V", "core_neutral_radius_nm", "shell_neutral_nm")
COLUMNS = QUANTITIES + tuple(q + "_interp_sd" for q in INTERPOLATED)
#: 1-sigma model discrepancy to the reference solver per engine [V, V, nm, nm], measured on
#: 1,500 random GaAs designs of each core type (rms of engine - solver; see docs/calibrate.md)
MODEL_SD = {
    "surrogate": {"vbi_V": None, "surface_bending_V": 0.002, "core_neutral_radius_nm": 0.35, "shell_neutral_nm": 0.35},
    "depletion": {"vbi_V": 0.035, "surface_bending_V": 0.012, "core_neutral_radius_nm": 2.0, "shell_neutral_nm": 2.3},
    "solver": {"vbi_V": 1e-4, "surface_bending_V": 1e-4, "core_neutral_radius_nm": 0.1, "shell_neutral_nm": 0.1},
}
Z95 = 1.959964  #: the 97.5 % point of the standard normal: 95 % half width -> 1 sd


class CalibrationError(RadialpnError, ValueError):
    """A calibration cannot be set up (observations, unknowns or a model without answers)."""


class Table:
    """Outputs of ``n`` wires on a grid. ``params``: one ``Unknown`` per sampled parameter;
    ``dims[i, k]``: the parameter on the k-th table axis of row i (a shared unknown is the same
    parameter for every row, a per-row one differs). Axis k of row i spans that parameter's
    support with ``points[k]`` nodes."""

    def __init__(self, rows: list, params: list, dims: np.ndarray, engine: str, statistics: str, progress=None):
        self.n, self.D = dims.shape
        self.dims = dims
        self.engine = engine
        self.lo = np.array([[params[j].lo for j in row] for row in dims])  # (n, D) in z
        self.hi = np.array([[params[j].hi for j in row] for row in dims])
        self.points = np.array([max(MIN_POINTS, int(math.ceil(max(params[j].hi - params[j].lo for j in dims[:, k])
                                                              / SPACING[params[dims[0, k]].column] - 1e-9)) + 1)
                                for k in range(self.D)])
        nodes = int(np.prod(self.points))
        if self.n * nodes > MAX_NODES:
            raise CalibrationError(f"unknowns: the model table would need {self.n * nodes:,} rows "
                                   f"(allowed {MAX_NODES:,}); use fewer unknowns or narrower priors")
        self.strides = np.cumprod(np.r_[1, self.points[::-1][:-1]])[::-1]
        frac = np.array(list(itertools.product(*[np.linspace(0.0, 1.0, p) for p in self.points])))  # (nodes, D)
        designs = {col: np.repeat(np.array([r[col] for r in rows], dtype=object), nodes) for col in rows[0]}
        for k in range(self.D):
            z = self.lo[:, k, None] + frac[None, :, k] * (self.hi - self.lo)[:, k, None]  # (n, nodes)
            designs[params[dims[0, k]].column] = params[dims[0, k]].to_value(z.ravel())
        for col in ("core_radius_nm", "shell_thickness_nm", "core_doping_cm3", "shell_doping_cm3", "dit_cm2eV",
                    "cnl_eV", "temperature_K", "interlayer_nm"):
            if col in designs and designs[col].dtype == object:
                designs[col] = designs[col].astype(float)
        values = self._evaluate(designs, statistics, progress).reshape(self.n, nodes, len(QUANTITIES))
        err = [interpolation_sd(values[..., QUANTITIES.index(q)].reshape(self.n, *self.points)).reshape(self.n, nodes)
               for q in INTERPOLATED]
        self.values = np.concatenate([values, np.stack(err, -1)], -1)
        self.nodes = nodes
        bits = np.array(list(itertools.product((0, 1), repeat=self.D)))  # (2^D, D)
        self.corner_bits = bits.astype(bool)
        self.corner_offsets = (bits * self.strides).sum(1)

    def _evaluate(self, designs, statistics, progress):
        if self.engine == "surrogate":
            from ._design import normalize_designs
            from ._model import PROB_COLUMNS, predict_bundles

            res = predict_bundles(normalize_designs(designs), class_probs=True)
            bad = res["status"] != "ok"
            if bad.any():
                raise CalibrationError(f"surrogate engine: no answer inside the prior support ({res['status'][bad][0]}); "
                                       "narrow the priors or use engine depletion")
            probs = np.stack([res[c] for c in PROB_COLUMNS], 1)
            sd = (res["vbi_high_V"] - res["vbi_low_V"]) / (2.0 * Z95)
        else:
            res = answer(designs, self.engine, statistics, progress=progress)
            code = np.array([REGIMES.index(r) if r in REGIMES else -1 for r in res["regime"]])
            probs = (code[:, None] == np.arange(4)).astype(float)
            probs[code < 0] = np.nan
            sd = np.full(code.size, MODEL_SD[self.engine]["vbi_V"])
        cols = [res["vbi_V"], sd, res["surface_bending_V"], res["core_neutral_radius_nm"], res["shell_neutral_nm"]]
        return np.column_stack(cols + [probs[:, k] for k in range(4)]).astype(float)

    def interpolate(self, theta: np.ndarray, columns=None) -> np.ndarray:
        """theta (..., P) in z -> quantities (..., n, Q) (``columns``: indices into ``COLUMNS``,
        default all), multilinear between grid nodes."""
        z = theta[..., self.dims]  # (..., n, D)
        t = np.clip((z - self.lo) / (self.hi - self.lo), 0.0, 1.0) * (self.points - 1)
        i0 = np.minimum(np.floor(t).astype(np.int64), self.points - 2)
        f = t - i0
        base = (i0 * self.strides).sum(-1)  # (..., n)
        w = np.where(self.corner_bits, f[..., None, :], 1.0 - f[..., None, :]).prod(-1)  # (..., n, 2^D)
        vals = self.values if columns is None else self.values[..., columns]
        picked = vals[np.arange(self.n)[:, None], base[..., None] + self.corner_offsets]  # (..., n, 2^D, Q)
        return np.einsum("...c,...cq->...q", w, picked)


def interpolation_sd(f: np.ndarray) -> np.ndarray:
    """Local error estimate of multilinear interpolation at every node [unit of f]: sum over axes
    of |second difference| / 8, the leading term of the linear-interpolation error h^2 |f''| / 8
    (de Boor, A Practical Guide to Splines, rev. ed., 2001, ch. II eq. (18)); at a kink it is
    the size of the kink's miss. ``f``: (n, p_1, ..., p_D); edges take their neighbour's value;
    NaN where a node has no answer."""
    out = np.zeros_like(f)
    for ax in range(1, f.ndim):
        d2 = np.abs(np.diff(f, 2, axis=ax)) / 8.0
        pad = [(0, 0)] * f.ndim
        pad[ax] = (1, 1)
        d2 = np.pad(d2, pad, mode="edge")
        # a cell's error shows at both its end nodes: take the larger of each node and its neighbours
        lo = np.concatenate([np.take(d2, [0], axis=ax), np.take(d2, range(d2.shape[ax] - 1), axis=ax)], axis=ax)
        hi = np.concatenate([np.take(d2, range(1, d2.shape[ax]), axis=ax), np.take(d2, [-1], axis=ax)], axis=ax)
        out += np.maximum(np.maximum(lo, hi), d2)
    return out
