"""Derived indices: fractional excretions, gaps, TTKG, TmP/GFR, eGFR, 24-h excretions.

`compute_indices(values, ctx)` takes one patient's measurements keyed "section.analyte" in the
internal units and returns one `DerivedIndex` per index of `knowledge/indices.yaml`, in file
order.  This module holds the arithmetic of each method; labels, units, constants, formula and
validity texts and sources come from the knowledge file.  An index that cannot be computed has
`value=None` and a reason naming what is missing; one that is computed outside its validity
conditions keeps its value with `valid=False` and the reason.

Decision support only: an index is a number to be read by a licensed clinician with the sample,
the medicines and local laboratory practice in mind.
"""

from __future__ import annotations

import math
from functools import cache
from types import MappingProxyType
from typing import Any, Callable, Mapping, NamedTuple

from .errors import CaseError, KnowledgeError, Problem
from .paths import require_knowledge_yaml

__all__ = [
    "DerivedIndex",
    "IndexContext",
    "IndexKnowledge",
    "IndexSpec",
    "SEXES",
    "URINE_SAMPLES",
    "compute_indices",
    "index_knowledge",
    "index_spec",
    "parse_index_knowledge",
]

KNOWLEDGE_FILE = "indices.yaml"
SEXES = ("female", "male", "other", "unknown")
URINE_SAMPLES = ("spot", "24h", "timed")

_U_CR = "urine.creatinine"
_S_CR = "serum.creatinine"
_URINE_VOLUME = "urine.volume"
_URINE_OUTPUT = "vitals.urine_output"


class IndexContext(NamedTuple):
    """Patient facts an index may need besides the measurements."""

    age_years: float | None = None
    sex: str = "unknown"  # female | male | other | unknown
    weight_kg: float | None = None
    height_cm: float | None = None
    urine_sample: str | None = None  # spot | 24h | timed
    pregnant: bool | None = None


class DerivedIndex(NamedTuple):
    """One computed (or not computable) index with what it was computed from."""

    id: str
    label: str
    value: float | None
    unit: str
    formula: str
    inputs: Mapping[str, float]
    source: str
    valid: bool
    reason: str | None


class IndexSpec(NamedTuple):
    """One entry of `knowledge/indices.yaml`."""

    id: str
    label: str
    unit: str
    method: str
    formula: str
    validity: str
    source: str
    params: Mapping[str, Any]
    constants: Mapping[str, float]
    uses: tuple[str, ...] = ()
    branches: Mapping[str, Mapping[str, str]] = MappingProxyType({})


class IndexKnowledge(NamedTuple):
    """The parsed index file: shared constants and the index specs in file order."""

    shared: Mapping[str, float]
    specs: tuple[IndexSpec, ...]


# --------------------------------------------------------------------------------------------
# Calculation machinery
# --------------------------------------------------------------------------------------------


class _Out(NamedTuple):
    value: float | None
    valid: bool
    reason: str | None
    inputs: Mapping[str, float]
    formula: str | None = None
    source: str | None = None


class _Env:
    """What a method may read: measurements, context, shared constants, earlier indices."""

    def __init__(self, values: Mapping[str, float], ctx: IndexContext, shared: Mapping[str, float]):
        self.values = values
        self.ctx = ctx
        self.shared = shared
        self.done: dict[str, DerivedIndex] = {}

    def take(self, wanted: Mapping[str, Any]) -> tuple[dict[str, float], dict[str, float], list[str]]:
        """Resolve named params (a key or a list of alternative keys) to values.

        Returns (values by param name, inputs by key, missing descriptions)."""
        got: dict[str, float] = {}
        inputs: dict[str, float] = {}
        missing: list[str] = []
        for name, keys in wanted.items():
            options = [keys] if isinstance(keys, str) else list(keys)
            for key in options:
                if key in self.values:
                    got[name] = self.values[key]
                    inputs[key] = self.values[key]
                    break
            else:
                missing.append(" or ".join(options))
        return got, inputs, missing

    def optional(self, keys: str | list[str] | None, inputs: dict[str, float]) -> float | None:
        """The first of `keys` present (recorded in `inputs`), else None."""
        for key in [] if keys is None else [keys] if isinstance(keys, str) else keys:
            if key in self.values:
                inputs[key] = self.values[key]
                return self.values[key]
        return None


def _missing(missing: list[str], inputs: Mapping[str, float]) -> _Out:
    return _Out(None, False, "missing " + ", ".join(missing), dict(inputs))


def _not_positive(inputs: Mapping[str, float], keys: list[str]) -> _Out | None:
    bad = [f"{k} must be > 0 (got {inputs[k]:g})" for k in keys if k in inputs and not inputs[k] > 0]
    if bad:
        return _Out(None, False, "; ".join(bad), dict(inputs))
    return None


def _dependency(env: _Env, index_id: str, inputs: dict[str, float]) -> tuple[DerivedIndex | None, _Out | None]:
    """An earlier index; an `_Out` explaining why not when it has no value."""
    dep = env.done[index_id]
    if dep.value is None:
        return None, _Out(None, False, f"needs {index_id}: {dep.reason}", dict(inputs))
    inputs[index_id] = dep.value
    return dep, None


def _dep_missing(env: _Env, index_id: str, why: _Out | None) -> list[str]:
    return [f"{index_id} ({env.done[index_id].reason})"] if why else []


def _inherit(dep: DerivedIndex, reasons: list[str]) -> None:
    if not dep.valid:
        reasons.append(f"{dep.id} not valid: {dep.reason}")


def _finish(value: float, reasons: list[str], inputs: Mapping[str, float], **kw: Any) -> _Out:
    return _Out(value, not reasons, "; ".join(reasons) if reasons else None, dict(inputs), **kw)


def _scr_mmol(env: _Env, scr_umol: float) -> float:
    return scr_umol / env.shared["umol_per_mmol"]


# --------------------------------------------------------------------------------------------
# Methods (one per kind of formula)
# --------------------------------------------------------------------------------------------


def _fractional_excretion(spec: IndexSpec, env: _Env) -> _Out:
    p = spec.params
    got, inputs, missing = env.take({"ux": p["urine"], "sx": p["serum"], "ucr": _U_CR, "scr": _S_CR})
    if missing:
        return _missing(missing, inputs)
    bad = _not_positive(inputs, [_first(p["serum"], inputs), _U_CR, _S_CR])
    if bad:
        return bad
    fraction = spec.constants.get("ultrafilterable_fraction", 1.0)
    value = p["scale"] * got["ux"] * _scr_mmol(env, got["scr"]) / (got["sx"] * fraction * got["ucr"])
    return _finish(value, [], inputs)


def _reabsorbed_fraction(spec: IndexSpec, env: _Env) -> _Out:
    inputs: dict[str, float] = {}
    dep, why = _dependency(env, spec.uses[0], inputs)
    if why:
        return why
    value = 1.0 - dep.value / spec.params["percent_scale"]
    reasons: list[str] = []
    _inherit(dep, reasons)
    if value < 0:
        reasons.append(f"excretion exceeds the filtered load ({dep.id} {dep.value:.3g} {dep.unit}): sample or unit error, or net secretion")
    return _finish(value, reasons, inputs)


def _tmp_gfr_payne(spec: IndexSpec, env: _Env) -> _Out:
    c = spec.constants
    got, inputs, missing = env.take({"sp": spec.params["serum"]})
    dep, why = _dependency(env, spec.uses[0], inputs)
    if missing or why:
        return _missing(missing + _dep_missing(env, spec.uses[0], why), inputs)
    trp = dep.value
    if trp <= 0:
        return _Out(None, False, f"TRP {trp:.3g} <= 0: no net phosphate reabsorption to express", dict(inputs))
    if trp <= c["trp_breakpoint"]:
        value = trp * got["sp"]
    else:
        denominator = 1.0 - c["alpha_trp_coefficient"] * trp
        if denominator <= 0:
            return _Out(None, False, f"TRP {trp:.3g} is outside the range of the relation", dict(inputs))
        value = c["alpha_numerator"] * trp / denominator * got["sp"]
    reasons: list[str] = []
    _inherit(dep, reasons)
    return _finish(value, reasons, inputs)


def _creatinine_ratio(spec: IndexSpec, env: _Env) -> _Out:
    got, inputs, missing = env.take({"ux": spec.params["urine"], "ucr": _U_CR})
    if missing:
        return _missing(missing, inputs)
    bad = _not_positive(inputs, [_U_CR])
    if bad:
        return bad
    return _finish(got["ux"] / got["ucr"], [], inputs)


def _ttkg(spec: IndexSpec, env: _Env) -> _Out:
    p, c = spec.params, spec.constants
    got, inputs, missing = env.take({"uk": p["urine_k"], "sk": p["serum_k"], "uosm": p["urine_osm"]})
    sosm = env.optional(p["serum_osm"], inputs)
    if sosm is None:
        calc = env.done[spec.uses[0]]
        if calc.value is not None:
            sosm = calc.value
            inputs[calc.id] = calc.value
        else:
            missing.append(f"{p['serum_osm']} (or the inputs of {calc.id}: {calc.reason})")
    if missing:
        return _missing(missing, inputs)
    bad = _not_positive(inputs, [p["serum_k"], p["urine_osm"], p["serum_osm"], spec.uses[0]])
    if bad:
        return bad
    value = (got["uk"] / got["sk"]) / (got["uosm"] / sosm)
    reasons: list[str] = []
    if got["uosm"] <= sosm:
        reasons.append(f"urine osmolality {got['uosm']:g} is not above serum osmolality {sosm:g} mOsm/kg")
    una = env.optional(p["urine_na"], inputs)
    if una is None:
        reasons.append(f"{p['urine_na']} not given: the urine sodium > {c['min_urine_sodium']:g} mmol/L condition cannot be checked")
    elif una <= c["min_urine_sodium"]:
        reasons.append(f"urine sodium {una:g} mmol/L is not above {c['min_urine_sodium']:g} mmol/L")
    return _finish(value, reasons, inputs)


def _urine_anion_gap(spec: IndexSpec, env: _Env) -> _Out:
    p, c = spec.params, spec.constants
    got, inputs, missing = env.take({"na": p["sodium"], "k": p["potassium"], "cl": p["chloride"]})
    if missing:
        return _missing(missing, inputs)
    value = got["na"] + got["k"] - got["cl"]
    reasons: list[str] = []
    ph = env.optional(p.get("ph"), inputs)
    if ph is not None and ph > c["max_urine_ph"]:
        reasons.append(f"urine pH {ph:g} > {c['max_urine_ph']:g}: bicarbonate is an unmeasured anion")
    if got["na"] < c["min_urine_sodium"]:
        reasons.append(f"urine sodium {got['na']:g} mmol/L < {c['min_urine_sodium']:g} mmol/L")
    return _finish(value, reasons, inputs)


def _urine_osmolal_gap(spec: IndexSpec, env: _Env) -> _Out:
    p, c = spec.params, spec.constants
    got, inputs, missing = env.take(
        {"osm": p["osmolality"], "na": p["sodium"], "k": p["potassium"], "urea": p["urea"]})
    if missing:
        return _missing(missing, inputs)
    glucose = env.optional(p.get("glucose"), inputs) or 0.0
    value = got["osm"] - (c["cation_factor"] * (got["na"] + got["k"]) + got["urea"] + glucose)
    return _finish(value, [], inputs)


def _scaled_index(spec: IndexSpec, env: _Env) -> _Out:
    c = spec.constants
    inputs: dict[str, float] = {}
    dep, why = _dependency(env, spec.uses[0], inputs)
    if why:
        return why
    reasons: list[str] = []
    _inherit(dep, reasons)
    if "min_source_value" in c and dep.value < c["min_source_value"]:
        reasons.append(f"{dep.id} {dep.value:.3g} {dep.unit} is below {c['min_source_value']:g}")
    return _finish(dep.value / c["divisor"], reasons, inputs)


def _anion_gap(spec: IndexSpec, env: _Env) -> _Out:
    p = spec.params
    got, inputs, missing = env.take({"na": p["sodium"], "cl": p["chloride"], "hco3": p["bicarbonate"]})
    if missing:
        return _missing(missing, inputs)
    return _finish(got["na"] - (got["cl"] + got["hco3"]), [], inputs)


def _albumin_corrected(spec: IndexSpec, env: _Env) -> _Out:
    p, c = spec.params, spec.constants
    got, inputs, missing = env.take({"alb": p["albumin"], **({"base": p["base"]} if "base" in p else {})})
    reasons: list[str] = []
    if spec.uses:
        dep, why = _dependency(env, spec.uses[0], inputs)
        missing += _dep_missing(env, spec.uses[0], why)
        if dep is not None:
            got["base"] = dep.value
            _inherit(dep, reasons)
    if missing:
        return _missing(missing, inputs)
    value = got["base"] + c["coefficient_per_g_l"] * (c["reference_albumin_g_l"] - got["alb"])
    return _finish(value, reasons, inputs)


def _delta_ratio(spec: IndexSpec, env: _Env) -> _Out:
    c = spec.constants
    got, inputs, missing = env.take({"hco3": spec.params["bicarbonate"]})
    raw, corrected = (env.done[i] for i in spec.uses)
    ag = corrected if corrected.value is not None else raw
    if ag.value is None:
        return _missing(missing + [f"{raw.id} ({raw.reason})"], inputs)
    if missing:
        return _missing(missing, inputs)
    inputs[ag.id] = ag.value
    fall = c["normal_bicarbonate"] - got["hco3"]
    if fall <= 0:
        return _Out(None, False, f"bicarbonate {got['hco3']:g} mmol/L is not below {c['normal_bicarbonate']:g}: no fall to compare with", dict(inputs))
    reasons: list[str] = []
    _inherit(ag, reasons)
    rise = ag.value - c["normal_anion_gap"]
    if rise <= 0:
        reasons.append(f"{ag.id} {ag.value:.3g} mmol/L is not above {c['normal_anion_gap']:g}: the ratio is read only with a raised anion gap")
    return _finish(rise / fall, reasons, inputs)


def _expected_pco2(spec: IndexSpec, env: _Env) -> _Out:
    p, c = spec.params, spec.constants
    got, inputs, missing = env.take({"hco3": p["bicarbonate"]})
    if missing:
        return _missing(missing, inputs)
    hco3 = got["hco3"]
    ph = env.optional(p.get("ph"), inputs)
    reasons: list[str] = []
    if hco3 < c["bicarbonate_low"]:
        branch = "acidosis"
        value = c["acidosis_slope"] * hco3 + c["acidosis_intercept"]
        if ph is not None and ph > c["ph_high"]:
            reasons.append(f"pH {ph:g} is alkalaemic: a low bicarbonate here is likely compensation for a respiratory alkalosis")
    elif hco3 > c["bicarbonate_high"]:
        branch = "alkalosis"
        value = c["alkalosis_slope"] * hco3 + c["alkalosis_intercept"]
        if ph is not None and ph < c["ph_low"]:
            reasons.append(f"pH {ph:g} is acidaemic: a high bicarbonate here is likely compensation for a respiratory acidosis")
    else:
        return _Out(None, False, f"bicarbonate {hco3:g} mmol/L is within {c['bicarbonate_low']:g}-{c['bicarbonate_high']:g}: no metabolic disturbance to compensate", dict(inputs))
    b = spec.branches[branch]
    return _finish(value, reasons, inputs, formula=b["formula"], source=b["source"])


def _difference_from_index(spec: IndexSpec, env: _Env) -> _Out:
    got, inputs, missing = env.take({"measured": spec.params["measured"]})
    dep, why = _dependency(env, spec.uses[0], inputs)
    if missing or why:
        return _missing(missing + _dep_missing(env, spec.uses[0], why), inputs)
    reasons: list[str] = []
    _inherit(dep, reasons)
    return _finish(got["measured"] - dep.value, reasons, inputs, formula=f"{spec.formula} [{dep.id}: {dep.formula}]")


def _calculated_osmolality(spec: IndexSpec, env: _Env) -> _Out:
    p = spec.params
    got, inputs, missing = env.take({"na": p["sodium"], "urea": p["urea"], "glucose": p["glucose"]})
    if missing:
        return _missing(missing, inputs)
    return _finish(spec.constants["sodium_factor"] * got["na"] + got["urea"] + got["glucose"], [], inputs)


def _egfr(spec: IndexSpec, env: _Env) -> _Out:
    c, ctx = spec.constants, env.ctx
    got, inputs, missing = env.take({"scr": spec.params["creatinine"]})
    if ctx.age_years is None:
        missing.append("patient.age (the equation is chosen by age)")
    if missing:
        return _missing(missing, inputs)
    bad = _not_positive(inputs, [spec.params["creatinine"]])
    if bad:
        return bad
    age = ctx.age_years
    inputs["patient.age"] = age
    scr_mg_dl = got["scr"] / env.shared["creatinine_umol_per_mg_dl"]
    reasons: list[str] = []
    if ctx.pregnant:
        reasons.append("creatinine-based estimates are not validated in pregnancy")
    if age >= c["adult_from_age"]:
        b = spec.branches["ckd_epi_2021"]
        if ctx.sex not in ("female", "male"):
            f, m = (_ckd_epi(c, scr_mg_dl, age, s) for s in ("female", "male"))
            return _Out(None, False, f"CKD-EPI 2021 has sex-specific coefficients and sex is '{ctx.sex}': "
                        f"{f:.0f} with the female and {m:.0f} with the male coefficients", dict(inputs),
                        b["formula"], b["source"])
        return _finish(_ckd_epi(c, scr_mg_dl, age, ctx.sex), reasons, inputs, formula=b["formula"], source=b["source"])
    b = spec.branches["bedside_schwartz"]
    if ctx.height_cm is None:
        return _Out(None, False, "missing patient.height (bedside Schwartz for children needs height)", dict(inputs), b["formula"], b["source"])
    inputs["patient.height"] = ctx.height_cm
    if age < c["schwartz_min_age"]:
        reasons.append(f"age {age:.2g} y is below {c['schwartz_min_age']:g} y: bedside Schwartz is not validated in infants")
    value = c["schwartz_k"] * ctx.height_cm / scr_mg_dl
    return _finish(value, reasons, inputs, formula=b["formula"], source=b["source"])


def _ckd_epi(c: Mapping[str, float], scr_mg_dl: float, age: float, sex: str) -> float:
    kappa, alpha = c[f"ckd_epi_kappa_{sex}"], c[f"ckd_epi_alpha_{sex}"]
    ratio = scr_mg_dl / kappa
    value = (c["ckd_epi_constant"] * min(ratio, 1.0) ** alpha * max(ratio, 1.0) ** c["ckd_epi_exponent_above"]
             * c["ckd_epi_age_base"] ** age)
    return value * c["ckd_epi_female_factor"] if sex == "female" else value


def _daily_excretion(spec: IndexSpec, env: _Env) -> _Out:
    p, ctx, shared = spec.params, env.ctx, env.shared
    if ctx.urine_sample != "24h":
        return _Out(None, False, f"needs a 24-h urine collection (urine sample type: {ctx.urine_sample or 'not given'})", {})
    got, inputs, missing = env.take({"ux": p["urine"], "volume": _URINE_VOLUME})
    if p["per_kg"] and ctx.weight_kg is None:
        missing.append("patient.weight")
    if missing:
        return _missing(missing, inputs)
    value = got["ux"] * got["volume"]
    if p.get("mass_constant"):
        value *= shared[p["mass_constant"]]
    if p["per_kg"]:
        inputs["patient.weight"] = ctx.weight_kg
        value /= ctx.weight_kg
    reasons: list[str] = []
    low, high = shared["creatinine_24h_min_mmol_per_kg"], shared["creatinine_24h_max_mmol_per_kg"]
    if p.get("self_check"):
        if not low <= value <= high:
            reasons.append(f"{value:.3g} mmol/kg/d is outside {low:g}-{high:g}: the collection is probably incomplete or over-collected")
    elif p.get("completeness_check") and ctx.weight_kg is not None and _U_CR in env.values:
        per_kg = env.values[_U_CR] * got["volume"] / ctx.weight_kg
        inputs[_U_CR] = env.values[_U_CR]
        inputs["patient.weight"] = ctx.weight_kg
        if not low <= per_kg <= high:
            reasons.append(f"24-h creatinine {per_kg:.3g} mmol/kg/d is outside {low:g}-{high:g}: the collection is suspect")
    return _finish(value, reasons, inputs)


def _free_water_clearance(spec: IndexSpec, env: _Env) -> _Out:
    p = spec.params
    inputs: dict[str, float] = {}
    volume = env.optional(_URINE_OUTPUT, inputs)
    if volume is None and env.ctx.urine_sample == "24h":
        volume = env.optional(_URINE_VOLUME, inputs)
    missing = [] if volume is not None else [f"{_URINE_OUTPUT} (or {_URINE_VOLUME} of a 24-h collection)"]
    urine_terms = [env.optional(k, inputs) for k in p["urine_terms"]]
    serum_terms = [env.optional(k, inputs) for k in p["serum_terms"]]
    missing += [k for k, v in zip(p["urine_terms"] + p["serum_terms"], urine_terms + serum_terms) if v is None]
    if missing:
        return _missing(missing, inputs)
    serum = sum(serum_terms)
    if not serum > 0:
        return _Out(None, False, f"{' + '.join(p['serum_terms'])} must be > 0 (got {serum:g})", dict(inputs))
    return _finish(volume * (1.0 - sum(urine_terms) / serum), [], inputs)


def _first(keys: str | list[str], inputs: Mapping[str, float]) -> str:
    options = [keys] if isinstance(keys, str) else keys
    return next((k for k in options if k in inputs), options[0])


# Parameter kinds: key (a "section.analyte" or a list of alternatives), key_terms (a list summed),
# number, bool, shared (the name of a shared constant).  Optional params end with "?".
_Method = tuple[Callable[[IndexSpec, _Env], _Out], Mapping[str, str], tuple[str, ...], tuple[str, ...]]
_METHODS: dict[str, _Method] = {
    "fractional_excretion": (_fractional_excretion, {"urine": "key", "serum": "key", "scale": "number"}, (), ()),
    "reabsorbed_fraction": (_reabsorbed_fraction, {"percent_scale": "number"}, (), ("source",)),
    "tmp_gfr_payne": (_tmp_gfr_payne, {"serum": "key"}, ("trp_breakpoint", "alpha_numerator", "alpha_trp_coefficient"), ("source",)),
    "creatinine_ratio": (_creatinine_ratio, {"urine": "key"}, (), ()),
    "ttkg": (_ttkg, {"urine_k": "key", "serum_k": "key", "urine_osm": "key", "serum_osm": "key", "urine_na": "key"},
             ("min_urine_sodium",), ("calculated_osmolality",)),
    "urine_anion_gap": (_urine_anion_gap, {"sodium": "key", "potassium": "key", "chloride": "key", "ph?": "key"},
                        ("max_urine_ph", "min_urine_sodium"), ()),
    "urine_osmolal_gap": (_urine_osmolal_gap, {"osmolality": "key", "sodium": "key", "potassium": "key",
                                               "urea": "key", "glucose?": "key"}, ("cation_factor",), ()),
    "scaled_index": (_scaled_index, {}, ("divisor",), ("source",)),
    "anion_gap": (_anion_gap, {"sodium": "key", "chloride": "key", "bicarbonate": "key"}, (), ()),
    "albumin_corrected": (_albumin_corrected, {"albumin": "key", "base?": "key"},
                          ("coefficient_per_g_l", "reference_albumin_g_l"), ("base?",)),
    "delta_ratio": (_delta_ratio, {"bicarbonate": "key"}, ("normal_anion_gap", "normal_bicarbonate"), ("anion_gap", "corrected_anion_gap")),
    "expected_pco2": (_expected_pco2, {"bicarbonate": "key", "ph?": "key"},
                      ("acidosis_slope", "acidosis_intercept", "acidosis_tolerance", "alkalosis_slope",
                       "alkalosis_intercept", "alkalosis_tolerance", "bicarbonate_low", "bicarbonate_high",
                       "ph_low", "ph_high"), ()),
    "difference_from_index": (_difference_from_index, {"measured": "key"}, (), ("source",)),
    "calculated_osmolality": (_calculated_osmolality, {"sodium": "key", "urea": "key", "glucose": "key"},
                              ("sodium_factor",), ()),
    "egfr": (_egfr, {"creatinine": "key"},
             ("adult_from_age", "ckd_epi_constant", "ckd_epi_kappa_female", "ckd_epi_kappa_male",
              "ckd_epi_alpha_female", "ckd_epi_alpha_male", "ckd_epi_exponent_above", "ckd_epi_age_base",
              "ckd_epi_female_factor", "schwartz_k", "schwartz_min_age"), ()),
    "daily_excretion": (_daily_excretion, {"urine": "key", "per_kg": "bool", "completeness_check?": "bool",
                                           "self_check?": "bool", "mass_constant?": "shared"}, (), ()),
    "free_water_clearance": (_free_water_clearance, {"urine_terms": "key_terms", "serum_terms": "key_terms"}, (), ()),
}
_BRANCHES = {"expected_pco2": ("acidosis", "alkalosis"), "egfr": ("ckd_epi_2021", "bedside_schwartz")}
_REQUIRED_SHARED = ("umol_per_mmol", "creatinine_umol_per_mg_dl", "creatinine_24h_min_mmol_per_kg",
                    "creatinine_24h_max_mmol_per_kg")


# --------------------------------------------------------------------------------------------
# Knowledge parsing
# --------------------------------------------------------------------------------------------


def _is_number(x: Any) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


def _is_key(x: Any) -> bool:
    return isinstance(x, str) and x.count(".") == 1 and all(part for part in x.split("."))


def parse_index_knowledge(data: Any, file: str = KNOWLEDGE_FILE) -> IndexKnowledge:
    """Check and parse the index file; a KnowledgeError names file, entry and field."""

    def fail(where: str, fld: str, what: str) -> KnowledgeError:
        return KnowledgeError(f"{file}: {where}: field '{fld}': {what}")

    if not isinstance(data, Mapping):
        raise KnowledgeError(f"{file}: top level must be a mapping with 'shared_constants' and 'indices'")
    shared_raw = data.get("shared_constants")
    if not isinstance(shared_raw, Mapping):
        raise fail("top level", "shared_constants", "missing or not a mapping")
    shared: dict[str, float] = {}
    for name, entry in shared_raw.items():
        if not isinstance(entry, Mapping) or not _is_number(entry.get("value")):
            raise fail(f"shared constant '{name}'", "value", "missing or not a finite number")
        if not isinstance(entry.get("source"), str) or not entry["source"].strip():
            raise fail(f"shared constant '{name}'", "source", "missing")
        shared[name] = float(entry["value"])
    for name in _REQUIRED_SHARED:
        if name not in shared:
            raise fail("shared_constants", name, "required shared constant is missing")
    entries = data.get("indices")
    if not isinstance(entries, list) or not entries:
        raise fail("top level", "indices", "missing or not a non-empty list")
    specs: list[IndexSpec] = []
    seen: set[str] = set()
    for n, entry in enumerate(entries, start=1):
        where = f"index entry {n}"
        if not isinstance(entry, Mapping):
            raise KnowledgeError(f"{file}: {where}: not a mapping")
        index_id = entry.get("id")
        if not isinstance(index_id, str) or not index_id.isidentifier() or index_id.lower() != index_id:
            raise fail(where, "id", f"missing or not a lower-case snake_case id (got {index_id!r})")
        where = f"index entry {n} '{index_id}'"
        if index_id in seen:
            raise fail(where, "id", "duplicate id")
        for fld in ("label", "unit", "method", "formula", "validity", "source"):
            if not isinstance(entry.get(fld), str) or not entry[fld].strip():
                raise fail(where, fld, "missing or empty text")
        method = entry["method"]
        if method not in _METHODS:
            raise fail(where, "method", f"unknown method '{method}' (known: {', '.join(sorted(_METHODS))})")
        _, param_kinds, needed_constants, use_roles = _METHODS[method]
        params = entry.get("params") or {}
        constants = entry.get("constants") or {}
        uses = entry.get("uses") or []
        if not isinstance(params, Mapping):
            raise fail(where, "params", "not a mapping")
        if not isinstance(constants, Mapping):
            raise fail(where, "constants", "not a mapping")
        if not isinstance(uses, list):
            raise fail(where, "uses", "not a list")
        known = {k.rstrip("?") for k in param_kinds}
        for name in params:
            if name not in known:
                raise fail(where, f"params.{name}", f"not a parameter of method '{method}' (expected: {', '.join(sorted(known)) or 'none'})")
        for raw_name, kind in param_kinds.items():
            name, optional = raw_name.rstrip("?"), raw_name.endswith("?")
            if name not in params:
                if optional:
                    continue
                raise fail(where, f"params.{name}", f"required by method '{method}'")
            _check_param(params[name], kind, shared, lambda what, nm=name: fail(where, f"params.{nm}", what))
        for name, value in constants.items():
            if not _is_number(value):
                raise fail(where, f"constants.{name}", f"not a finite number (got {value!r})")
        for name in needed_constants:
            if name not in constants:
                raise fail(where, f"constants.{name}", f"required by method '{method}'")
        needed_uses = [r for r in use_roles if not r.endswith("?")]
        if not len(needed_uses) <= len(uses) <= len(use_roles):
            raise fail(where, "uses", f"method '{method}' reads earlier indices as {list(use_roles) or 'none'}, got {uses}")
        for used in uses:
            if used not in seen:
                raise fail(where, "uses", f"'{used}' is not an index defined earlier in the file")
        if method == "albumin_corrected" and bool(uses) == ("base" in params):
            raise fail(where, "params.base", "give either params.base (a measurement) or one index in uses, not both or neither")
        branches = entry.get("branches") or {}
        for b in _BRANCHES.get(method, ()):
            br = branches.get(b) if isinstance(branches, Mapping) else None
            if not isinstance(br, Mapping) or not all(isinstance(br.get(f), str) and br[f].strip() for f in ("formula", "source")):
                raise fail(where, f"branches.{b}", "a branch of this method needs 'formula' and 'source' texts")
        seen.add(index_id)
        specs.append(IndexSpec(
            id=index_id, label=entry["label"], unit=entry["unit"], method=method, formula=entry["formula"],
            validity=entry["validity"], source=entry["source"],
            params=MappingProxyType({k: (list(v) if isinstance(v, list) else v) for k, v in params.items()}),
            constants=MappingProxyType({k: float(v) for k, v in constants.items()}),
            uses=tuple(uses), branches=MappingProxyType({k: dict(v) for k, v in branches.items()}),
        ))
    return IndexKnowledge(shared=MappingProxyType(shared), specs=tuple(specs))


def _check_param(value: Any, kind: str, shared: Mapping[str, float], fail: Callable[[str], KnowledgeError]) -> None:
    if kind == "key":
        ok = _is_key(value) or (isinstance(value, list) and value and all(_is_key(v) for v in value))
        if not ok:
            raise fail(f"expected a 'section.analyte' key or a list of them (got {value!r})")
    elif kind == "key_terms":
        if not (isinstance(value, list) and value and all(_is_key(v) for v in value)):
            raise fail(f"expected a list of 'section.analyte' keys (got {value!r})")
    elif kind == "number":
        if not _is_number(value) or value == 0:
            raise fail(f"expected a non-zero finite number (got {value!r})")
    elif kind == "bool":
        if not isinstance(value, bool):
            raise fail(f"expected true or false (got {value!r})")
    elif kind == "shared":
        if value not in shared:
            raise fail(f"'{value}' is not a shared constant")


@cache
def index_knowledge() -> IndexKnowledge:
    """The parsed `knowledge/indices.yaml` (cached per process)."""
    return parse_index_knowledge(require_knowledge_yaml(KNOWLEDGE_FILE))


def index_spec(index_id: str) -> IndexSpec:
    """The knowledge entry of one index (constants, validity text); KeyError if unknown."""
    for spec in index_knowledge().specs:
        if spec.id == index_id:
            return spec
    raise KeyError(index_id)


# --------------------------------------------------------------------------------------------
# Entry point
# --------------------------------------------------------------------------------------------


def _check_inputs(values: Mapping[str, float], ctx: IndexContext) -> None:
    problems: list[Problem] = []
    if not isinstance(values, Mapping):
        raise CaseError([Problem("values", f"expected a mapping of 'section.analyte' to numbers, got {type(values).__name__}")])
    for key, value in values.items():
        if not _is_key(key):
            problems.append(Problem(str(key), "expected a 'section.analyte' key"))
        elif not _is_number(value):
            problems.append(Problem(key, f"expected a finite number in the internal unit, got {value!r}"))
    if not isinstance(ctx, IndexContext):
        problems.append(Problem("patient", f"expected an IndexContext, got {type(ctx).__name__}"))
    else:
        if ctx.sex not in SEXES:
            problems.append(Problem("patient.sex", f"got {ctx.sex!r}, expected one of {', '.join(SEXES)}"))
        if ctx.urine_sample is not None and ctx.urine_sample not in URINE_SAMPLES:
            problems.append(Problem("urine.sample", f"got {ctx.urine_sample!r}, expected one of {', '.join(URINE_SAMPLES)}"))
        for attr, path, zero_ok, unit in (("age_years", "patient.age", True, "years"),
                                          ("weight_kg", "patient.weight", False, "kg"),
                                          ("height_cm", "patient.height", False, "cm")):
            v = getattr(ctx, attr)
            if v is None:
                continue
            if not _is_number(v) or v < 0 or (v == 0 and not zero_ok):
                expect = ">= 0" if zero_ok else "> 0"
                problems.append(Problem(path, f"got {v!r}, expected a finite number {expect} {unit}"))
        if ctx.pregnant is not None and not isinstance(ctx.pregnant, bool):
            problems.append(Problem("patient.pregnant", f"got {ctx.pregnant!r}, expected true, false or not given"))
    if problems:
        raise CaseError(problems)


def compute_indices(values: Mapping[str, float], ctx: IndexContext) -> tuple[DerivedIndex, ...]:
    """Every index of `knowledge/indices.yaml`, in file order, computed from `values` and `ctx`.

    `values` maps "section.analyte" to a number in the internal unit.  Bad input raises CaseError
    naming the field; a missing measurement only makes the indices that need it not computable."""
    _check_inputs(values, ctx)
    knowledge = index_knowledge()
    env = _Env(values, ctx, knowledge.shared)
    out: list[DerivedIndex] = []
    for spec in knowledge.specs:
        try:
            result = _METHODS[spec.method][0](spec, env)
        except (ZeroDivisionError, OverflowError, ValueError) as exc:  # extreme inputs only
            result = _Out(None, False, f"not computable from these values ({exc})", {})
        value, valid, reason = result.value, result.valid, result.reason
        if value is not None and not math.isfinite(value):
            value, valid, reason = None, False, "not computable from these values (result is not finite)"
        index = DerivedIndex(
            id=spec.id, label=spec.label, value=value, unit=spec.unit,
            formula=result.formula or spec.formula, inputs=MappingProxyType(dict(result.inputs)),
            source=result.source or spec.source, valid=valid, reason=reason,
        )
        env.done[spec.id] = index
        out.append(index)
    return tuple(out)
