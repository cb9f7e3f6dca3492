"""The matrix path: a chunk of validated cases -> reference flags, indices, findings, gates, scores.

Each step mirrors one function of the single-case path and keeps its arithmetic in the same order,
so that thresholds fall on the same side (same IEEE operations) and the probabilities agree with
`tubulo rank` to rounding:

  reference flags   reference.classify            indices     indices.compute_indices (methods)
  bp category       reference.bp_category         findings    findings.derive_findings (rules, acid-base, gates)
  scores            scoring.score (sum of capped log-likelihood ratios in the scorer's order, the
                    same float summation as the interpreter's `sum`, soft-max, sort by probability then id)

Cases are scored once per distinct (sex, findings) pattern.  Powers use Python's `**` on the
distinct operands, because numpy's `power` may round differently.
"""

from __future__ import annotations

import sys
from typing import Mapping, NamedTuple

import numpy as np

from ..reference import BP_CATEGORIES
from .knowledge import FLAG_HIGH, FLAG_LOW, FLAG_NONE, FLAG_NORMAL, SEX_CODES, ScreenKnowledge

__all__ = ["Batch", "Evaluated", "evaluate", "top_candidates", "age_segments", "pattern_keys"]

_NEUMAIER = sys.version_info >= (3, 12)  # the interpreter's float sum() is compensated from 3.12 on
_F, _M = SEX_CODES.index("female"), SEX_CODES.index("male")


class Batch(NamedTuple):
    """Validated cases: values in internal units (NaN = not measured), category codes (-1 = not given)."""

    values: np.ndarray  # (len(sk.value_keys), n): one contiguous row per key
    categories: np.ndarray  # (len(sk.category_values), n) int16
    sex: np.ndarray  # (n,) int8 code in SEX_CODES

    @property
    def n(self) -> int:
        return int(self.values.shape[1])

    def take(self, rows: np.ndarray) -> "Batch":
        return Batch(self.values[:, rows], self.categories[:, rows], self.sex[rows])


class Evaluated(NamedTuple):
    states: np.ndarray  # (n, n_variables) int8 state codes, -1 unobserved (after gates)
    critical: dict[int, list[tuple[str, str, float, float]]]  # case -> [(key, side, value, limit)], assess order


def age_segments(sk: ScreenKnowledge, age: np.ndarray) -> np.ndarray:
    eff = np.where(np.isnan(age), sk.age_when_unknown, age)
    return np.searchsorted(sk.breaks, eff, side="right") - 1


class _Ctx:
    """What the steps read: values by key, categories by key, age segment, sex."""

    def __init__(self, sk: ScreenKnowledge, batch: Batch):
        self.sk = sk
        self.n = batch.n
        self.vals = batch.values
        self.cats = batch.categories
        self.sex = batch.sex.astype(np.intp)
        self.nan = np.full(self.n, np.nan)
        self.age = self.v("patient.age")
        self.weight = self.v("patient.weight")
        self.height = self.v("patient.height")
        self.seg = age_segments(sk, self.age)
        sample = self.cat("urine.sample")
        codes = sk.category_values.get("urine.sample", ())
        self.is_24h = sample == codes.index("24h") if "24h" in codes else np.zeros(self.n, dtype=bool)
        self.index: dict[str, tuple[np.ndarray, np.ndarray]] = {}

    def v(self, key: str) -> np.ndarray:
        j = self.sk.value_index.get(key)
        return self.nan if j is None else self.vals[j]

    def cat(self, key: str) -> np.ndarray:
        j = self.sk.category_index.get(key)
        return np.full(self.n, -1, dtype=np.int16) if j is None else self.cats[j]

    def first(self, keys) -> np.ndarray:
        """The first of `keys` (a key or a list of alternatives) that is present, per case."""
        options = [keys] if isinstance(keys, str) else list(keys)
        out = self.v(options[0])
        for k in options[1:]:
            out = np.where(np.isnan(out), self.v(k), out)
        return out

    def flag(self, name: str, values: np.ndarray) -> np.ndarray:
        t = self.sk.intervals.get(name)
        if t is None:
            return np.full(self.n, FLAG_NONE, dtype=np.int8)
        has = t.has[self.seg, self.sex] & ~np.isnan(values)
        low, high = t.low[self.seg, self.sex], t.high[self.seg, self.sex]
        out = np.where(values < low, FLAG_LOW, np.where(values > high, FLAG_HIGH, FLAG_NORMAL))
        return np.where(has, out, FLAG_NONE).astype(np.int8)


def _pypow(base: np.ndarray, exponent) -> np.ndarray:
    """base ** exponent with Python's float power on the distinct operands (exactly the scalar result)."""
    if base.size == 0:
        return base.astype(float)
    if np.ndim(exponent) == 0:
        u, inv = np.unique(base, return_inverse=True)
        e = float(exponent)
        return np.array([float(b) ** e for b in u.tolist()])[inv]
    pairs = np.stack([base, np.asarray(exponent, dtype=float)], axis=1)
    u, inv = np.unique(pairs, axis=0, return_inverse=True)
    return np.array([float(b) ** float(e) for b, e in u.tolist()])[inv.reshape(-1)]


def _scalar_pow(base: float, exponent: np.ndarray) -> np.ndarray:
    if exponent.size == 0:
        return exponent.astype(float)
    u, inv = np.unique(exponent, return_inverse=True)
    return np.array([base ** float(e) for e in u.tolist()])[inv]


# --- indices (one function per method of tubulo/indices.py) ---------------------------------------


def _present(*arrays: np.ndarray) -> np.ndarray:
    ok = np.ones(arrays[0].shape, dtype=bool)
    for a in arrays:
        ok &= ~np.isnan(a)
    return ok


def _dep(ctx: _Ctx, index_id: str) -> tuple[np.ndarray, np.ndarray]:
    return ctx.index[index_id]


def _m_fractional_excretion(spec, ctx):
    p = spec.params
    ux, sx = ctx.first(p["urine"]), ctx.first(p["serum"])
    ucr, scr = ctx.v("urine.creatinine"), ctx.v("serum.creatinine")
    ok = _present(ux, sx, ucr, scr) & (sx > 0) & (ucr > 0) & (scr > 0)
    fraction = spec.constants.get("ultrafilterable_fraction", 1.0)
    value = p["scale"] * ux * (scr / ctx.sk.index_shared["umol_per_mmol"]) / (sx * fraction * ucr)
    return value, ok, ok


def _m_reabsorbed_fraction(spec, ctx):
    dv, dvalid = _dep(ctx, spec.uses[0])
    ok = ~np.isnan(dv)
    value = 1.0 - dv / spec.params["percent_scale"]
    return value, ok, ok & dvalid & ~(value < 0)


def _m_tmp_gfr_payne(spec, ctx):
    c = spec.constants
    sp = ctx.first(spec.params["serum"])
    trp, dvalid = _dep(ctx, spec.uses[0])
    ok = _present(sp, trp) & (trp > 0)
    low_branch = trp <= c["trp_breakpoint"]
    denominator = 1.0 - c["alpha_trp_coefficient"] * trp
    ok &= low_branch | (denominator > 0)
    value = np.where(low_branch, trp * sp, c["alpha_numerator"] * trp / denominator * sp)
    return value, ok, ok & dvalid


def _m_creatinine_ratio(spec, ctx):
    ux, ucr = ctx.first(spec.params["urine"]), ctx.v("urine.creatinine")
    ok = _present(ux, ucr) & (ucr > 0)
    return ux / ucr, ok, ok


def _m_ttkg(spec, ctx):
    p, c = spec.params, spec.constants
    uk, sk_, uosm = ctx.first(p["urine_k"]), ctx.first(p["serum_k"]), ctx.first(p["urine_osm"])
    sosm = ctx.first(p["serum_osm"])
    calc, _ = _dep(ctx, spec.uses[0])
    sosm = np.where(np.isnan(sosm), calc, sosm)
    ok = _present(uk, sk_, uosm, sosm) & (sk_ > 0) & (uosm > 0) & (sosm > 0)
    value = (uk / sk_) / (uosm / sosm)
    una = ctx.first(p["urine_na"])
    valid = ok & ~(uosm <= sosm) & ~np.isnan(una) & ~(una <= c["min_urine_sodium"])
    return value, ok, valid


def _m_urine_anion_gap(spec, ctx):
    p, c = spec.params, spec.constants
    na, k, cl = ctx.first(p["sodium"]), ctx.first(p["potassium"]), ctx.first(p["chloride"])
    ok = _present(na, k, cl)
    value = na + k - cl
    valid = ok & ~(na < c["min_urine_sodium"])
    if p.get("ph") is not None:
        ph = ctx.first(p["ph"])
        valid &= ~(ph > c["max_urine_ph"])
    return value, ok, valid


def _m_anion_gap(spec, ctx):
    p = spec.params
    na, cl, hco3 = ctx.first(p["sodium"]), ctx.first(p["chloride"]), ctx.first(p["bicarbonate"])
    ok = _present(na, cl, hco3)
    return na - (cl + hco3), ok, ok


def _m_albumin_corrected(spec, ctx):
    p, c = spec.params, spec.constants
    alb = ctx.first(p["albumin"])
    if spec.uses:
        base, dvalid = _dep(ctx, spec.uses[0])
    else:
        base, dvalid = ctx.first(p["base"]), np.ones(ctx.n, dtype=bool)
    ok = _present(alb, base)
    value = base + c["coefficient_per_g_l"] * (c["reference_albumin_g_l"] - alb)
    return value, ok, ok & dvalid


def _m_calculated_osmolality(spec, ctx):
    p = spec.params
    na, urea, glucose = ctx.first(p["sodium"]), ctx.first(p["urea"]), ctx.first(p["glucose"])
    ok = _present(na, urea, glucose)
    return spec.constants["sodium_factor"] * na + urea + glucose, ok, ok


def _m_egfr(spec, ctx):
    c, shared = spec.constants, ctx.sk.index_shared
    scr, age = ctx.first(spec.params["creatinine"]), ctx.age
    ok = _present(scr, age) & (scr > 0)
    scr_mg = scr / shared["creatinine_umol_per_mg_dl"]
    adult = ok & (age >= c["adult_from_age"])
    value = np.full(ctx.n, np.nan)
    for code, sex in ((_F, "female"), (_M, "male")):
        rows = adult & (ctx.sex == code)
        if not rows.any():
            continue
        ratio = scr_mg[rows] / c[f"ckd_epi_kappa_{sex}"]
        v = (c["ckd_epi_constant"] * _pypow(np.minimum(ratio, 1.0), c[f"ckd_epi_alpha_{sex}"])
             * _pypow(np.maximum(ratio, 1.0), c["ckd_epi_exponent_above"])
             * _scalar_pow(c["ckd_epi_age_base"], age[rows]))
        value[rows] = v * c["ckd_epi_female_factor"] if sex == "female" else v
    child = ok & ~(age >= c["adult_from_age"]) & ~np.isnan(ctx.height)
    value = np.where(child, c["schwartz_k"] * ctx.height / scr_mg, value)
    computed = (adult & ((ctx.sex == _F) | (ctx.sex == _M))) | child
    valid = computed & ~(child & (age < c["schwartz_min_age"]))
    return value, computed, valid


def _m_daily_excretion(spec, ctx):
    p, shared = spec.params, ctx.sk.index_shared
    ux, volume = ctx.first(p["urine"]), ctx.v("urine.volume")
    ok = ctx.is_24h & _present(ux, volume)
    if p["per_kg"]:
        ok &= ~np.isnan(ctx.weight)
    value = ux * volume
    if p.get("mass_constant"):
        value = value * shared[p["mass_constant"]]
    if p["per_kg"]:
        value = value / ctx.weight
    low, high = shared["creatinine_24h_min_mmol_per_kg"], shared["creatinine_24h_max_mmol_per_kg"]
    valid = ok.copy()
    if p.get("self_check"):
        valid &= (low <= value) & (value <= high)
    elif p.get("completeness_check"):
        ucr = ctx.v("urine.creatinine")
        checked = ~np.isnan(ctx.weight) & ~np.isnan(ucr)
        per_kg = ucr * volume / ctx.weight
        valid &= ~checked | ((low <= per_kg) & (per_kg <= high))
    return value, ok, valid


_METHODS = {
    "fractional_excretion": _m_fractional_excretion,
    "reabsorbed_fraction": _m_reabsorbed_fraction,
    "tmp_gfr_payne": _m_tmp_gfr_payne,
    "creatinine_ratio": _m_creatinine_ratio,
    "ttkg": _m_ttkg,
    "urine_anion_gap": _m_urine_anion_gap,
    "anion_gap": _m_anion_gap,
    "albumin_corrected": _m_albumin_corrected,
    "calculated_osmolality": _m_calculated_osmolality,
    "egfr": _m_egfr,
    "daily_excretion": _m_daily_excretion,
}


def _indices(ctx: _Ctx) -> None:
    with np.errstate(all="ignore"):
        for spec in ctx.sk.index_specs:
            value, computed, valid = _METHODS[spec.method](spec, ctx)
            finite = computed & np.isfinite(value)
            ctx.index[spec.id] = (np.where(finite, value, np.nan), valid & finite)


# --- blood pressure category (reference.bp_category) ---------------------------------------------


def _grade(value: np.ndarray, cuts) -> np.ndarray:
    grade = np.zeros(value.shape, dtype=np.int8)  # 0 normal, 1 elevated, 2 stage1, 3 stage2
    for cut, code in cuts:
        grade = np.where(value >= cut, code, grade)
    return grade


def _bp_category(ctx: _Ctx) -> np.ndarray:
    """Code in BP_CATEGORIES per case, -1 without a blood pressure."""
    bp = ctx.sk.bp
    sbp, dbp = ctx.v("vitals.systolic_bp"), ctx.v("vitals.diastolic_bp")
    has = _present(sbp, dbp)
    age = np.where(np.isnan(ctx.age), ctx.sk.age_when_unknown, ctx.age)
    limit = np.full(ctx.n, np.nan)
    for row in bp.hypotension:
        inside = (row.age_min <= age) & ((age < row.age_max) if row.age_max is not None else True) & np.isnan(limit)
        lim = row.systolic_below if row.systolic_below is not None else row.base + row.per_year * age
        limit = np.where(inside, lim, limit)
    code = {name: BP_CATEGORIES.index(name) for name in BP_CATEGORIES}
    order_to_code = np.array([code["normal"], code["elevated"], code["stage1"], code["stage2"]], dtype=np.int8)
    a, c = bp.adult, bp.child
    s = _grade(sbp, [(a["elevated_systolic"], 1), (a["stage1_systolic"], 2), (a["stage2_systolic"], 3)])
    d = _grade(dbp, [(a["stage1_diastolic"], 2), (a["stage2_diastolic"], 3)])
    adult_cat = order_to_code[np.maximum(s, d)]
    child = (age >= c["from_age"]) & ~(age >= a["from_age"])
    child_cat = np.full(ctx.n, code["unclassified"], dtype=np.int8)
    if child.any():
        years = np.zeros(ctx.n, dtype=int)
        years[child] = age[child].astype(int)
        screen_s, screen_d = np.full(ctx.n, np.nan), np.full(ctx.n, np.nan)
        for y, pair in bp.child_rows.items():
            at = child & (years == y)
            f, m = pair["female"], pair["male"]
            screen_s = np.where(at, np.where(ctx.sex == _F, f[0], np.where(ctx.sex == _M, m[0], min(f[0], m[0]))), screen_s)
            screen_d = np.where(at, np.where(ctx.sex == _F, f[1], np.where(ctx.sex == _M, m[1], min(f[1], m[1]))), screen_d)
        cs = _grade(sbp, [(screen_s, 1), (c["stage1_systolic"], 2), (c["stage2_systolic"], 3)])
        cd = _grade(dbp, [(screen_d, 1), (c["stage1_diastolic"], 2), (c["stage2_diastolic"], 3)])
        child_cat = np.where(child, order_to_code[np.maximum(cs, cd)], child_cat)
    out = np.where(age >= a["from_age"], adult_cat, child_cat)
    out = np.where(sbp < limit, code["low"], out)
    return np.where(has, out, -1).astype(np.int8)


# --- findings (findings.derive_findings) ------------------------------------------------------------


def _rule_states(ctx: _Ctx, var: str, bp_cat: np.ndarray) -> np.ndarray:
    state = np.full(ctx.n, -1, dtype=np.int8)
    open_ = np.ones(ctx.n, dtype=bool)
    for method in ctx.sk.methods[var]:
        if method.kind == "none":
            continue
        if method.kind == "measure":
            value = ctx.v(method.name)
            avail = ~np.isnan(value)
            flag = ctx.flag(method.interval or method.name, value)
        elif method.kind == "derived":
            value, valid = ctx.index.get(method.name, (ctx.nan, np.zeros(ctx.n, dtype=bool)))
            avail = valid & ~np.isnan(value)
            flag = ctx.flag(method.interval or method.name, value)
        else:
            value = bp_cat if method.kind == "bp" else ctx.cat(method.name)
            avail = value >= 0
            flag = None
        todo = open_ & avail
        for wkey, allowed in method.when:
            todo &= np.isin(ctx.cat(wkey), allowed)
        if method.uses_flag:  # no reference interval for this age: the method is skipped, never read as normal
            todo &= (flag != FLAG_NONE) if flag is not None else False
        for cond in method.conditions:
            m = todo.copy()
            if cond.is_codes is not None:
                m &= np.isin(value, cond.is_codes)
            else:
                if cond.flag is not None:
                    m &= flag == cond.flag
                for kind, limit in cond.bounds:
                    if kind == "below":
                        m &= value < limit
                    elif kind == "at_most":
                        m &= value <= limit
                    elif kind == "above":
                        m &= value > limit
                    else:
                        m &= value >= limit
            state[m] = cond.state
            todo &= ~m
            open_ &= ~m
    return state


def _acid_base(ctx: _Ctx) -> np.ndarray:
    conf = ctx.sk.acid_base
    states = ctx.sk.states["acid_base"]
    code = {s: states.index(s) for s in states}
    ph = ctx.v("blood_gas.ph")
    ph_flag = ctx.flag("blood_gas.ph", ph)
    gas = ctx.v("blood_gas.bicarbonate")
    serum = ctx.v("serum.bicarbonate")
    use_serum = np.isnan(gas)
    hco3 = np.where(use_serum, serum, gas)
    hco3_flag = np.where(use_serum, ctx.flag("serum.bicarbonate", serum), ctx.flag("blood_gas.bicarbonate", gas))
    pco2_flag = ctx.flag("blood_gas.pco2", ctx.v("blood_gas.pco2"))
    corr, corr_valid = ctx.index["anion_gap_albumin_corrected"]
    raw, raw_valid = ctx.index["anion_gap"]
    has_corr = corr_valid & ~np.isnan(corr)
    ag = np.where(has_corr, corr, np.where(raw_valid & ~np.isnan(raw), raw, np.nan))
    limit = np.where(has_corr, conf["anion_gap_high"], conf["anion_gap_high_uncorrected"])
    acidosis = np.where(~np.isnan(ag) & (ag > limit), code["hag_acidosis"], code["nag_acidosis"])
    has_ph = ~np.isnan(ph)
    low_ph, high_ph = has_ph & (ph_flag == FLAG_LOW), has_ph & (ph_flag == FLAG_HIGH)
    choices = [
        (np.isnan(ph) & np.isnan(hco3), -1),
        (low_ph & (hco3_flag == FLAG_LOW), acidosis),
        (low_ph & (pco2_flag == FLAG_HIGH), code["respiratory_acidosis"]),
        (low_ph, acidosis),
        (high_ph & (hco3_flag == FLAG_HIGH), code["metabolic_alkalosis"]),
        (high_ph & (pco2_flag == FLAG_LOW), code["respiratory_alkalosis"]),
        (high_ph, code["metabolic_alkalosis"]),
        (hco3_flag == FLAG_HIGH, code["metabolic_alkalosis"]),
        (hco3_flag == FLAG_LOW, acidosis),
        ((hco3_flag == FLAG_NONE) & ~has_ph, -1),
    ]
    return np.select([c for c, _ in choices], [np.broadcast_to(v, ctx.n) for _, v in choices],
                     default=code["normal"]).astype(np.int8)


def _gate_holds(gate, states: np.ndarray, col: Mapping[str, int], sk: ScreenKnowledge):
    """(true, unknown) masks of a gate, as findings._gate_holds: True / None / False."""
    n = states.shape[0]
    if not gate:
        return np.ones(n, dtype=bool), np.zeros(n, dtype=bool)
    if "any" in gate:
        parts = [_gate_holds(g, states, col, sk) for g in gate["any"]]
        true = np.zeros(n, dtype=bool)
        unknown = np.zeros(n, dtype=bool)
        for t, u in parts:
            true |= t
            unknown |= u
        return true, unknown & ~true
    var = gate["variable"]
    s = states[:, col[var]]
    allowed = [sk.states[var].index(x) for x in gate["states"] if x in sk.states[var]]
    unknown = s < 0
    return np.isin(s, allowed) & ~unknown, unknown


def _findings(ctx: _Ctx) -> np.ndarray:
    sk = ctx.sk
    col = {v: j for j, v in enumerate(sk.variables)}
    states = np.full((ctx.n, len(sk.variables)), -1, dtype=np.int8)
    bp_cat = _bp_category(ctx)
    for var in sk.variables:
        if var == "acid_base":
            states[:, col[var]] = _acid_base(ctx)
        elif var in sk.methods:
            states[:, col[var]] = _rule_states(ctx, var, bp_cat)
    for _ in range(3):  # the gate passes of derive_findings, in the same order
        for var in sk.variables:
            gate = sk.gates.get(var)
            if not gate:
                continue
            j = col[var]
            observed = states[:, j] >= 0
            true, unknown = _gate_holds(gate, states, col, sk)
            drop = observed & ~true & (~unknown | (not gate.get("unobserved_ok")))
            states[drop, j] = -1
    return states


# --- critical limits (cautions.cautions) ------------------------------------------------------------


def _critical(ctx: _Ctx) -> dict[int, list[tuple[str, str, float, float]]]:
    out: dict[int, list[tuple[str, str, float, float]]] = {}
    for key in ctx.sk.critical_order:
        t = ctx.sk.criticals[key]
        v = ctx.v(key)
        has = t.has[ctx.seg, ctx.sex] & ~np.isnan(v)
        low, high = t.low[ctx.seg, ctx.sex], t.high[ctx.seg, ctx.sex]
        below = has & (v < low)
        above = has & ~below & (v > high)
        for i in np.flatnonzero(below | above).tolist():
            side, limit = ("below", low[i]) if below[i] else ("above", high[i])
            out.setdefault(i, []).append((key, side, float(v[i]), float(limit)))
    return out


def evaluate(sk: ScreenKnowledge, batch: Batch) -> Evaluated:
    """Findings states (gated) and critical values of every case of the batch."""
    ctx = _Ctx(sk, batch)
    _indices(ctx)
    return Evaluated(_findings(ctx), _critical(ctx))


# --- scoring (scoring.score) ------------------------------------------------------------------------


def _neumaier_add(total: np.ndarray, comp: np.ndarray, x: np.ndarray) -> np.ndarray:
    t = total + x
    comp += np.where(np.abs(total) >= np.abs(x), (total - t) + x, (x - t) + total)
    return t


def pattern_keys(key: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(first row of each distinct row of `key`, inverse) for small non-negative int codes, by packing
    each row into 64-bit words and sorting the words."""
    n, m = key.shape
    width = max(1, int(key.max()).bit_length()) if key.size else 1
    per_word = max(1, 63 // width)
    words = []
    for start in range(0, m, per_word):
        w = np.zeros(n, dtype=np.uint64)
        for j in range(start, min(m, start + per_word)):
            w = (w << np.uint64(width)) | key[:, j].astype(np.uint64)
        words.append(w)
    order = np.lexsort(words[::-1])
    sorted_words = [w[order] for w in words]
    new = np.ones(n, dtype=bool)
    if n > 1:
        same = np.ones(n - 1, dtype=bool)
        for w in sorted_words:
            same &= w[1:] == w[:-1]
        new[1:] = ~same
    group = np.cumsum(new) - 1
    inverse = np.empty(n, dtype=np.intp)
    inverse[order] = group
    return order[new], inverse


_BLOCK = 1024  # patterns per block: a block of scores stays in cache while the evidence is added


def _probabilities(sk: ScreenKnowledge, psex: np.ndarray, pstates: np.ndarray) -> np.ndarray:
    """Posteriors (patterns x candidates, columns in id order) with the scorer's own float arithmetic:
    the evidence of each variable added in the scorer's order (a silent candidate adds 0.0, which
    changes no float), the interpreter's float summation, the soft-max in id order."""
    col = {v: j for j, v in enumerate(sk.variables)}
    u, c = pstates.shape[0], len(sk.candidates)
    terms = [(pstates[:, col[v]].astype(np.intp), sk.llr[v]) for v in sk.score_order]
    terms = [(idx, m) for idx, m in terms if (idx >= 0).any() and (m != 0).any()]
    out = np.empty((u, c))
    buf = np.empty((_BLOCK, c))
    for a in range(0, u, _BLOCK):
        b = min(u, a + _BLOCK)
        total = np.zeros((b - a, c))
        comp = np.zeros((b - a, c)) if _NEUMAIER else None
        x = buf[: b - a]
        for idx, m in terms:
            np.take(m, idx[a:b], axis=0, out=x)  # -1 picks the zero row: unobserved
            if _NEUMAIER:
                total = _neumaier_add(total, comp, x)
            else:
                total += x
        if _NEUMAIER:
            total = np.where((comp != 0) & np.isfinite(comp), total + comp, total)
        score = out[a:b]
        np.multiply(total, sk.evidence_weight, out=score)
        score += sk.log_prior[psex[a:b]]
        score -= score.max(axis=1, keepdims=True)
        np.exp(score, out=score)
        if _NEUMAIER:
            z, zc = np.zeros(b - a), np.zeros(b - a)
            for j in range(c):
                z = _neumaier_add(z, zc, score[:, j])
            z = np.where((zc != 0) & np.isfinite(zc), z + zc, z)
        else:
            z = np.cumsum(score, axis=1)[:, -1]  # left to right, as sum() adds
        score /= z[:, None]
    return out


def _top(prob: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    """Columns and values of the k largest per row, the first column winning a tie (the scorer sorts
    by probability, then id, and the columns are in id order)."""
    u, c = prob.shape
    rows = np.arange(u)
    idx = np.full((u, k), c, dtype=np.intp)  # c: no candidate
    val = np.full((u, k), np.nan)
    for r in range(min(k, c)):
        j = np.argmax(prob, axis=1)
        idx[:, r], val[:, r] = j, prob[rows, j]
        prob[rows, j] = -np.inf
    return idx, val


def top_candidates(sk: ScreenKnowledge, states: np.ndarray, sex: np.ndarray, k: int = 3):
    """(candidate columns (u, k), probabilities (u, k), inverse (n,), pattern states (u, n_variables)).

    Cases are grouped by (sex, findings) pattern and each pattern is scored once."""
    n = states.shape[0]
    if n == 0:
        return np.zeros((0, k), dtype=np.intp), np.zeros((0, k)), np.zeros(0, dtype=np.intp), states
    key = np.concatenate([sex.reshape(-1, 1).astype(np.int16), states.astype(np.int16) + 1], axis=1)
    first, inverse = pattern_keys(key)
    psex, pstates = sex[first].astype(np.intp), states[first]
    idx, val = _top(_probabilities(sk, psex, pstates), k)
    return idx, val, inverse, pstates
