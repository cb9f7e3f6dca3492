"""`tubulo screen` on files: long and wide, CSV and Parquet in and out, bad rows, critical values,
progress, the summary and the exit codes."""

from __future__ import annotations

import io

import pyarrow as pa
import pyarrow.csv as pacsv
import pyarrow.parquet as pq
import pytest

from tubulo.cli import main
from tubulo.screen.run import output_schema
from tubulo.screen.sample import sample_cases, to_long, to_wide
from tubulo.screen.stream import screen_file

from .conftest import assert_same, expected_row


def _write(table: pa.Table, path) -> str:
    if str(path).endswith(".csv"):
        pacsv.write_csv(table, path)
    else:
        pq.write_table(table, path)
    return str(path)


def _read(path) -> list[dict]:
    if str(path).endswith(".csv"):
        schema = output_schema()
        opts = pacsv.ConvertOptions(column_types={f.name: f.type for f in schema}, strings_can_be_null=True)
        return pacsv.read_csv(path, convert_options=opts).to_pylist()
    return pq.read_table(path).to_pylist()


@pytest.fixture(scope="module")
def cases(sk):
    return sample_cases(sk, 120, seed=31)


@pytest.mark.parametrize("layout", ["long", "wide"])
@pytest.mark.parametrize("fmt_in,fmt_out", [("csv", "csv"), ("csv", "parquet"), ("parquet", "csv"),
                                            ("parquet", "parquet")])
def test_every_layout_and_format_gives_the_rank_result(sk, tables, cases, tmp_path, layout, fmt_in, fmt_out):
    src = _write(to_long(cases) if layout == "long" else to_wide(cases), tmp_path / f"in.{fmt_in}")
    dst = tmp_path / f"out.{fmt_out}"
    summary = screen_file(src, dst, chunk_size=40)
    rows = _read(dst)
    assert [r["case"] for r in rows] == [c["case"] for c in cases]
    assert summary.cases == len(cases) == summary.matrix + summary.single + summary.errors
    assert summary.layout == layout and summary.chunks == 3
    for case, row in zip(cases[:15], rows[:15]):  # rank_case is slow: a share here, all in test_equal_rank
        assert_same(row, expected_row(sk, tables, case), case["case"])


def test_output_files_are_identical_across_formats_and_chunk_sizes(cases, tmp_path):
    outs = []
    for i, (layout, fmt, chunk) in enumerate([("long", "csv", 1), ("wide", "parquet", 7), ("long", "parquet", 500)]):
        src = _write(to_long(cases) if layout == "long" else to_wide(cases), tmp_path / f"in{i}.{fmt}")
        screen_file(src, tmp_path / f"out{i}.parquet", chunk_size=chunk)
        outs.append(pq.read_table(tmp_path / f"out{i}.parquet"))
    assert outs[0].equals(outs[1]) and outs[1].equals(outs[2])


def test_cli_writes_output_reports_critical_and_cautions(tmp_path, capsys):
    src = tmp_path / "extract.csv"
    src.write_text("case,age,sex,serum.potassium [mmol/L],serum.sodium [mmol/L],serum.magnesium [mg/dL]\n"
                   "k-low,54,female,2.4,139,1.9\n"
                   "fine,54,female,4.1,139,2.0\n"
                   "bad,54,female,41,139,2.0\n"
                   "comma,54,female,\"3,9\",139,2.0\n", encoding="utf-8")
    dst = tmp_path / "result.csv"
    assert main(["screen", str(src), "-o", str(dst)]) == 0
    err = capsys.readouterr().err
    rows = {r["case"]: r for r in _read(dst)}
    assert list(rows) == ["k-low", "fine", "bad", "comma"]
    # a potassium below 2.5 mmol/L is a critical value (Kost GJ 1990 JAMA critical limits; from memory)
    assert "Potassium 2.40 mmol/L" in rows["k-low"]["critical"] and rows["k-low"]["critical_keys"] == "serum.potassium"
    assert rows["fine"]["critical"] is None and rows["fine"]["error"] is None and rows["fine"]["candidate_1"]
    # the impossible row is reported and the run went on
    assert "serum.potassium" in rows["bad"]["error"] and "not a possible potassium" in rows["bad"]["error"]
    assert rows["bad"]["candidate_1"] is None and rows["bad"]["route"] is None
    # a decimal comma is read as parse_case reads it
    assert rows["comma"]["error"] is None and rows["comma"]["route"] == "matrix"
    assert "CRITICAL" in err and "1 case(s) have CRITICAL values" in err
    assert "Decision support, not a diagnosis" in err
    assert "cases/s" in err and "left" in err  # the progress line
    assert "1 could not be read" in err


def test_parquet_output_carries_the_caution(tmp_path):
    src = _write(pa.table({"case": ["a"], "serum.sodium [mmol/L]": [140.0]}), tmp_path / "x.parquet")
    screen_file(src, tmp_path / "y.parquet")
    meta = pq.read_schema(tmp_path / "y.parquet").metadata
    assert b"not a diagnosis" in meta[b"tubulo.caution"]


def test_typed_parquet_columns_and_text_cells_are_read(sk, tables, tmp_path):
    table = pa.table({"case": ["t1", "t2"], "age": [7.5, 60.0], "sex": ["male", "female"],
                      "serum.potassium [mmol/L]": [3.1, 5.9], "serum.calcium": ["9.4 mg/dL", "2.3 mmol/L"],
                      "vitals.blood_pressure [mmHg]": ["104/66", "150/95"], "urine.glucose": ["positive", None]})
    src = _write(table, tmp_path / "t.parquet")
    screen_file(src, tmp_path / "o.parquet")
    rows = pq.read_table(tmp_path / "o.parquet").to_pylist()
    mappings = [{"case": "t1", "patient": {"age": 7.5, "sex": "male"},
                 "serum": {"potassium": "3.1 mmol/L", "calcium": "9.4 mg/dL"},
                 "vitals": {"blood_pressure": "104/66 mmHg"}, "urine": {"glucose": "positive"}},
                {"case": "t2", "patient": {"age": 60.0, "sex": "female"},
                 "serum": {"potassium": "5.9 mmol/L", "calcium": "2.3 mmol/L"},
                 "vitals": {"blood_pressure": "150/95 mmHg"}}]
    for m, row in zip(mappings, rows):
        assert row["route"] == "matrix"
        assert_same(row, expected_row(sk, tables, m), m["case"])


@pytest.mark.parametrize("text,expect", [
    ("case,serum.potasium [mmol/L]\na,3\n", "did you mean serum.potassium"),
    ("case,serum.sodium [furlong]\na,140\n", "unit 'furlong' cannot be read for serum.sodium"),
    ("case,medications.x\na,1\n", "section 'medications' is not read"),
    ("", "empty file"),
])
def test_a_bad_header_stops_the_run_with_exit_2(tmp_path, capsys, text, expect):
    src = tmp_path / "h.csv"
    src.write_text(text, encoding="utf-8")
    assert main(["screen", str(src), "-o", str(tmp_path / "o.csv"), "--quiet"]) == 2
    assert expect in capsys.readouterr().err


def test_missing_long_column_and_bad_paths_exit_2(tmp_path, capsys):
    src = tmp_path / "l.csv"
    src.write_text("case,section,value\na,serum,3\n", encoding="utf-8")
    assert main(["screen", str(src), "-o", str(tmp_path / "o.csv"), "--layout", "long"]) == 2
    assert "column 'analyte' is missing" in capsys.readouterr().err
    assert main(["screen", str(tmp_path / "none.csv"), "-o", str(tmp_path / "o.csv")]) == 2
    assert "no such file" in capsys.readouterr().err
    assert main(["screen", str(src), "-o", str(tmp_path / "o.json")]) == 2
    assert "expected a .csv or .parquet file" in capsys.readouterr().err
    assert main(["screen", str(src), "-o", str(src)]) == 2
    assert "must not be the input" in capsys.readouterr().err


def test_columns_the_screen_does_not_read_are_named(tmp_path):
    src = tmp_path / "w.csv"
    src.write_text("case,site,serum.sodium [mmol/L]\na,north,140\n", encoding="utf-8")
    s = screen_file(src, tmp_path / "o.csv")
    assert s.ignored_columns == ["site"] and s.matrix == 1


def test_progress_line_shows_share_rate_and_time_left():
    from tubulo.screen.stream import Progress

    buf = io.StringIO()
    bar = Progress(buf)
    text = bar.line(0.25, 5000)
    assert "25%" in text and "5,000 cases" in text and "cases/s" in text and "left" in text
    bar.update(1.0, 20000, final=True)
    assert "100%" in buf.getvalue()
