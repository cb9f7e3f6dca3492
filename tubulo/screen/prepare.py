"""An extract chunk (Arrow table, long or wide) -> validated cases for the matrix path.

Every cell becomes (case, written key, unit, number or text).  Numbers take the vectorized path:
one factor per (analyte, unit spelling) from the units module, the analyte's plausible range,
`stored_as` applied.  A text cell (a category, a blood pressure, a decimal comma, a number with
its unit inside) is read by `case.parse_case` itself, once per distinct (key, unit, text), so the
matrix path accepts exactly what a case file accepts.

A case with any problem (implausible value, unknown key or unit, a key given twice) is marked; the
run then hands the whole case to `parse_case` for its message, so `error` reads as `tubulo check`
would word it.  A valid case the matrix path does not read (a pregnancy) is marked for the
single-case path.

Layouts (docs/screen.md):
  long  columns case, section, analyte, value, optional unit; optional per-row age, sex, weight,
        height, pregnant (one value per case); rows of section `patient` give the same fields.
  wide  one row per case: case, optional age, sex, weight, height, pregnant, and one column per
        measurement, `section.analyte` or `section.analyte [unit]`.
"""

from __future__ import annotations

import difflib
import re
from dataclasses import dataclass
from typing import Any, Callable, NamedTuple

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from ..case import CATEGORIES, SPECIAL, TOP_KEYS, parse_case
from ..errors import CaseError, TubuloError
from .knowledge import MEASUREMENT_SECTIONS, PATIENT_FIELDS, SEX_CODES, ScreenKnowledge
from .vector import Batch

__all__ = ["Prepared", "prepare", "parse_column_name", "parse_cell", "written_value", "LONG_COLUMNS",
           "ScreenInputError"]

LONG_COLUMNS = ("case", "section", "analyte", "value")
_COLUMN = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_]*)\.([A-Za-z0-9_]+)\s*(?:\[\s*(.*?)\s*\])?\s*$")
_BARE = re.compile(r"^\s*([A-Za-z_]+)\s*(?:\[\s*(.*?)\s*\])?\s*$")
_PLAIN_NUMBER = r"^\s*[-+]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?\s*$"
_NOT_READ = tuple(k for k in TOP_KEYS if k not in MEASUREMENT_SECTIONS and k not in ("case", "patient"))
_MEMO_LIMIT = 200_000
_UNKNOWN_SEX = SEX_CODES.index("unknown")


class ScreenInputError(TubuloError):
    """The extract itself cannot be read (a missing column, a column header tubulo does not know)."""


def parse_column_name(name: str) -> tuple[str, str, str | None] | None:
    """`serum.potassium [mmol/L]` -> ("serum", "potassium", "mmol/L"); `age [mo]` -> ("patient", "age", "mo")."""
    m = _COLUMN.match(name)
    if m:
        return m.group(1), m.group(2), (m.group(3) or None)
    m = _BARE.match(name)
    if m and m.group(1).lower() in PATIENT_FIELDS:
        return "patient", m.group(1).lower(), (m.group(2) or None)
    return None


def written_value(num: float | None, text: str | None, unit: str | None) -> Any:
    """A cell's value as a case file carries it: "2.7 mmol/L", a bare number, or a text."""
    if text is None:
        return f"{float(num)!r} {unit}" if unit else float(num)
    return f"{text} {unit}" if unit else text


_INT = re.compile(r"^[-+]?\d+$")


def _as_written(text: str, unit: str | None) -> Any:
    """A numeric cell as a case file carries it: "140 mmol/L" with a unit; without one a number, int
    or float as YAML reads the same digits."""
    if unit:
        return f"{text} {unit}"
    return int(text) if _INT.match(text) else float(text)


class _Cell(NamedTuple):
    """parse_case's reading of one cell: stored values, categories, patient fields, or its problems."""

    raw: Any  # the value as handed to parse_case
    values: tuple[tuple[str, float], ...] = ()
    categories: tuple[tuple[str, str], ...] = ()
    sex: str | None = None
    pregnant: bool | None = None
    problems: tuple[str, ...] = ()


_MEMO: dict[tuple, _Cell] = {}


def _parse_one(section: str, name: str, raw: Any) -> _Cell:
    try:
        case = parse_case({"case": "cell", section: {name: raw}})
    except CaseError as exc:
        return _Cell(raw, problems=tuple(str(p) for p in exc.problems))
    except Exception as exc:  # a defect of tubulo: the case goes to the single path, which reports it
        return _Cell(raw, problems=(f"{type(exc).__name__}: {exc}",))
    p = case.patient
    values = [(k, m.value) for k, m in case.measurements.items()]
    if section == "patient":
        for fld, key in (("age_years", "patient.age"), ("weight_kg", "patient.weight"), ("height_cm", "patient.height")):
            v = getattr(p, fld)
            if v is not None:
                values.append((key, float(v)))
    sex = p.sex if (section == "patient" and name == "sex") else None
    return _Cell(raw, tuple(values), tuple(case.categories.items()), sex, p.pregnant)


def parse_cell(section: str, name: str, unit: str | None, num: float | None, text: str | None) -> _Cell:
    """parse_case's reading of one cell (memoised).  A text with a unit beside it (unit column or
    header) is read with the unit appended, and if that fails, alone (a category, a text that
    carries its own unit)."""
    key = (section, name, unit, num if text is None else None, text)
    hit = _MEMO.get(key)
    if hit is not None:
        return hit
    cell = _parse_one(section, name, written_value(num, text, unit))
    if cell.problems and text is not None and unit:
        alone = _parse_one(section, name, text)
        if not alone.problems:
            cell = alone
    if len(_MEMO) > _MEMO_LIMIT:
        _MEMO.clear()
    _MEMO[key] = cell
    return cell


class _Route(NamedTuple):
    """How the numeric cells of one (section, name, unit) are read."""

    kind: str  # quantity | cell (parse_cell per distinct value) | problem
    slot: int = -1
    factor: float = 1.0
    lo: float = 0.0
    hi: float = 0.0


def _route(sk: ScreenKnowledge, section: str, name: str, unit: str | None) -> _Route:
    if section == "patient":
        if name not in ("age", "weight", "height"):
            return _Route("cell" if name in PATIENT_FIELDS else "problem")
        target = f"patient.{name}"
    elif section in MEASUREMENT_SECTIONS:
        target = sk.section_keys[section].get(name)
        if target is None:
            return _Route("problem")
        if target in CATEGORIES or target in SPECIAL:
            return _Route("cell")
    else:
        return _Route("problem")
    spec = sk.specs[target]
    try:
        factor = sk.factor(target, unit)
    except TubuloError:
        return _Route("problem")
    return _Route("quantity", sk.value_index[spec.stored_as or target], factor, spec.plausible[0], spec.plausible[1])


# --- Arrow columns -> cells ------------------------------------------------------------------------


def _flat(arr) -> pa.Array:
    if isinstance(arr, pa.ChunkedArray):
        arr = arr.combine_chunks() if arr.num_chunks != 1 else arr.chunk(0)
    if pa.types.is_dictionary(arr.type):
        arr = arr.cast(arr.type.value_type)
    return arr


def _as_strings(arr) -> pa.Array:
    arr = _flat(arr)
    if not pa.types.is_string(arr.type):
        arr = arr.cast(pa.string())
    return arr


def _codes(arr: pa.Array, present: np.ndarray) -> tuple[np.ndarray, list[str]]:
    """Dictionary codes of a string array (-1 where absent) and the distinct strings."""
    enc = pc.dictionary_encode(_as_strings(arr))
    codes = pc.fill_null(enc.indices, -1).to_numpy(zero_copy_only=False).astype(np.int64)
    return np.where(present, codes, -1), enc.dictionary.to_pylist()


def _split_values(arr) -> tuple[np.ndarray, np.ndarray, pa.Array | None]:
    """(present mask, numbers with NaN where a cell is text or absent, the texts or None) of a value column."""
    arr = _flat(arr)
    n = len(arr)
    if pa.types.is_null(arr.type):
        return np.zeros(n, dtype=bool), np.full(n, np.nan), None
    if pa.types.is_boolean(arr.type):
        arr = arr.cast(pa.string())
    if pa.types.is_integer(arr.type) or pa.types.is_floating(arr.type) or pa.types.is_decimal(arr.type):
        num = arr.cast(pa.float64()).to_numpy(zero_copy_only=False)
        present = ~np.isnan(num)
        finite = np.isfinite(num)
        if (present & ~finite).any():  # inf: parse_case refuses it with its own words
            texts = pa.array([repr(float(v)) if p and not f else None for v, p, f in zip(num, present, finite)],
                             pa.string())
            return present, np.where(finite, num, np.nan), texts
        return present, num, None
    arr = _as_strings(arr)
    trimmed = pc.utf8_trim_whitespace(arr)
    present = np.asarray(pc.fill_null(pc.not_equal(trimmed, ""), False))
    try:
        num = pc.cast(arr, pa.float64()).to_numpy(zero_copy_only=False)
        if np.isfinite(num[present]).all():
            return present, np.where(present, num, np.nan), None
    except pa.ArrowInvalid:
        pass
    is_num = np.asarray(pc.fill_null(pc.match_substring_regex(arr, _PLAIN_NUMBER), False))
    num = pc.cast(pc.if_else(pa.array(is_num), trimmed, pa.scalar(None, pa.string())), pa.float64())
    num = num.to_numpy(zero_copy_only=False)
    ok = is_num & np.isfinite(num)
    texts = pc.if_else(pa.array(present & ~ok), arr, pa.scalar(None, pa.string()))
    return present, np.where(ok, num, np.nan), texts


class _Builder:
    """Collects the cells of a chunk: (case, written key, unit, number, text) as parallel arrays."""

    def __init__(self) -> None:
        self.parts: list[tuple[np.ndarray, ...]] = []
        self.sources: list[tuple[int, pa.Array | None, np.ndarray]] = []  # (first cell, original texts, rows)
        self.n_cells = 0
        self.wkeys: dict[tuple[str, str], int] = {}
        self.units: dict[str, int] = {}
        self.texts: list[str] = []

    def wkey(self, section: str, name: str) -> int:
        return self.wkeys.setdefault((section, name), len(self.wkeys))

    def unit(self, unit: str | None) -> int:
        if unit is None or not str(unit).strip():
            return -1
        return self.units.setdefault(str(unit).strip(), len(self.units))

    def add(self, case: np.ndarray, wkey: np.ndarray, unit: np.ndarray, values) -> None:
        present, num, texts = _split_values(values)
        text_codes = np.full(len(num), -1, dtype=np.int64)
        if texts is not None:
            codes, strings = _codes(texts, present & np.isnan(num))
            text_codes = np.where(codes >= 0, codes + len(self.texts), -1)
            self.texts.extend(strings)
        rows = np.flatnonzero(present)
        self.parts.append((case[rows], wkey[rows], unit[rows], num[rows], text_codes[rows]))
        flat = _flat(values)
        self.sources.append((self.n_cells, flat if pa.types.is_string(flat.type) or pa.types.is_large_string(flat.type)
                             else None, rows))
        self.n_cells += len(rows)

    def original(self, cell: int) -> str | None:
        """The text a numeric cell had in the extract (None for a typed numeric column)."""
        import bisect

        at = bisect.bisect_right([s[0] for s in self.sources], cell) - 1
        start, arr, rows = self.sources[at]
        if arr is None:
            return None
        v = arr[int(rows[cell - start])].as_py()
        return v.strip() if isinstance(v, str) else None

    def arrays(self) -> tuple[np.ndarray, ...]:
        if not self.parts:
            e = np.zeros(0, dtype=np.int64)
            return e, e, e, np.zeros(0), e
        out = [np.concatenate([p[i] for p in self.parts]) for i in range(5)]
        return (out[0].astype(np.int64), out[1].astype(np.int64), out[2].astype(np.int64), out[3],
                out[4].astype(np.int64))


def _check_header(sk: ScreenKnowledge, name: str, section: str, analyte: str, unit: str | None) -> str | None:
    if section == "patient":
        if analyte not in PATIENT_FIELDS:
            return f"column '{name}': patient.{analyte} is not read (patient fields: {', '.join(PATIENT_FIELDS)})"
        if unit and analyte in ("sex", "pregnant"):
            return f"column '{name}': patient.{analyte} takes no unit"
        if unit and _route(sk, section, analyte, unit).kind == "problem":
            return f"column '{name}': unit '{unit}' is not a unit of patient.{analyte}"
        return None
    if section not in MEASUREMENT_SECTIONS:
        return (f"column '{name}': section '{section}' is not read from an extract (measurement sections: "
                f"{', '.join(MEASUREMENT_SECTIONS)}; patient fields: {', '.join(PATIENT_FIELDS)})")
    known = sk.section_keys[section]
    if analyte not in known:
        close = difflib.get_close_matches(analyte, list(known), n=1, cutoff=0.6)
        hint = f"; did you mean {section}.{close[0]}?" if close else ""
        return f"column '{name}': {section}.{analyte} is not a measurement tubulo knows{hint}"
    target = known[analyte]
    if unit and target not in CATEGORIES and target not in SPECIAL and _route(sk, section, analyte, unit).kind != "quantity":
        spec = sk.specs[target]
        return f"column '{name}': unit '{unit}' cannot be read for {target} (accepted: {', '.join(spec.units)})"
    return None


def _wide(table: pa.Table, b: _Builder, sk: ScreenKnowledge) -> tuple[pa.Array, list[str]]:
    if "case" not in table.column_names:
        raise ScreenInputError("wide layout: column 'case' is missing (one row per case: case, optional age, sex, "
                               "and one column per measurement such as 'serum.potassium [mmol/L]')")
    n = table.num_rows
    rows = np.arange(n, dtype=np.int64)
    ignored, bad = [], []
    for name in table.column_names:
        if name == "case":
            continue
        parsed = parse_column_name(name)
        if parsed is None:
            ignored.append(name)
            continue
        problem = _check_header(sk, name, *parsed)
        if problem:
            bad.append(problem)
            continue
        section, analyte, unit = parsed
        b.add(rows, np.full(n, b.wkey(section, analyte), dtype=np.int64), np.full(n, b.unit(unit), dtype=np.int64),
              table.column(name))
    if bad:
        raise ScreenInputError("; ".join(bad))
    return _as_strings(table.column("case")), ignored


def _first_per_case(case: np.ndarray, n_cases: int, values) -> tuple[Any, np.ndarray]:
    """From a per-row column of the long layout: each case's first given value, and the cases whose
    rows give different values."""
    values = _flat(values)
    present, _, _ = _split_values(values)
    codes, _ = _codes(pc.utf8_trim_whitespace(_as_strings(values)), present)
    rows = np.flatnonzero(present)
    first = np.full(n_cases, -1, dtype=np.int64)
    differs = np.zeros(n_cases, dtype=bool)
    if len(rows):
        order = rows[np.argsort(case[rows], kind="stable")]
        cs = case[order]
        starts = np.flatnonzero(np.r_[True, cs[1:] != cs[:-1]])
        first[cs[starts]] = order[starts]
        differs[case[rows][codes[rows] != codes[first[case[rows]]]]] = True
    picked = values.take(pa.array(np.where(first >= 0, first, 0))) if len(values) else values
    picked = pc.if_else(pa.array(first >= 0), picked, pa.scalar(None, picked.type))
    return picked, differs


def _long(table: pa.Table, b: _Builder, own: dict[int, list[str]]) -> tuple[pa.Array, list[str]]:
    for col in LONG_COLUMNS:
        if col not in table.column_names:
            raise ScreenInputError(f"long layout: column '{col}' is missing (expected {', '.join(LONG_COLUMNS)}, "
                                   "optional unit, age, sex, weight, height, pregnant)")
    enc = pc.dictionary_encode(_as_strings(table.column("case")))
    null_id = np.asarray(pc.is_null(enc.indices))
    case = pc.fill_null(enc.indices, 0).to_numpy(zero_copy_only=False).astype(np.int64)
    ids = enc.dictionary
    if null_id.any():  # rows without a case id form one case without an id
        case = np.where(null_id, len(ids), case)
        ids = pa.concat_arrays([ids, pa.array([None], pa.string())])
    n_cases = len(ids)
    joined = pc.binary_join_element_wise(pc.fill_null(_as_strings(table.column("section")), ""),
                                         pc.fill_null(_as_strings(table.column("analyte")), ""), "\x1f")
    kenc = pc.dictionary_encode(joined)
    remap = np.array([b.wkey(*w.split("\x1f", 1)) for w in kenc.dictionary.to_pylist()], dtype=np.int64)
    wkey = remap[kenc.indices.to_numpy(zero_copy_only=False)]
    if "unit" in table.column_names:
        uenc = pc.dictionary_encode(pc.utf8_trim_whitespace(_as_strings(table.column("unit"))))
        umap = np.array([b.unit(u) for u in uenc.dictionary.to_pylist()] + [-1], dtype=np.int64)
        unit = umap[pc.fill_null(uenc.indices, -1).to_numpy(zero_copy_only=False)]
    else:
        unit = np.full(len(case), -1, dtype=np.int64)
    b.add(case, wkey, unit, table.column("value"))
    ignored = []
    for name in table.column_names:
        if name in LONG_COLUMNS or name == "unit":
            continue
        parsed = parse_column_name(name)
        if parsed is None or parsed[0] != "patient" or parsed[1] not in PATIENT_FIELDS:
            ignored.append(name)
            continue
        _, fld, cunit = parsed
        values, differs = _first_per_case(case, n_cases, table.column(name))
        for i in np.flatnonzero(differs).tolist():
            own.setdefault(i, []).append(f"patient.{fld}: differs between the rows of this case; give one value")
        b.add(np.arange(n_cases, dtype=np.int64), np.full(n_cases, b.wkey("patient", fld), dtype=np.int64),
              np.full(n_cases, b.unit(cunit), dtype=np.int64), values)
    return ids, ignored


def _groups(keys: np.ndarray):
    """(value, indices) for each distinct value of `keys`, by sorting once."""
    if len(keys) == 0:
        return
    order = np.argsort(keys, kind="stable")
    k = keys[order]
    cuts = np.flatnonzero(k[1:] != k[:-1]) + 1
    for part in np.split(order, cuts):
        yield int(keys[part[0]]), part


@dataclass
class Prepared:
    """A chunk read into cases: ids, the matrix-path batch, and the cases that need the single-case path."""

    ids: pa.Array  # case ids as written (string; null when a row had none)
    batch: Batch
    problem: np.ndarray  # bool: the case has a problem; parse_case words it
    single: np.ndarray  # bool: valid, but read on the single-case path
    own: dict[int, list[str]]  # problems of the extract that a case file cannot have (filled by `mapping` too)
    mapping: Callable[..., dict]  # case i as a case-file mapping, for parse_case (see prepare.mapping)
    ignored_columns: list[str]

    @property
    def n(self) -> int:
        return len(self.ids)


def prepare(table: pa.Table, layout: str, sk: ScreenKnowledge) -> Prepared:
    """Read one chunk (every row of each of its cases) into cases."""
    b = _Builder()
    own: dict[int, list[str]] = {}
    if layout == "long":
        ids, ignored = _long(table, b, own)
    elif layout == "wide":
        ids, ignored = _wide(table, b, sk)
    else:
        raise ScreenInputError(f"layout '{layout}' is not long or wide")
    c_case, c_wkey, c_unit, c_num, c_text = b.arrays()
    wkeys, units, texts = list(b.wkeys), list(b.units), b.texts
    n = len(ids)
    n_values, n_cats = len(sk.value_keys), len(sk.category_values)
    sex_slot, preg_slot = n_values + n_cats, n_values + n_cats + 1
    n_slots = preg_slot + 1
    values = np.full((n_values, n), np.nan)
    cats = np.full((n_cats, n), -1, dtype=np.int16)
    sex = np.full(n, _UNKNOWN_SEX, dtype=np.int8)
    problem = np.zeros(n, dtype=bool)
    single = np.zeros(n, dtype=bool)
    problem[list(own)] = True
    problem |= np.asarray(pc.fill_null(pc.equal(pc.utf8_trim_whitespace(ids), ""), True))
    slots: list[tuple[np.ndarray, int]] = []  # (cell indices, stored slot)
    bad = np.zeros(len(c_case), dtype=bool)  # cells with a problem of their own

    def unit_of(u: int) -> str | None:
        return units[u] if u >= 0 else None

    def apply(cell: _Cell, at: np.ndarray) -> None:
        cases = c_case[at]
        if cell.problems:
            problem[cases] = True
            bad[at] = True
            return
        for key, v in cell.values:
            values[sk.value_index[key], cases] = v
            slots.append((at, sk.value_index[key]))
        for key, v in cell.categories:
            j = sk.category_index[key]
            cats[j, cases] = sk.category_values[key].index(v)
            slots.append((at, n_values + j))
        if cell.sex is not None:
            sex[cases] = SEX_CODES.index(cell.sex)
            slots.append((at, sex_slot))
        if cell.pregnant is not None:
            single[cases] |= bool(cell.pregnant)
            slots.append((at, preg_slot))

    is_num = c_text < 0
    pair = c_wkey * (len(units) + 1) + (c_unit + 1)
    num_cells = np.flatnonzero(is_num)
    for pv, part in _groups(pair[num_cells]):
        sel = num_cells[part]
        w, u = divmod(pv, len(units) + 1)
        section, name = wkeys[w]
        unit = unit_of(u - 1)
        if section in _NOT_READ:
            problem[c_case[sel]] = True
            bad[sel] = True
            continue
        r = _route(sk, section, name, unit)
        if r.kind == "quantity":
            v = c_num[sel] * r.factor
            ok = (r.lo <= v) & (v <= r.hi)
            problem[c_case[sel[~ok]]] = True
            bad[sel[~ok]] = True
            values[r.slot, c_case[sel[ok]]] = v[ok]
            slots.append((sel, r.slot))
        elif r.kind == "problem":
            problem[c_case[sel]] = True
            bad[sel] = True
        else:
            for _, vpart in _groups(np.unique(c_num[sel], return_inverse=True)[1].reshape(-1)):
                at = sel[vpart]
                apply(parse_cell(section, name, unit, float(c_num[at[0]]), None), at)
    text_cells = np.flatnonzero(~is_num)
    tkey = pair[text_cells] * (len(texts) + 1) + c_text[text_cells]
    for _, part in _groups(tkey):
        at = text_cells[part]
        i = at[0]
        section, name = wkeys[c_wkey[i]]
        if section in _NOT_READ:
            problem[c_case[at]] = True
            bad[at] = True
            continue
        apply(parse_cell(section, name, unit_of(c_unit[i]), None, texts[c_text[i]]), at)

    # a stored key given twice in a case (an alias, two columns, a repeated row): parse_case decides
    if slots:
        cells_at = np.concatenate([at for at, _ in slots])
        flat = c_case[cells_at] * n_slots + np.repeat([s for _, s in slots], [len(at) for at, _ in slots])
        counts = np.bincount(flat, minlength=n * n_slots)
        twice = counts > 1
        problem[np.flatnonzero(twice) // n_slots] = True
        bad[cells_at[twice[flat]]] = True

    order = np.argsort(c_case, kind="stable")
    starts = np.searchsorted(c_case[order], np.arange(n + 1))
    id_list: list[Any] = []

    def mapping(i: int, problems_only: bool = False) -> dict:
        """Case i as a case-file mapping; a key written twice with different values keeps the first
        and the repeat is reported in `own`, an exact repeat is read once.  `problems_only` keeps the
        cells that have a problem of their own (parse_case words each such problem from its cell alone,
        in section and row order, so the message is the one of the whole case)."""
        if not id_list:
            id_list.extend(ids.to_pylist())
        data: dict[str, Any] = {"case": id_list[i]}
        seen: dict[tuple[str, str], Any] = {}
        for c in order[starts[i]:starts[i + 1]].tolist():
            if problems_only and not bad[c]:
                continue
            section, name = wkeys[c_wkey[c]]
            unit = unit_of(c_unit[c])
            if section in _NOT_READ:
                msg = (f"{section}: not read from an extract; a screening row carries measurements "
                       f"({', '.join(MEASUREMENT_SECTIONS)}) and patient {', '.join(PATIENT_FIELDS)}")
                if msg not in own.setdefault(i, []):
                    own[i].append(msg)
                continue
            if c_text[c] >= 0:
                raw = parse_cell(section, name, unit, None, texts[c_text[c]]).raw
            else:
                text = b.original(c)
                raw = written_value(c_num[c], None, unit) if text is None else _as_written(text, unit)
            if (section, name) in seen:
                if seen[(section, name)] != raw:
                    msg = f"{section}.{name}: given more than once ({seen[(section, name)]!r} and {raw!r}); keep one"
                    if msg not in own.setdefault(i, []):
                        own[i].append(msg)
                continue
            seen[(section, name)] = raw
            data.setdefault(section, {})[name] = raw
        return data

    return Prepared(ids, Batch(values, cats, sex), problem, single, own, mapping, ignored)
