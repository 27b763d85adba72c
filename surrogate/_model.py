"""The surrogate runtime: a loaded bundle answering design-table rows in milliseconds.

``load(material, core_type)`` returns a ``SurrogateModel``; its one ``predict(designs)`` takes
what ``deplete`` takes and returns the output columns of the design table (docs/design-table.md) plus ``regime_prob``,
``vbi_low_V``, ``vbi_high_V``, ``in_domain`` and ``confirm_with_solver``. Designs outside the
bundle's trained domain are flagged and get no numbers (never extrapolated).
"""

from __future__ import annotations

import numpy as np

from ._bundle import BundleError, find_bundles, read_bundle
from ._design import REGIMES, DesignTable, normalize_designs
from ._features import FEATURES_VERSION, features
from ._gp import GaussianProcess
from ._trees import TreeEnsemble

CONFIRM_PROB = 0.9  #: regime probability below which a design is flagged for the solver
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
        self.name, self.material, self.core_type = meta["name"], meta["material"], meta["core_type"]
        self.statistics = meta["statistics"]
        self.domain = {k: (float(v[0]), float(v[1])) for k, v in meta["domain"].items()}
        self.fixed = dict(meta.get("fixed", {}))

        def part(prefix):
            return {k[len(prefix) + 1:]: v for k, v in arrays.items() if k.startswith(prefix + "/")}
        try:
            parts = [("regime", part("regime")), ("vbi", part("vbi")), ("difficulty", part("difficulty"))]
            parts += [(t, part(f"aux_{t}")) for t in AUX]
            ensembles = [TreeEnsemble(a) for _, a in parts]
            self.forest_ = TreeEnsemble.stack(ensembles)  # one walk answers every tree model
            edges = np.cumsum([0] + [e.n_outputs for e in ensembles])
            self.slices_ = {name: slice(a, b) for (name, _), a, b in zip(parts, edges[:-1], edges[1:])}
            self.gp_ = GaussianProcess(part("gp"))
            self.gp_mean_, self.gp_scale_ = arrays["gp/x_mean"], arrays["gp/x_scale"]
            self.ref_X_ = arrays["ref/X"]
            ref = {n: arrays[f"ref/{n}_raw"] for n in ("regime", "vbi", "difficulty")}
        except (KeyError, ValueError) as exc:
            raise BundleError(f"bundle {self.name}: arrays incomplete or inconsistent ({exc})") from None
        raw = self.forest_.raw_numpy(self.ref_X_)
        for n, want in ref.items():  # the numpy evaluator must reproduce the fitted models
            if not np.allclose(raw[:, self.slices_[n]], want, rtol=0, atol=1e-9):
                raise BundleError(f"bundle {self.name}: trees do not reproduce their reference rows")
        self.temperature_ = float(meta["temperature"])
        self.q_gbm_ = float(meta["conformal"]["q_gbm"])
        self.q_gp_ = float(meta["conformal"]["q_gp"])

    def __repr__(self) -> str:
        return f"SurrogateModel({self.name!r}: {self.material} {self.core_type}-core, {self.statistics})"

    def domain_check(self, table: DesignTable) -> np.ndarray:
        """Per row: "" inside the trained domain, else the first reason it is outside."""
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

    def predict(self, designs, second_opinion: bool = False, class_probs: bool = False) -> dict:
        """Answer designs (mapping of column -> array, list of row dicts, or DataFrame).

        Returns a mapping of output columns to numpy arrays, one entry per input row.
        ``second_opinion``: also evaluate the Gaussian process (``vbi_gp_V``, ``vbi_gp_low_V``,
        ``vbi_gp_high_V``) and flag designs where it disagrees with the trees; slower in large
        batches (about 2e4 rows/s against 1e5 without; benchmarks/bench_surrogate.py).
        ``class_probs``: also return the probability of each regime, ``PROB_COLUMNS`` [1]
        (the temperature-scaled softmax whose maximum is ``regime_prob``).
        """
        table = designs if isinstance(designs, DesignTable) else normalize_designs(designs)
        n = table.n
        why = self.domain_check(table)
        status = table.status.copy()
        ok = status == "ok"
        status[ok & (why != "")] = why[ok & (why != "")]
        in_domain = ok & (why == "")
        out = {k: np.full(n, np.nan) for k in ("vbi_V", "vbi0_V", "core_neutral_radius_nm", "shell_neutral_nm",
                                                 "surface_bending_V", "regime_prob", "vbi_low_V", "vbi_high_V")}
        regime = np.full(n, "", dtype=object)
        confirm = np.zeros(n, dtype=bool)
        gp_cols = {k: np.full(n, np.nan) for k in ("vbi_gp_V", "vbi_gp_low_V", "vbi_gp_high_V")} if second_opinion else {}
        prob_cols = {k: np.full(n, np.nan) for k in PROB_COLUMNS} if class_probs else {}
        rows = np.flatnonzero(in_domain)
        if rows.size:
            sub = table.take(rows)
            X, da = features(sub, self.statistics)
            good = np.isfinite(X).all(1) & (da["status"] == "ok")
            raw = self.forest_.raw(X)
            sl = self.slices_
            z = raw[:, sl["regime"]] / self.temperature_
            z -= z.max(1, keepdims=True)
            p = np.exp(z)
            p /= p.sum(1, keepdims=True)
            code = p.argmax(1)
            vbi = da["vbi_V"] + raw[:, sl["vbi"]][:, 0]
            half = self.q_gbm_ * np.exp(raw[:, sl["difficulty"]][:, 0])
            names = np.array(REGIMES, dtype=object)
            regime[rows] = names[code]
            out["regime_prob"][rows] = p.max(1)
            for k, col in enumerate(prob_cols.values()):
                col[rows] = p[:, k]
            out["vbi_V"][rows] = vbi
            out["vbi_low_V"][rows], out["vbi_high_V"][rows] = vbi - half, vbi + half
            out["vbi0_V"][rows] = da["vbi0_V"]
            core_kept, shell_kept = np.isin(code, (0, 2)), np.isin(code, (0, 1))
            for t in AUX:
                val = da[t] + raw[:, sl[t]][:, 0]
                if t == "core_neutral_radius_nm":
                    val = np.where(core_kept, np.clip(val, 0.0, sub.values["core_radius_nm"]), 0.0)
                elif t == "shell_neutral_nm":
                    val = np.where(shell_kept, np.clip(val, 0.0, sub.values["shell_thickness_nm"]), 0.0)
                out[t][rows] = val
            flag = p.max(1) < CONFIRM_PROB
            if second_opinion:
                gm, gs = self.gp_.predict((X - self.gp_mean_) / self.gp_scale_)
                gv = da["vbi_V"] + gm
                gp_cols["vbi_gp_V"][rows] = gv
                gp_cols["vbi_gp_low_V"][rows] = gv - self.q_gp_ * gs
                gp_cols["vbi_gp_high_V"][rows] = gv + self.q_gp_ * gs
                flag |= np.abs(gv - vbi) > np.maximum(half, self.q_gp_ * gs)
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
                "confirm_with_solver": confirm, **gp_cols, **prob_cols}


def load_bundle(path) -> SurrogateModel:
    """Load (and verify) the bundle in directory ``path``."""
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
        for name, path in find_bundles().items():
            meta, arrays = read_bundle(path)
            if (meta.get("material"), meta.get("core_type")) == key:
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
            meta = json.loads((path / "bundle.json").read_text(encoding="utf-8"))
            out.append((name, meta.get("material"), meta.get("core_type"), path))
        except (OSError, ValueError):
            out.append((name, None, None, path))
    return out


def predict_bundles(designs, second_opinion: bool = False, class_probs: bool = False) -> dict:
    """Answer designs of any material/core type with the matching bundles (rows without one
    get a status). ``class_probs`` adds ``PROB_COLUMNS``."""
    table = designs if isinstance(designs, DesignTable) else normalize_designs(designs)
    n = table.n
    result = None
    keys = {(m, bool(pc)) for m, pc in zip(table.material, table.p_core) if m}
    for mat, pc in sorted(keys):
        sel = np.flatnonzero((table.material == mat) & (table.p_core == pc) & (table.status == "ok"))
        try:
            model = load(mat, "p" if pc else "n")
        except BundleError as exc:
            part = {"status": np.full(sel.size, str(exc), dtype=object)}
        else:
            part = model.predict(table.take(sel), second_opinion, class_probs)
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
                confirm_with_solver=np.zeros(n, dtype=bool))
    if second_opinion:
        cols.update({k: np.full(n, np.nan) for k in ("vbi_gp_V", "vbi_gp_low_V", "vbi_gp_high_V")})
    if class_probs:
        cols.update({k: np.full(n, np.nan) for k in PROB_COLUMNS})
    return cols
