"""`radialpn batch` streamed in chunks, Parquet in and out, and batch/search on a Dask cluster:
the output must not depend on how the table is cut (byte for byte), cells come back unchanged,
errors keep their one-line form and leave no output behind."""

import csv
import io
import sys

import numpy as np
import pytest
from rich.console import Console

from radialpn.cli import main

HEADER = ["label", "material", "core_type", "core_radius_nm", "shell_thickness_nm", "core_doping_cm3",
          "shell_doping_cm3", "dit_cm2eV"]
ROWS = [
    ["a, with comma", "GaAs", "p", "60", "40nm", "1e18", "1e18", "1e12"],
    ['say "hi"', "GaAs", "n", "-5", "40", "1e18", "1e18", "1e12"],  # bad radius: a reason in status
    ["two\nlines", "InAs", "p", "50", "30", "1e17", "1e17", "1e12"],  # surface accumulates: no answer
    ["d", "GaAs", "n", "20", "8", "1e17", "3e18", "1e13"],
    ["e", "InP", "p", " 35 ", "12", "5e17", "5e17"],  # short row: dit blank, the default
]


def run(argv):
    buf, out = io.StringIO(), io.StringIO()
    code = main(argv, console=Console(file=buf, width=120, color_system=None), out=out)
    return code, buf.getvalue(), out.getvalue()


def write(path, rows, header=HEADER, delimiter=","):
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, delimiter=delimiter, lineterminator="\r\n")
        w.writerow(header)
        for k, r in enumerate(rows):
            w.writerow(r)
            if k == 1:
                fh.write("\r\n")  # a blank line: no design


def many(n):
    return [[f"r{k}"] + ROWS[k % len(ROWS)][1:] for k in range(n)]


@pytest.mark.parametrize("delimiter", [",", ";"])
def test_chunked_output_is_byte_identical(tmp_path, delimiter):
    # Rows are answered independently, so cutting the table into chunks of 1, 3 or all rows
    # must give the same bytes; every input cell (commas, quotes, a newline inside a quoted
    # cell, spaces) comes back unchanged and in order.
    src = tmp_path / "in.csv"
    rows = many(23)
    write(src, rows, delimiter=delimiter)
    outs = []
    for chunk in ("1", "3", "100000"):
        dst = tmp_path / f"out{chunk}.csv"
        code, text, _ = run(["batch", str(src), "-o", str(dst), "--engine", "depletion", "--chunk-rows", chunk])
        assert code == 3 and "23 rows" in text  # some rows have no answer: exit 3 without --keep-going
        outs.append(dst.read_bytes())
    assert outs[0] == outs[1] == outs[2]
    got = list(csv.reader(io.StringIO(outs[0].decode(), newline="")))
    assert got[0][:len(HEADER)] == HEADER
    for g, r in zip(got[1:], rows):
        assert g[:len(HEADER)] == r + [""] * (len(HEADER) - len(r))
    status = got[0].index("status")
    assert got[1][status] == "ok" and got[2][status].startswith("core_radius_nm: allowed range")
    code, _, out = run(["batch", str(src), "--engine", "depletion", "--chunk-rows", "4", "--keep-going"])
    assert code == 0 and out.encode() == outs[0]  # standard output: the same bytes


def test_late_bad_row_leaves_nothing(tmp_path):
    # A row longer than the header after the first chunk: the one-line error with its line
    # number, exit 2, no output file created and nothing on standard output.
    src = tmp_path / "in.csv"
    rows = many(9)
    rows[7] = rows[7] + ["extra"]
    write(src, rows)
    dst = tmp_path / "out.csv"
    code, text, _ = run(["batch", str(src), "-o", str(dst), "--engine", "depletion", "--chunk-rows", "2"])
    assert code == 2 and "line 10 has 9 cells, the header 8" in text and text.count("\n") == 1
    assert not dst.exists() and list(tmp_path.iterdir()) == [src]
    code, text, out = run(["batch", str(src), "--engine", "depletion", "--chunk-rows", "2"])
    assert code == 2 and out == ""


def test_not_utf8_offset_and_header_errors(tmp_path):
    src = tmp_path / "in.csv"
    src.write_bytes(b"material,core_type\r\nGaAs,p\r\n" + b"x" * 70000 + b"\xff\r\n")
    code, text, _ = run(["batch", str(src), "--engine", "depletion"])
    assert code == 2 and f"byte {20 + 8 + 70000} is 0xff" in text  # header 20 bytes, row 8, then the run
    src.write_text("material,material\nGaAs,GaAs\n")
    code, text, _ = run(["batch", str(src)])
    assert code == 2 and "column 'material' appears twice" in text


def test_parquet_in_and_out(tmp_path):
    pa = pytest.importorskip("pyarrow")
    pq = pytest.importorskip("pyarrow.parquet")
    src_csv, src_pq = tmp_path / "in.csv", tmp_path / "in.parquet"
    rows = many(11)
    write(src_csv, rows)
    cols = list(zip(*[r + [""] * (len(HEADER) - len(r)) for r in rows]))
    pq.write_table(pa.table({h: list(c) for h, c in zip(HEADER, cols)}), src_pq)
    code, _, _ = run(["batch", str(src_csv), "-o", str(tmp_path / "ref.csv"), "--engine", "depletion", "--keep-going"])
    assert code == 0
    ref = list(csv.DictReader(open(tmp_path / "ref.csv", newline="")))
    # Parquet in, Parquet out (chunks of 4): the same columns, the same answers as the CSV run
    code, _, _ = run(["batch", str(src_pq), "-o", str(tmp_path / "out.parquet"), "--engine", "depletion",
                      "--keep-going", "--chunk-rows", "4"])
    assert code == 0
    got = pq.read_table(tmp_path / "out.parquet")
    assert got.column_names == list(ref[0])
    assert got.num_rows == len(ref) == 11
    assert got.column("label").to_pylist() == [r[0] for r in rows]  # input cells unchanged, in order
    assert got.column("status").to_pylist() == [r["status"] for r in ref]
    # float64 out: the CSV's shortest round-trip text reads back as the same double
    assert [("" if v != v else repr(v)) for v in got.column("vbi_V").to_pylist()] == [r["vbi_V"] for r in ref]
    # Parquet in, CSV out: the same bytes as CSV in, CSV out (the input cells here are text)
    code, _, _ = run(["batch", str(src_pq), "-o", str(tmp_path / "pq.csv"), "--engine", "depletion", "--keep-going"])
    assert (tmp_path / "pq.csv").read_bytes() == (tmp_path / "ref.csv").read_bytes()


def test_parquet_without_pyarrow_names_the_extra(tmp_path, monkeypatch):
    src = tmp_path / "in.csv"
    write(src, many(2))
    monkeypatch.setitem(sys.modules, "pyarrow", None)  # import pyarrow now raises ImportError
    monkeypatch.setitem(sys.modules, "pyarrow.parquet", None)
    code, text, _ = run(["batch", str(src), "-o", str(tmp_path / "out.parquet"), "--engine", "depletion"])
    assert code == 2 and "pip install 'radialpn[parquet]'" in text and text.count("\n") == 1
    assert not (tmp_path / "out.parquet").exists()


@pytest.fixture(scope="module")
def cluster():
    distributed = pytest.importorskip("dask.distributed")
    with distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False, dashboard_address=None) as c:
        yield c.scheduler_address


def test_batch_on_dask_equals_local(tmp_path, cluster):
    # Each chunk goes through the same library call on a worker and the answers are written in
    # submission order, so the file is byte-identical to a local run.
    src = tmp_path / "in.csv"
    write(src, many(17))
    code_l, _, local = run(["batch", str(src), "--engine", "depletion", "--chunk-rows", "5", "--keep-going"])
    code_d, text, dask = run(["batch", str(src), "--engine", "depletion", "--chunk-rows", "5", "--keep-going",
                              "--scheduler", cluster])
    assert code_l == code_d == 0 and "Dask cluster" in text and dask == local


def test_search_on_dask_equals_local(cluster):
    # Same candidates (one seeded draw), same answers per partition (210,000 candidates: three
    # partitions of SEARCH_CHUNK), same order: same winners.
    plan = ["search", "--material", "GaAs", "--core-type", "p", "--core-radius", "60nm", "--core-doping", "2e18",
            "--shell-doping", "2e18", "--dit", "5e12", "--vary", "shell-thickness:2nm:100nm", "--vbi-min", "1.2V",
            "--candidates", "210000", "--top", "3", "--engine", "depletion", "--json"]
    code_l, _, local = run(plan)
    code_d, _, dask = run(plan + ["--scheduler", cluster])
    import json

    a, b = json.loads(local), json.loads(dask)
    assert code_l == code_d == 0 and a["winners"] == b["winners"] and a["feasible"] == b["feasible"]


def test_auto_engine_columns_do_not_depend_on_chunks(tmp_path):
    # The auto engine calls the solver only for rows the surrogate refuses (here an InAs row
    # outside its bundle's doping and neutral-level domain, and the out-of-domain rows); a chunk without such rows must still write the
    # solver's columns (blank), so that cutting the table differently gives the same columns and
    # cells. Numbers agree to 1e-12 relative, not bit for bit: the solver's vectorised root
    # solves and numpy's SIMD loops round the last bit differently for a different set of rows.
    src = tmp_path / "in.csv"
    rows = [r for r in many(10) if r[1] == "GaAs"] + [["x", "InAs", "p", "200", "200", "1e18", "1e18", "0"]]
    write(src, rows)
    outs = []
    for chunk in ("2", "100"):
        dst = tmp_path / f"out{chunk}.csv"
        code, _, _ = run(["batch", str(src), "-o", str(dst), "--engine", "auto", "--chunk-rows", chunk, "--keep-going"])
        assert code == 0
        outs.append(dst.read_bytes())
    a, b = (list(csv.reader(io.StringIO(o.decode(), newline=""))) for o in outs)
    assert a[0] == b[0] and len(a) == len(b)
    for ra, rb in zip(a[1:], b[1:]):
        for x, y in zip(ra, rb):
            assert x == y or float(x) == pytest.approx(float(y), rel=1e-12, abs=1e-15)
    got = list(csv.DictReader(io.StringIO(outs[0].decode(), newline="")))
    assert got[-1]["engine"] == "solver" and got[-1]["solver_version"] and got[0]["solver_version"] == ""


def test_output_onto_the_input_and_zero_chunk_rows_are_refused(tmp_path):
    # common practice: answers written over their own input would lose it (directly or through a
    # symlink); a chunk of 0 rows is no chunk. Both refused before any work, input unchanged.
    src = tmp_path / "in.csv"
    text = "material,core_type,core_radius_nm,shell_thickness_nm,core_doping_cm3,shell_doping_cm3,dit_cm2eV\n" \
           "GaAs,p,60,40,1e18,1e18,1e12\n"
    src.write_text(text)
    (tmp_path / "link.csv").symlink_to(src)
    for argv in (["-o", str(src)], ["-o", str(tmp_path / "link.csv")], ["--chunk-rows", "0"]):
        code, err, _ = run(["batch", str(src), *argv])
        assert code == 2 and ("input file" in err or "--chunk-rows" in err)
    assert src.read_text() == text


def test_an_interrupted_batch_keeps_its_finished_chunks_and_resumes_to_the_same_file(tmp_path, monkeypatch):
    # the standard: no interrupted run loses finished work or leaves a partial output. Ctrl-C in
    # the third chunk keeps two whole chunks in OUT.partial (OUT itself never appears); a
    # SIGKILL's half-written tail is cut back; --resume gives the uninterrupted run's bytes.
    import radialpn as rp

    rng = np.random.default_rng(3)
    rows = [[f"w{i}", "GaAs", "p", f"{10 ** rng.uniform(1, 2.4):.6g}", f"{10 ** rng.uniform(0.5, 2.4):.6g}",
             f"{10 ** rng.uniform(16, 19):.4g}", f"{10 ** rng.uniform(16, 19):.4g}", "1e12"] for i in range(300)]
    src = tmp_path / "in.csv"
    write(src, rows)
    whole, out = tmp_path / "whole.csv", tmp_path / "out.csv"
    base = ["batch", str(src), "--engine", "depletion", "--chunk-rows", "50"]
    assert run(base + ["-o", str(whole)])[0] == 0
    real, calls = rp.predict, {"n": 0}

    def stop_in_third_chunk(*a, **k):
        calls["n"] += 1
        if calls["n"] == 3:
            raise KeyboardInterrupt
        return real(*a, **k)

    monkeypatch.setattr(rp, "predict", stop_in_third_chunk)
    code, text, _ = run(base + ["-o", str(out)])
    monkeypatch.setattr(rp, "predict", real)
    partial = tmp_path / "out.csv.partial"
    kept = int(" ".join(text.split()).split(" answered rows kept")[0].split()[-1])
    assert code == 130 and not out.exists() and 90 <= kept <= 100  # two chunks of about 50 rows
    assert partial.read_bytes() == whole.read_bytes()[:len(partial.read_bytes())]
    assert len(partial.read_text().splitlines()) == 1 + kept
    code, text, _ = run(base + ["-o", str(out)])  # a fresh start would overwrite the kept rows: refused
    assert code == 2 and "--resume" in text
    import fcntl

    with open(partial, "rb") as held:  # a run still writing holds the partial file: a second one is refused
        fcntl.flock(held.fileno(), fcntl.LOCK_EX)
        code, text, _ = run(base + ["-o", str(out), "--resume"])
    assert code == 2 and "another radialpn run is writing" in text
    code, text, _ = run(["batch", str(src), "--engine", "surrogate", "--chunk-rows", "50", "-o", str(out), "--resume"])
    assert code == 2 and "another engine" in text
    def fail_next_chunk(*a, **k):  # a failure that is not the input's (a lost cluster, say): rows kept
        raise RuntimeError("lost the cluster")

    monkeypatch.setattr(rp, "predict", fail_next_chunk)
    code, text, _ = run(base + ["-o", str(out), "--resume"])
    monkeypatch.setattr(rp, "predict", real)
    assert code == 1 and f"{kept} answered rows kept" in " ".join(text.split())
    with open(partial, "ab") as fh:
        fh.write(b"GaAs,p,12,3")  # what SIGKILL may leave: part of a chunk after the recorded end
    code, text, _ = run(base + ["-o", str(out), "--resume"])
    assert code == 0 and out.read_bytes() == whole.read_bytes() and "300 rows" in text
    assert not partial.exists() and not (tmp_path / "out.csv.partial.json").exists()
