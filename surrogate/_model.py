"""The surrogate runtime: a loaded bundle answering design-table rows in milliseconds.

``load(material, core_type)`` returns a ``SurrogateModel``; its one ``predict(designs)`` takes
what ``deplete`` takes and returns the output columns of the design table (docs/design-table.md) plus ``regime_prob``,
``vbi_low_V``, ``vbi_high_V``, ``in_domain``, ``confirm_with_solver`` and ``ionisation``. Designs outside the
bundle's trained domain are flagged and get no numbers (never extrapolated).
"""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor

import numpy as np

from ._bulk import vbi0_bound
from ._bundle import MAX_BYTES, BundleError, find_bundles, read_bundle
from ._design import REGIMES, DesignTable, normalize_designs
from ._features import DIT_FLOOR, FEATURE_NAMES, FEATURES_VERSION, features
from ._ionisation import check_ionisation, row_dopants
from ._gp import GaussianProcess
from ._single import feature_row, features_one, one_design
from ._trees import TreeEnsemble, serial, threads

#: regime probability below which a design is flagged for the solver (``--confirm`` re-answers it).
#: 0.99: on 4,000 fresh solver runs per bundle (seed 424242 + k, none it was fitted, calibrated
#: or validated on) the regime was wrong on 6-30 rows per bundle; 0.9 left 1-4 of them unflagged,
#: 0.99 left 0-2 (1.3-8.9 % of designs flagged in all, against 0.5-7.6 %); the validation
#: report's ``confirm_*`` figures give the result on the validation seed
#: rows per chunk of a large ``predict``: chunks run whole, one per worker thread, so the
#: depletion features (vectorised numpy, which releases the interpreter lock) share the cores
#: too and memory stays bounded (~1 kB per row with the V_bi smoothing's neighbours)
PREDICT_CHUNK = 8192
CONFIRM_PROB = 0.99
#: a design whose 95 % interval (after the bounds) is wider than +- this is flagged for the solver
#: (issue 5's 99th-percentile error target): by itself it flags 0-6 % of uniform designs of
#: the 0.3 bundles (InP n-core the most), the regime probability 0.5-3 % [V]
CONFIRM_HALF_WIDTH_V = 0.020
#: a reference answer within this of an interval end counts as inside it (validation, ``review``):
#: on both-neutral rows the solver's V_bi equals its V_bi0 to rounding (measured up to 5e-13 V
#: above it) and the interval's upper end is clipped to exactly V_bi0, so a tie is no miss [V]
INTERVAL_TIE_V = 1e-9
MIN_NEUTRAL_NM = 0.05  #: a region the regime keeps is reported with at least this neutral extent [nm]
DOMAIN_SLACK = 0.05  #: a bundle's domain may exceed its fitted data's span by this share of it
#: V_bi's learned residual is averaged over this many designs around each design (1: no smoothing);
#: a bundle records the smoothing its quantiles were calibrated with (``conformal.smooth_points``,
#: ``smooth_dex``) and runs with it; these are the defaults a (re)calibration writes
SMOOTH_POINTS = 8
SMOOTH_DEX = 0.003  #: half-width of that neighbourhood in radius, shell, dopings and D_it [decades]
MAX_SMOOTH_POINTS = 64
SMOOTH_COLUMNS = ("core_radius_nm", "shell_thickness_nm", "core_doping_cm3", "shell_doping_cm3", "dit_cm2eV")
SMOOTH_STRIDES = (1, 3, 5, 7, 3)  #: lattice generator, one odd stride per column (coprime to 8)
AUX = ("core_neutral_radius_nm", "shell_neutral_nm", "surface_bending_V")
#: per-regime probabilities (opt-in ``class_probs``), in the order of ``REGIMES``
PROB_COLUMNS = tuple("prob_" + r.replace("-", "_") for r in REGIMES)
_cache: dict = {}


class SurrogateModel:
    """A bundle's models. Fitted state lives in the trailing-underscore attributes."""

    def __init__(self, meta: dict, arrays: dict, path=None):
        if meta.get("features_version") != FEATURES_VERSION:
            raise BundleError(f"bundle {meta.get('name')}: built for features version "
                              f"{meta.get('features_version')}, this radialpn has {FEATURES_VERSION}")
        self.meta, self.path = meta, path
        fields = _check_meta(meta)
        #: neighbours V_bi's residual is averaged over, and their spread [decades]: as the bundle's
        #: quantiles were calibrated (changing them voids the calibration; benchmarks only)
        self.smooth_points, self.smooth_dex = fields["smooth_points"], fields["smooth_dex"]
        self.name, self.material, self.core_type, self.statistics = fields["identity"]
        #: dopant ionisation model of the training set: "full", or "auto" (incomplete where
        #: ``_ionisation`` turns it on); the depletion features use the same
        self.ionisation_ = fields["ionisation"]
        self.domain, self.fixed = fields["domain"], fields["fixed"]
        self.temperature_, self.q_gbm_, self.q_gp_ = fields["temperature"], fields["q_gbm"], fields["q_gp"]
        # conformal quantiles per predicted regime (Mondrian), indexed by the regime's code
        self.q_gbm_by_regime_, self.q_gp_by_regime_ = fields["q_gbm_by_regime"], fields["q_gp_by_regime"]

        def part(prefix):
            return {k[len(prefix) + 1:]: v for k, v in arrays.items() if k.startswith(prefix + "/")}
        try:
            parts = [("regime", part("regime")), ("vbi", part("vbi")), ("difficulty", part("difficulty"))]
            parts += [(t, part(f"aux_{t}")) for t in AUX]
            ensembles = [TreeEnsemble(a) for _, a in parts]
            self.parts_ = dict(zip((name for name, _ in parts), ensembles))
            if ensembles[0].n_outputs != len(REGIMES) or any(e.n_outputs != 1 for e in ensembles[1:]):
                raise ValueError("tree models have the wrong number of outputs")
            self.forest_ = TreeEnsemble.stack(ensembles)  # one walk answers every tree model
            edges = np.cumsum([0] + [e.n_outputs for e in ensembles])
            self.slices_ = {name: slice(a, b) for (name, _), a, b in zip(parts, edges[:-1], edges[1:])}
            self.vbi_forest_ = TreeEnsemble(part("vbi"))  # alone, for the smoothing neighbours
            self.gp_ = GaussianProcess(part("gp"))
            self.gp_mean_, self.gp_scale_ = arrays["gp/x_mean"], arrays["gp/x_scale"]
            self.ref_X_ = arrays["ref/X"]
            ref = {n: arrays[f"ref/{n}_raw"] for n in ("regime", "vbi", "difficulty")}
            d = len(FEATURE_NAMES)
            if self.ref_X_.ndim != 2 or self.ref_X_.shape[1] != d or self.gp_.X.shape[1] != d \
                    or self.gp_mean_.shape != (d,) or self.gp_scale_.shape != (d,) or not (self.gp_scale_ > 0).all():
                raise ValueError(f"feature arrays do not have {d} columns")
            if self.forest_.feature.max(initial=0) >= d or self.forest_.feature.min(initial=0) < 0:
                raise ValueError("a tree splits on a feature that does not exist")
            self.forest_._renumbered()  # the fast walk's numbering: each node but a root has one parent
        except (KeyError, ValueError, IndexError, TypeError) as exc:
            raise BundleError(f"bundle {self.name}: arrays incomplete or inconsistent ({exc})") from None
        raw = self.forest_.raw_numpy(self.ref_X_)
        for n, want in ref.items():  # the numpy evaluator must reproduce the fitted models
            if want.shape != raw[:, self.slices_[n]].shape or not np.allclose(raw[:, self.slices_[n]], want, rtol=0,
                                                                            atol=1e-9):
                raise BundleError(f"bundle {self.name}: trees do not reproduce their reference rows")
        self._check_domain_against_data()
        self._forests = {MODELS: (self.forest_, self.slices_)}

    def _forest(self, models: tuple):
        """(ensemble, output slices) of just the tree models ``models`` (stacked once, cached)."""
        if models not in self._forests:
            parts = [(m, self.parts_[m]) for m in MODELS if m in models]
            edges = np.cumsum([0] + [e.n_outputs for _, e in parts])
            self._forests[models] = (TreeEnsemble.stack([e for _, e in parts]),
                                     {m: slice(a, b) for (m, _), a, b in zip(parts, edges[:-1], edges[1:])})
        return self._forests[models]

    def _check_domain_against_data(self):
        """The stated domain must lie inside the span of the design variables the models were
        fitted on (the GP's training points, a sample of the training set), widened by
        ``DOMAIN_SLACK`` of that span: a widened domain would call extrapolation in-domain."""
        X = self.gp_.X * self.gp_scale_ + self.gp_mean_
        transforms, offsets = self.meta.get("transforms", {}), self.meta.get("offsets", {})
        for col, (lo, hi) in self.domain.items():
            j = FEATURE_INDEX.get(col)
            if j is None:
                continue
            # the fitted designs in the column's unit, compared in the space the spec sampled
            x = X[:, j] if col not in LOG_FEATURES else np.maximum(10.0 ** X[:, j] - (DIT_FLOOR if col == "dit_cm2eV"
                                                                                       else 0.0), 0.0)
            tr = transforms.get(col, "log" if col in LOG_FEATURES else "linear")
            s = float(offsets.get(col, 0.0)) if tr == "shifted-log" else 0.0
            f = (lambda v, s=s: np.log10(np.asarray(v) + s)) if tr in ("log", "shifted-log") else (lambda v: v)
            with np.errstate(divide="ignore"):
                seen = f(x)
            seen_lo, seen_hi = float(seen.min()), float(seen.max())
            slack = DOMAIN_SLACK * (seen_hi - seen_lo)
            if f(lo) < seen_lo - slack or f(hi) > seen_hi + slack:
                raise BundleError(f"bundle {self.name}: domain of {col} [{lo:g}, {hi:g}] is wider than the data the "
                                  "models were fitted on")

    def __repr__(self) -> str:
        return f"SurrogateModel({self.name!r}: {self.material} {self.core_type}-core, {self.statistics})"

    def domain_check(self, table: DesignTable) -> np.ndarray:
        """Per row: "" inside the trained domain, else the first reason it is outside."""
        if table.n == 1 and table.status[0] == "ok":
            return np.array([self._domain_one(table)], dtype=object)
        why = np.full(table.n, "", dtype=object)
        mat_ok = table.material == self.material
        why[~mat_ok] = f"outside the model's domain: material is not {self.material}"
        ct_ok = table.p_core == (self.core_type == "p")
        why[(why == "") & ~ct_ok] = f"outside the model's domain: core_type is not {self.core_type}"
        for col, (lo, hi) in self.domain.items():
            x = table.values[col]
            if col == "cnl_eV":  # blank means the material's default, which must lie inside too
                from ._materials import get_material

                x = np.where(np.isnan(x), get_material(self.material).cnl_eV, x)
            bad = (why == "") & ~((x >= lo * (1 - 1e-12)) & (x <= hi * (1 + 1e-12)))
            if bad.any():
                why[bad] = [f"outside the model's domain: {col} {v:g} not in [{lo:g}, {hi:g}]" for v in x[bad]]
        for col, v in self.fixed.items():
            bad = (why == "") & (table.values[col] != float(v))
            why[bad] = f"outside the model's domain: {col} must be {float(v):g}"
        return why

    def _domain_one(self, table: DesignTable) -> str:
        """``domain_check`` of a one-row table in plain floats (the same tests, in the same order)."""
        if table.material[0] != self.material:
            return f"outside the model's domain: material is not {self.material}"
        if bool(table.p_core[0]) != (self.core_type == "p"):
            return f"outside the model's domain: core_type is not {self.core_type}"
        for col, (lo, hi) in self.domain.items():
            x = float(table.values[col][0])
            if col == "cnl_eV" and x != x:
                from ._materials import get_material

                x = get_material(self.material).cnl_eV
            if not (x >= lo * (1 - 1e-12) and x <= hi * (1 + 1e-12)):
                return f"outside the model's domain: {col} {x:g} not in [{lo:g}, {hi:g}]"
        for col, v in self.fixed.items():
            if float(table.values[col][0]) != float(v):
                return f"outside the model's domain: {col} must be {float(v):g}"
        return ""

    def predict(self, designs, second_opinion: bool = False, class_probs: bool = False, models=None,
                ionisation: str | None = None) -> dict:
        """Answer designs (mapping of column -> array, list of row dicts, or DataFrame).

        Returns a mapping of output columns to numpy arrays, one entry per input row.
        ``second_opinion``: also evaluate the Gaussian process (``vbi_gp_V``, ``vbi_gp_low_V``,
        ``vbi_gp_high_V``) and flag designs where it disagrees with the trees; slower in large
        batches (about 2e4 rows/s against 1e5 without; benchmarks/bench_surrogate.py).
        ``class_probs``: also return the probability of each regime, ``PROB_COLUMNS`` [1]
        (the temperature-scaled softmax whose maximum is ``regime_prob``).
        ``models``: evaluate only these of ``MODELS`` (default all; a question that reads only
        some columns saves the others' trees): ``"vbi"`` gives ``vbi_V``, ``"difficulty"`` the
        interval, ``"regime"`` the regime and its probability, an extent model
        its column (and brings ``"regime"``, which clips it). Columns of models left out are NaN
        (regime ""); the rest are those of the full evaluation, but ``confirm_with_solver``
        reads only the models evaluated (False without the regime).
        ``ionisation``: the dopant ionisation model asked for ("auto", "full" or "incomplete";
        None: the bundle's own, ``ionisation_``); a row it resolves differently from the
        bundle's training set is refused with a status saying so. The ``ionisation`` column
        names the model each answered row used.
        """
        models = _needed(models, second_opinion)
        table = designs if isinstance(designs, DesignTable) else (one_design(designs) or normalize_designs(designs))
        nt = threads()
        if table.n >= 2 * PREDICT_CHUNK and nt > 1:
            return self._predict_split(table, nt, second_opinion, class_probs, models, ionisation)
        if ionisation is not None:
            ionisation = check_ionisation(ionisation)
            refused = row_dopants(table, ionisation)[1]  # "incomplete" for a material without dopant levels
            if refused is not None:
                table = DesignTable(table.n, table.material, table.p_core, table.values, refused)
        n = table.n
        why = self.domain_check(table)
        status = table.status.copy()
        ok = status == "ok"
        status[ok & (why != "")] = why[ok & (why != "")]
        in_domain = ok & (why == "")
        incomplete = row_dopants(table, self.ionisation_)[0] if in_domain.any() else np.zeros(n, dtype=bool)
        if ionisation is not None and ionisation != self.ionisation_ and in_domain.any():
            differs = in_domain & (row_dopants(table, ionisation)[0] != incomplete)
            if differs.any():
                status[differs] = [f"surrogate: ionisation {ionisation!r} gives this design "
                                   f"{'incomplete' if not x else 'full'} ionisation; the bundle learned "
                                   f"{'incomplete' if x else 'full'} ionisation here (its training set: "
                                   f"{self.ionisation_!r})" for x in incomplete[differs]]
                in_domain &= ~differs
        out = {k: c for k, c in zip(("vbi_V", "vbi0_V", "core_neutral_radius_nm", "shell_neutral_nm",
                                                 "surface_bending_V", "regime_prob", "vbi_low_V", "vbi_high_V"), _nans(8, n))}
        regime = np.full(n, "", dtype=object)
        confirm = np.zeros(n, dtype=bool)
        gp_cols = dict(zip(("vbi_gp_V", "vbi_gp_low_V", "vbi_gp_high_V"), _nans(3, n))) if second_opinion else {}
        prob_cols = dict(zip(PROB_COLUMNS, _nans(len(PROB_COLUMNS), n))) if class_probs else {}
        rows = np.flatnonzero(in_domain)
        if rows.size:
            sub = table.take(rows)
            inc_sub = incomplete[rows]
            one = features_one(sub, self.statistics, self.ionisation_, bool(inc_sub[0])) if sub.n == 1 else None  # scalar
            X, da = one if one is not None else features(sub, self.statistics, self.ionisation_)
            good = np.isfinite(X).all(1) & (da["status"] == "ok")
            # a batch's V_bi comes from its neighbours' walk (``_vbi_centre``): the centre's own
            # V_bi trees are walked only where that cannot answer
            lazy = "vbi" in models and sub.n > 1 and self.smooth_points > 1
            walked = tuple(m for m in models if m != "vbi") if lazy else models
            raw = np.full((X.shape[0], self.forest_.n_outputs), np.nan)
            if walked:
                forest, sl = self._forest(walked)
                part = forest.raw(X)
                for name, where in sl.items():
                    raw[:, self.slices_[name]] = part[:, where]
            sl = self.slices_
            z = raw[:, sl["regime"]] / self.temperature_
            z -= z.max(1, keepdims=True)
            p = np.exp(z)
            p /= p.sum(1, keepdims=True)
            code = p.argmax(1)
            # bounds by construction: 0 <= V_bi <= V_bi0 for the estimate and both interval ends
            # (the electrostatic barrier cannot exceed the bulk one on a depleting surface nor be negative)
            # the solver's V_bi0 (both carriers in the bulk neutrality), which the depletion engine's
            # majority-only V_bi0 undershoots where n_i nears a doping (hot Ge, InAs)
            vbi0 = vbi0_bound(sub, da["vbi0_V"], self.statistics, self.ionisation_)
            residual = raw[:, sl["vbi"]][:, 0]  # NaN when "vbi" is not evaluated: no neighbours then
            centre = self._vbi_centre(sub, da, None if lazy else residual, inc_sub, X) if "vbi" in models \
                else da["vbi_V"] + residual
            half = self.q_gbm_by_regime_[code] * np.exp(raw[:, sl["difficulty"]][:, 0])
            vbi = np.clip(centre, 0.0, vbi0)
            names = np.array(REGIMES, dtype=object)
            regime[rows] = names[code]
            out["regime_prob"][rows] = p.max(1)
            for k, col in enumerate(prob_cols.values()):
                col[rows] = p[:, k]
            out["vbi_V"][rows] = vbi
            low, high = np.clip(centre - half, 0.0, vbi0), np.clip(centre + half, 0.0, vbi0)
            out["vbi_low_V"][rows], out["vbi_high_V"][rows] = low, high
            out["vbi0_V"][rows] = vbi0
            # extents follow the regime: zero where it empties a region; where it keeps one, at
            # least MIN_NEUTRAL_NM (a contradicting extent model is overruled and the row flagged)
            core_kept, shell_kept = (code == 0) | (code == 2), (code == 0) | (code == 1)
            flag = (p.max(1) < CONFIRM_PROB) | (0.5 * (high - low) > CONFIRM_HALF_WIDTH_V)  # no GP needed
            for t in AUX:
                val = da[t] + raw[:, sl[t]][:, 0]
                for col, dim, kept in (("core_neutral_radius_nm", "core_radius_nm", core_kept),
                                       ("shell_neutral_nm", "shell_thickness_nm", shell_kept)):
                    if t == col:
                        flag |= kept & (val < MIN_NEUTRAL_NM)
                        val = np.where(kept, np.clip(val, MIN_NEUTRAL_NM, sub.values[dim]), 0.0)
                if t == "surface_bending_V":  # no surface states, no surface field: exactly flat (as the solver)
                    val = np.where(sub.values["dit_cm2eV"] == 0, 0.0, val)
                out[t][rows] = val
            if second_opinion:
                gm, gs = self.gp_.predict((X - self.gp_mean_) / self.gp_scale_)
                gv = da["vbi_V"] + gm
                gh = self.q_gp_by_regime_[code] * gs
                # the same physical bounds as the trees' answer, for the estimate and both ends
                gp_cols["vbi_gp_V"][rows] = np.clip(gv, 0.0, vbi0)
                gp_cols["vbi_gp_low_V"][rows] = np.clip(gv - gh, 0.0, vbi0)
                gp_cols["vbi_gp_high_V"][rows] = np.clip(gv + gh, 0.0, vbi0)
                flag |= np.abs(gv - vbi) > np.maximum(half, gh)
            if "regime" not in models:
                regime[rows] = ""
                flag[:] = False
                for v in [out["regime_prob"]] + list(prob_cols.values()):
                    v[rows] = np.nan
            for t in AUX:
                if t not in models:
                    out[t][rows] = np.nan
            if "vbi" not in models:
                out["vbi_V"][rows] = np.nan
            if "difficulty" not in models or "vbi" not in models:
                out["vbi_low_V"][rows] = out["vbi_high_V"][rows] = np.nan
            confirm[rows] = flag
            bad = rows[~good]
            if bad.size:
                status[bad] = "surrogate: the depletion features are undefined for this design; use the solver"
                for v in list(out.values()) + list(gp_cols.values()) + list(prob_cols.values()):
                    v[bad] = np.nan
                regime[bad] = ""
        return {"regime": regime, **{k: out[k] for k in ("vbi_V", "vbi0_V", "core_neutral_radius_nm",
                                                           "shell_neutral_nm", "surface_bending_V")},
                "engine": np.full(n, "surrogate", dtype=object), "status": status, "regime_prob": out["regime_prob"],
                "vbi_low_V": out["vbi_low_V"], "vbi_high_V": out["vbi_high_V"], "in_domain": in_domain,
                "confirm_with_solver": confirm,
                "ionisation": np.where(status == "ok", np.where(incomplete, "incomplete", "full"), "").astype(object),
                **gp_cols, **prob_cols}

    def _predict_split(self, table: DesignTable, nt: int, *args) -> dict:
        """``predict`` of a large table as chunks of about ``PREDICT_CHUNK`` rows over ``nt``
        threads (each chunk whole in one thread: ``serial``), joined in row order. Every row's
        answer is its own (nothing in ``predict`` couples rows), so the same numbers as one
        call, and memory bounded by ``nt`` chunks (the V_bi smoothing's neighbours are 8 rows a
        design). Chunks are of equal size, never one row (the single-design path)."""
        parts = -(-table.n // PREDICT_CHUNK)
        edges = np.linspace(0, table.n, parts + 1).astype(np.intp)

        def work(i):
            with serial():
                return self.predict(table.take(slice(edges[i], edges[i + 1])), *args)

        with ThreadPoolExecutor(min(nt, parts)) as pool:
            done = list(pool.map(work, range(parts)))
        return {k: np.concatenate([d[k] for d in done]) for k in done[0]}

    def _vbi_centre(self, sub: DesignTable, da: dict, residual, incomplete=None, X=None) -> np.ndarray:
        """V_bi before the bounds [V]: the depletion engine's V_bi plus the trees' residual [V]
        averaged over ``SMOOTH_POINTS`` designs within +-``SMOOTH_DEX`` decades of radius,
        shell, dopings and D_it (``smooth_offsets``). Trees are step functions of their inputs,
        and where the residual is steep many trees split at the same feature bin, so a 0.05 nm
        step could move V_bi by 10 mV where the solver moves 1 mV; the average is the uniform
        kernel smoothing of the residual over that box by a rank-1 lattice rule (Sloan & Joe,
        Lattice Methods for Multiple Integration, Oxford 1994, from memory), which splits each such
        jump into ``SMOOTH_POINTS`` smaller ones. Rows whose neighbours the depletion engine
        cannot answer keep the unsmoothed residual. The conformal quantiles are calibrated on
        this centre (``conformal_scores``). ``incomplete``: the rows' resolved ionisation, if
        known (the neighbours share it: it depends on material and temperature alone).
        ``residual``: the trees' residual at each design [V], or None with ``X`` the designs'
        features: then it is walked only for the rows that need it (no smoothing, or neighbours
        the depletion engine cannot answer)."""
        off = smooth_offsets(self.smooth_points, self.smooth_dex)
        k, n = off.shape[0], sub.n
        if residual is None and (k <= 1 or n <= 1):
            residual = self.vbi_forest_.raw(X)[:, 0] if n else np.zeros(0)
        if k <= 1 or n == 0:
            return da["vbi_V"] + residual
        if n == 1 and sub.status[0] == "ok":  # one design: its neighbours in plain floats (same numbers, ~4x faster)
            inc = (self.ionisation_ != "full" and bool(row_dopants(sub, self.ionisation_)[0][0])) if incomplete is None \
                else bool(incomplete[0])  # the neighbours share it (material and temperature alone)
            near_rows = []
            if not inc:
                base = {c: float(x[0]) for c, x in sub.values.items()}
                material, p_core = str(sub.material[0]), bool(sub.p_core[0])
                for scale in _smooth_scales(self.smooth_points, self.smooth_dex):
                    vals = dict(base)
                    for c, s in zip(SMOOTH_COLUMNS, scale):
                        vals[c] = base[c] * s
                    got = feature_row(vals, material, p_core, self.statistics)
                    if got is None:
                        break  # the general path below decides (and keeps the unsmoothed residual)
                    near_rows.append(got[0])
            if len(near_rows) == k:
                return da["vbi_V"] + self.vbi_forest_.raw(np.array(near_rows))[:, 0].reshape(k, 1).mean(0)
        values = {c: np.tile(v, k) for c, v in sub.values.items()}
        for j, c in enumerate(SMOOTH_COLUMNS):
            values[c] = values[c] * np.repeat(10.0 ** off[:, j], n)
        near = DesignTable(n=n * k, material=np.tile(sub.material, k), p_core=np.tile(sub.p_core, k), values=values,
                           status=np.tile(sub.status, k))
        Xn, dan = features(near, self.statistics, self.ionisation_)
        good = (np.isfinite(Xn).all(1) & (dan["status"] == "ok")).reshape(k, n).all(0)
        res = np.full(n, np.nan)
        if good.any():
            g = np.flatnonzero(good)
            res[g] = self.vbi_forest_.raw_smoothed(Xn.reshape(k, n, -1)[:, g, :])[:, 0]
        if not good.all():
            bad = np.flatnonzero(~good)
            res[bad] = residual[bad] if X is None else self.vbi_forest_.raw(X[bad])[:, 0]
        return da["vbi_V"] + res

    def conformal_scores(self, designs, vbi_V) -> dict:
        """Calibration scores of designs whose true ``vbi_V`` [V] is known (solver answers):
        ``group`` (predicted regime code), ``tree`` = |V_bi - centre| / scale of the trees'
        unclipped interval and ``gp`` = |V_bi - GP mean| / GP std, NaN where the surrogate does
        not answer. What the bundle's conformal quantiles are computed from."""
        table = designs if isinstance(designs, DesignTable) else normalize_designs(designs)
        y = np.broadcast_to(np.asarray(vbi_V, dtype=float), (table.n,))
        out = {"group": np.full(table.n, -1), "tree": np.full(table.n, np.nan), "gp": np.full(table.n, np.nan)}
        rows = np.flatnonzero((table.status == "ok") & (self.domain_check(table) == ""))
        if rows.size:
            X, da = features(table.take(rows), self.statistics, self.ionisation_)
            raw = self.forest_.raw(X)
            sl = self.slices_
            centre = self._vbi_centre(table.take(rows), da, raw[:, sl["vbi"]][:, 0])
            gm, gs = self.gp_.predict((X - self.gp_mean_) / self.gp_scale_)
            good = np.isfinite(X).all(1) & (da["status"] == "ok")
            out["group"][rows] = np.where(good, raw[:, sl["regime"]].argmax(1), -1)
            out["tree"][rows] = np.where(good, np.abs(y[rows] - centre) / np.exp(raw[:, sl["difficulty"]][:, 0]), np.nan)
            out["gp"][rows] = np.where(good, np.abs(y[rows] - da["vbi_V"] - gm) / gs, np.nan)
        return out


_SCALES: dict = {}  #: (k, dex) -> per neighbour, the factors 10**offset of ``SMOOTH_COLUMNS`` (floats)


def _smooth_scales(k: int, dex: float) -> tuple:
    """``10.0 ** smooth_offsets(k, dex)`` as tuples of Python floats, built once per (k, dex)."""
    key = (int(k), float(dex))
    if key not in _SCALES:
        _SCALES[key] = tuple(tuple(float(10.0 ** o) for o in row) for row in smooth_offsets(*key))
    return _SCALES[key]


def smooth_offsets(k: int = SMOOTH_POINTS, dex: float = SMOOTH_DEX) -> np.ndarray:
    """(k, 5) offsets [decades] of ``SMOOTH_COLUMNS``: the rank-1 lattice
    u_ij = ((i g_j) mod k + 1/2) / k mapped to +-``dex``; with every stride g_j coprime to k
    each column takes k equally spaced levels once (mean exactly 0)."""
    k = max(int(k), 1)
    u = ((np.arange(k)[:, None] * np.array(SMOOTH_STRIDES)) % k + 0.5) / k
    return (2.0 * u - 1.0) * dex


MODELS = ("regime", "vbi", "difficulty") + AUX  #: a bundle's tree models, in their stacked order


def _nans(k: int, n: int) -> np.ndarray:
    """k NaN-filled columns of n rows in one allocation (each row a separate output column)."""
    return np.full((k, n), np.nan)


def _needed(models, second_opinion=False) -> tuple:
    """``models`` (None: all) as a tuple in ``MODELS`` order, with what they depend on."""
    if models is None:
        return MODELS
    want = set(models)
    unknown = want - set(MODELS)
    if unknown:
        raise ValueError(f"models: each one of {', '.join(MODELS)} (got {sorted(unknown)[0]!r})")
    if want & set(AUX):
        want.add("regime")  # the regime clips the extents
    if "difficulty" in want:
        want.add("regime")  # the interval's conformal quantile is the predicted regime's
    if second_opinion:
        want |= {"vbi", "difficulty"}  # the GP's disagreement flag compares with the interval
    return tuple(m for m in MODELS if m in want)


FEATURE_INDEX = {"core_radius_nm": 0, "shell_thickness_nm": 1, "core_doping_cm3": 2, "shell_doping_cm3": 3,
                 "dit_cm2eV": 4, "cnl_eV": 5, "temperature_K": 6}  #: design column -> its feature (FEATURE_NAMES)
LOG_FEATURES = ("core_radius_nm", "shell_thickness_nm", "core_doping_cm3", "shell_doping_cm3", "dit_cm2eV")


def _check_meta(meta: dict) -> dict:
    """Field-by-field check of bundle.json: identity, domain, fixed values, calibration."""
    from ._design import NUMERIC
    from ._errors import MaterialError
    from ._materials import get_material, material_default, material_parameters
    from ._statistics import STATISTICS

    name = meta.get("name")
    where = f"bundle {name!r}"

    def need(cond, what):
        if not cond:
            raise BundleError(f"{where}: bundle.json {what}")

    need(isinstance(name, str) and name, "has no name")
    try:
        material = get_material(str(meta.get("material"))).name
    except MaterialError:
        raise BundleError(f"{where}: bundle.json names an unknown material {meta.get('material')!r}") from None
    need(meta.get("core_type") in ("p", "n"), "core_type must be p or n")
    recorded = meta.get("material_parameters")  # absent in bundles written before 0.3
    if recorded is not None:
        need(isinstance(recorded, dict), "material_parameters must be a table")
        now = material_parameters(get_material(material))
        for key, v in now.items():
            # a field a later radialpn added is absent from older bundles: it matches at its default
            r = recorded.get(key, material_default(key))
            same = (r is None and v is None) or (isinstance(r, (int, float)) and not isinstance(r, bool) and v is not None
                                                 and abs(r - v) <= 1e-12 * max(abs(v), 1e-300))
            need(same, f"records {material} with {key} = {r} (its training set); the material table now gives {v}: "
                 "retrain it for this definition (`radialpn train`)")
    need(meta.get("statistics") in STATISTICS, f"statistics must be one of {', '.join(STATISTICS)}")
    dom = meta.get("domain")
    need(isinstance(dom, dict) and dom, "has no domain")
    domain = {}
    for col, v in dom.items():
        need(col in NUMERIC and isinstance(v, (list, tuple)) and len(v) == 2, f"domain entry {col!r} is malformed")
        lo, hi = (float(x) if isinstance(x, (int, float)) and not isinstance(x, bool) else np.nan for x in v)
        a, b = NUMERIC[col][:2]
        need(np.isfinite([lo, hi]).all() and a <= lo < hi <= b, f"domain of {col} {v} is not inside [{a:g}, {b:g}]")
        domain[col] = (lo, hi)
    transforms, offsets = meta.get("transforms", {}), meta.get("offsets", {})
    need(isinstance(transforms, dict) and isinstance(offsets, dict), "transforms and offsets must be tables")
    for col, tr in transforms.items():
        need(col in domain and tr in ("log", "linear", "shifted-log"),
             f"transform of {col!r} must be log, linear or shifted-log for a domain column (got {tr!r})")
        if tr == "shifted-log":
            s = offsets.get(col)
            need(isinstance(s, (int, float)) and not isinstance(s, bool) and np.isfinite(s) and s > 0,
                 f"offsets.{col} must be a finite positive number for its shifted-log transform (got {s!r})")
        elif tr == "log":
            need(domain[col][0] > 0, f"domain of {col} must start above 0 for its log transform")
    fixed = meta.get("fixed", {})
    need(isinstance(fixed, dict) and all(c in NUMERIC and isinstance(x, (int, float)) and np.isfinite(x)
                                         for c, x in fixed.items()), "fixed values are malformed")
    conf = meta.get("conformal")
    need(isinstance(conf, dict), "has no conformal calibration")
    vals = {}
    for key, src in (("temperature", meta.get("temperature")), ("q_gbm", conf.get("q_gbm")), ("q_gp", conf.get("q_gp"))):
        ok = isinstance(src, (int, float)) and not isinstance(src, bool) and np.isfinite(src) and 0 < src < 1e3
        need(ok, f"{key} must be a finite positive number (got {src!r})")
        vals[key] = float(src)
    vals.update(_check_groups(conf, vals, need))
    # the centre the quantiles were calibrated on; absent: written before smoothing, so none
    k, dex = conf.get("smooth_points", 1), conf.get("smooth_dex", 0.0)
    need(isinstance(k, int) and not isinstance(k, bool) and 1 <= k <= MAX_SMOOTH_POINTS,
         f"conformal.smooth_points must be a count in [1, {MAX_SMOOTH_POINTS}] (got {k!r})")
    need(isinstance(dex, (int, float)) and not isinstance(dex, bool) and np.isfinite(dex) and 0 <= dex <= 0.05,
         f"conformal.smooth_dex must be in [0, 0.05] decades (got {dex!r})")
    vals.update(smooth_points=k, smooth_dex=float(dex))
    ion = meta.get("ionisation", "full")  # absent: a bundle of radialpn <= 0.2, trained with full ionisation
    need(ion in ("full", "auto"), f"ionisation must be 'full' or 'auto' (got {ion!r})")
    vals["ionisation"] = ion
    return {"identity": (name, material, meta["core_type"], meta["statistics"]), "domain": domain,
            "fixed": {c: float(x) for c, x in fixed.items()}, **vals}


def _check_groups(conf: dict, pooled: dict, need) -> dict:
    """Per-regime conformal quantiles of ``conformal.groups`` (Mondrian calibration), one entry
    per regime with ``rows`` (a count), ``q_gbm`` and ``q_gp`` (finite, positive) and ``pooled``
    (true where the group was too small and carries the pooled quantiles). A bundle written
    before per-regime calibration has no ``groups``: every regime uses the pooled quantiles, as
    that bundle was calibrated (marginal coverage only)."""
    groups = conf.get("groups")
    if groups is None:
        return {"q_gbm_by_regime": np.full(len(REGIMES), pooled["q_gbm"]),
                "q_gp_by_regime": np.full(len(REGIMES), pooled["q_gp"])}
    need(isinstance(groups, dict) and set(groups) == set(REGIMES),
         f"conformal.groups must have one entry per regime ({', '.join(REGIMES)})")
    need(conf.get("groups_by") == "predicted_regime", "conformal.groups_by must be 'predicted_regime'")
    q = {"q_gbm": np.empty(len(REGIMES)), "q_gp": np.empty(len(REGIMES))}
    for i, r in enumerate(REGIMES):
        g = groups[r]
        need(isinstance(g, dict), f"conformal.groups.{r} is malformed")
        n = g.get("rows")
        need(isinstance(n, int) and not isinstance(n, bool) and n >= 0,
             f"conformal.groups.{r}.rows must be a count (got {n!r})")
        need(isinstance(g.get("pooled"), bool), f"conformal.groups.{r}.pooled must be true or false")
        for key in q:
            v = g.get(key)
            ok = isinstance(v, (int, float)) and not isinstance(v, bool) and np.isfinite(v) and 0 < v < 1e3
            need(ok, f"conformal.groups.{r}.{key} must be a finite positive number (got {v!r})")
            q[key][i] = float(v)
    return {"q_gbm_by_regime": q["q_gbm"], "q_gp_by_regime": q["q_gp"]}


def load_bundle(path) -> SurrogateModel:
    """Load (and verify) the bundle in directory ``path``."""
    if not isinstance(path, (str, os.PathLike)):
        raise BundleError(f"bundle: expected a directory path (got {type(path).__name__})")
    meta, arrays = read_bundle(path)
    return SurrogateModel(meta, arrays, path)


def load(material: str = "GaAs", core_type: str = "p") -> SurrogateModel:
    """The installed bundle for a material and core type (cached after the first load)."""
    from ._errors import DesignError
    from ._materials import get_material

    ct = str(core_type).strip().lower().removesuffix("-core")
    if ct not in ("p", "n"):
        raise DesignError("core_type", "p or n", core_type)
    key = (get_material(material).name, ct)
    if key not in _cache:
        for name, material, core, path in available():  # reads bundle.json only; arrays of the match
            if (material, core) == key:
                meta, arrays = read_bundle(path)
                _cache[key] = SurrogateModel(meta, arrays, path)
                break
        else:
            have = ", ".join(sorted(find_bundles())) or "none installed"
            raise BundleError(f"no surrogate bundle for {key[0]} {key[1]}-core (bundles: {have}); "
                              "use the solver engine or build one with `radialpn train`")
    return _cache[key]


def available() -> list:
    """(name, material, core_type, path) of every bundle found, without loading arrays."""
    import json

    out = []
    for name, path in find_bundles().items():
        try:
            if (path / "bundle.json").stat().st_size > MAX_BYTES["bundle.json"]:
                raise ValueError("too large")
            meta = json.loads((path / "bundle.json").read_text(encoding="utf-8"))
            out.append((name, meta.get("material"), meta.get("core_type"), path))
        except (OSError, ValueError, AttributeError, RecursionError):
            out.append((name, None, None, path))
    return out


def predict_bundles(designs, second_opinion: bool = False, class_probs: bool = False, models=None,
                    ionisation: str | None = None) -> dict:
    """Answer designs of any material/core type with the matching bundles (rows without one
    get a status). ``class_probs`` adds ``PROB_COLUMNS``; ``models`` and ``ionisation`` as for
    ``predict``."""
    table = designs if isinstance(designs, DesignTable) else normalize_designs(designs)
    n = table.n
    if n == 1 and table.status[0] == "ok":  # one design: its bundle's answer is the whole answer
        try:
            model = load(table.material[0], "p" if table.p_core[0] else "n")
        except BundleError:
            pass
        else:
            return model.predict(table, second_opinion, class_probs, models, ionisation)
    result = None
    from ._design import categories

    if n and (table.material == table.material[0]).all():  # one material (the usual case): no text scan
        names, inv = [table.material[0]], np.zeros(n, dtype=np.intp)
    else:
        names, inv = categories(table.material, n)
    keys = [(m, pc, (inv == k) & (table.p_core == pc)) for k, m in enumerate(names) if m for pc in (False, True)]
    for mat, pc, same in sorted((k for k in keys if k[2].any()), key=lambda k: k[:2]):
        sel = np.flatnonzero(same & (table.status == "ok"))
        try:
            model = load(mat, "p" if pc else "n")
        except BundleError as exc:
            part = {"status": np.full(sel.size, str(exc), dtype=object)}
        else:
            part = model.predict(table.take(sel), second_opinion, class_probs, models, ionisation)
        if result is None:
            result = empty_result(n, second_opinion, table.status, class_probs)
        for k, v in part.items():
            if k in result:
                result[k][sel] = v
    return result if result is not None else empty_result(n, second_opinion, table.status, class_probs)


def empty_result(n, second_opinion, status, class_probs=False):
    """Surrogate output columns with no answers (NaN, "", False), ``status`` copied."""
    cols = {"regime": np.full(n, "", dtype=object)}
    for k in ("vbi_V", "vbi0_V", "core_neutral_radius_nm", "shell_neutral_nm", "surface_bending_V"):
        cols[k] = np.full(n, np.nan)
    cols.update(engine=np.full(n, "surrogate", dtype=object), status=status.copy(), regime_prob=np.full(n, np.nan),
                vbi_low_V=np.full(n, np.nan), vbi_high_V=np.full(n, np.nan), in_domain=np.zeros(n, dtype=bool),
                confirm_with_solver=np.zeros(n, dtype=bool), ionisation=np.full(n, "", dtype=object))
    if second_opinion:
        cols.update({k: np.full(n, np.nan) for k in ("vbi_gp_V", "vbi_gp_low_V", "vbi_gp_high_V")})
    if class_probs:
        cols.update({k: np.full(n, np.nan) for k in PROB_COLUMNS})
    return cols
