"""``lopside batch``: many files, one row per outcome, on a real Dask cluster.

The reference for every ``ok`` row is ``lopside check --json`` on the same file (the same
loader and engine): the row must carry the same numbers, on the natural scale. The input
reviews are generated here from a seeded RNG (invented numbers, no real trials).
"""

from __future__ import annotations

import csv
import json
import math
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from lopside.batch import (
    BATCH_COLUMNS,
    INSTALL_HINT,
    BatchError,
    BatchOptions,
    appraise_file,
    find_inputs,
    read_rows,
    run_batch,
)
from lopside.model.project_file import save
from lopside.model.review import Review, ReviewDetails, StudyRow

APP = Path(__file__).resolve().parents[1] / "app"
N_REVIEWS = 200


def _binary_table(rng: np.random.Generator, k: int) -> str:
    lines = ["study,year,int_events,int_total,ctl_events,ctl_total"]
    for i in range(k):
        n1, n0 = (int(x) for x in rng.integers(20, 400, size=2))
        p0 = rng.uniform(0.05, 0.4)
        p1 = min(0.95, p0 * rng.uniform(0.5, 1.2))
        lines.append(
            f"Trial {i + 1},{2000 + i},{rng.binomial(n1, p1)},{n1},{rng.binomial(n0, p0)},{n0}"
        )
    return "\n".join(lines) + "\n"


def _means_table(rng: np.random.Generator, k: int) -> str:
    lines = ["study,int_mean,int_sd,int_n,ctl_mean,ctl_sd,ctl_n"]
    for i in range(k):
        n1, n0 = (int(x) for x in rng.integers(10, 200, size=2))
        sd = rng.uniform(5, 15)
        lines.append(
            f"Study {i + 1},{rng.normal(-2, 3):.2f},{sd:.2f},{n1},"
            f"{rng.normal(0, 3):.2f},{sd * rng.uniform(0.8, 1.2):.2f},{n0}"
        )
    return "\n".join(lines) + "\n"


@pytest.fixture(scope="module")
def corpus(tmp_path_factory) -> Path:
    """~200 invented study tables, one invented project, and a few hostile files."""
    root = tmp_path_factory.mktemp("corpus")
    rng = np.random.default_rng(20261202)
    for i in range(N_REVIEWS):
        k = int(rng.integers(3, 25))
        sub = root / f"group{i % 4}"
        sub.mkdir(exist_ok=True)
        text = _binary_table(rng, k) if i % 2 == 0 else _means_table(rng, k)
        (sub / f"review_{i:03d}.csv").write_text(text, encoding="utf-8")
    hostile = root / "hostile"
    hostile.mkdir()
    (hostile / "no_header.csv").write_text("garbage\n1,2,3\n", encoding="utf-8")
    (hostile / "empty.csv").write_bytes(b"")
    (hostile / "junk.xlsx").write_bytes(b"PK\x03\x04 this is not a workbook")
    (hostile / "cut.lopside").write_text('{"format": "lopside-project", "vers', encoding="utf-8")
    (hostile / "words.txt").write_text("nothing here looks like a study\n", encoding="utf-8")
    # a project whose title a spreadsheet would run as a formula
    review = Review(
        details=ReviewDetails(title='=HYPERLINK("http://example.invalid","x")', measure="MD"),
        studies=tuple(
            StudyRow(study=f"S{i}", estimate=float(e), se=0.4) for i, e in enumerate([1, 2, 0, 3])
        ),
    )
    save(review, hostile / "formula_title.lopside")
    (root / ".hidden.csv").write_text("this hidden file is passed over\n", encoding="utf-8")
    return root


@pytest.fixture()
def app_on_path(monkeypatch):
    """Worker processes import lopside from this checkout, as the test process does."""
    monkeypatch.setenv(
        "PYTHONPATH", os.pathsep.join(filter(None, [str(APP), os.environ.get("PYTHONPATH")]))
    )
    monkeypatch.setenv("OPENBLAS_NUM_THREADS", "1")


def _check_json(path: Path) -> dict:
    from lopside.analysis import analyse
    from lopside.cli_common import load_review_file
    from lopside.report import to_json
    from lopside.settings import AnalysisSettings

    review, saved = load_review_file(path)
    return to_json(analyse(review, AnalysisSettings.from_dict(saved)))


def _agrees(row: dict, obj: dict) -> None:
    """A batch row carries the same numbers as ``check --json`` (natural scale)."""
    ratio = obj["scale"] == "natural log"

    def nat(x):
        return math.exp(x) if ratio else x

    assert row["measure"] == obj["measure"]
    assert row["k"] == obj["k"]
    rnd = obj["pooled"]["random"]
    assert row["estimate"] == pytest.approx(nat(rnd["estimate"]), rel=1e-12)
    assert row["ci_low"] == pytest.approx(nat(rnd["ci_low"]), rel=1e-12)
    assert row["ci_high"] == pytest.approx(nat(rnd["ci_high"]), rel=1e-12)
    if rnd.get("pi_low") is not None:
        assert row["pi_low"] == pytest.approx(nat(rnd["pi_low"]), rel=1e-12)
    assert row["i2"] == pytest.approx(obj["heterogeneity"]["i2"], rel=1e-12, abs=1e-12)
    assert row["tau2"] == pytest.approx(obj["heterogeneity"]["tau2"], rel=1e-12, abs=1e-15)
    rec = obj["recommended_test"]
    if rec is not None:
        assert row["recommended_test"] == rec["key"]
        test = obj["tests"][rec["key"]]
        if test is None:  # recommended but not computable here (the reason is in the JSON)
            assert row["test_p"] is None
        else:
            assert row["test_p"] == pytest.approx(test["p"], rel=1e-12)
    if obj["trim_fill"] is not None:
        assert row["trim_fill_k0"] == obj["trim_fill"]["k0"]
        assert row["trim_fill_estimate"] == pytest.approx(
            nat(obj["trim_fill"]["estimate"]), rel=1e-12
        )
    assert row["fingerprint"] == obj["fingerprint_sha256"]


def test_folders_are_searched_and_hidden_files_passed_over(corpus):
    files, problems = find_inputs([corpus])
    assert problems == []
    assert len(files) == N_REVIEWS + 6
    assert not any(p.name.startswith(".") for p in files)
    files2, problems2 = find_inputs([corpus / "nowhere"])
    assert files2 == [] and "no such file" in problems2[0]


def test_one_bad_file_is_an_error_row_never_a_stop(corpus):
    for name in ("no_header.csv", "empty.csv", "junk.xlsx", "cut.lopside", "words.txt"):
        rows = appraise_file(str(corpus / "hostile" / name))
        assert len(rows) == 1, name
        (row,) = rows
        assert row["status"] == "error", name
        assert name in row["message"], (name, row["message"])
        assert "\n" not in row["message"]
        assert "Traceback" not in row["message"]
        assert row["input_sha256"]


@pytest.mark.loopback_only
def test_local_cluster_matches_check_json_and_serial_run(corpus, tmp_path, app_on_path):
    files, _ = find_inputs([corpus])
    out = tmp_path / "results.csv"
    summary = run_batch(files, out, workers=2)
    assert not summary.interrupted
    rows = read_rows(out)
    # one row per input (each input here holds one outcome), in input order
    assert [r["file"] for r in rows] == [str(p) for p in files]
    by_file = {r["file"]: r for r in rows}
    hostile = {str(p) for p in files if p.parent.name == "hostile"}
    for f in hostile - {str(corpus / "hostile" / "formula_title.lopside")}:
        assert by_file[f]["status"] == "error", f
    ok = [r for r in rows if r["status"] == "ok"]
    assert len(ok) == N_REVIEWS + 1
    for r in ok:
        _agrees(r, _check_json(Path(r["file"])))
    # the same run in this process, without Dask, gives the same rows to the last digit
    run_batch(files, tmp_path / "serial.csv", workers=1)
    serial = read_rows(tmp_path / "serial.csv")
    assert len(serial) == len(rows)
    for a, b in zip(serial, rows):
        for c in BATCH_COLUMNS:
            assert a[c] == b[c] or (a[c] is None and b[c] is None), (a["file"], c)
    assert not (tmp_path / "results.csv.parts").exists()


def test_check_command_is_the_reference(corpus, tmp_path):
    """Three files against the real ``lopside check --json`` in a subprocess."""
    files, _ = find_inputs([corpus / "group0"])
    env = dict(os.environ, PYTHONPATH=str(APP))
    for f in files[:3]:
        proc = subprocess.run(
            [sys.executable, "-m", "lopside", "check", str(f), "--json"],
            capture_output=True,
            text=True,
            env=env,
            timeout=120,
        )
        assert proc.returncode == 0, proc.stderr
        (row,) = appraise_file(str(f))
        _agrees(row, json.loads(proc.stdout))


def test_resume_repeats_no_work_and_redoes_changed_files(corpus, tmp_path):
    files, _ = find_inputs([corpus / "group1", corpus / "hostile"])
    out = tmp_path / "r.xlsx"
    first = run_batch(files, out, workers=1)
    n_done = first.count("ok") + first.count("not analysable")
    assert first.analysed == len(files)
    second = run_batch(files, out, workers=1, resume=True)
    # only the failed inputs are tried again
    assert second.skipped == n_done
    assert second.analysed == first.count("error")
    assert len(second.rows) == len(first.rows)
    # a changed file is analysed again, its old row replaced
    changed = tmp_path / "changed.csv"
    changed.write_text((corpus / "group1" / "review_001.csv").read_text(), encoding="utf-8")
    third = run_batch([*files, changed], out, workers=1, resume=True)
    assert third.analysed == first.count("error") + 1
    changed.write_text(_means_table(np.random.default_rng(1), 6), encoding="utf-8")
    fourth = run_batch([*files, changed], out, workers=1, resume=True)
    assert fourth.analysed == first.count("error") + 1
    assert sum(1 for r in fourth.rows if r["file"] == str(changed)) == 1


def test_ctrl_c_keeps_what_is_done_and_resume_finishes(corpus, tmp_path):
    files, _ = find_inputs([corpus / "group2"])
    out = tmp_path / "stopped.csv"

    def stop_after_30(done, total, errors):
        if done == 30:
            raise KeyboardInterrupt

    summary = run_batch(files, out, workers=1, progress=stop_after_30)
    assert summary.interrupted
    kept = read_rows(out)
    assert len(kept) == 30
    rest = run_batch(files, out, workers=1, resume=True)
    assert rest.skipped == 30
    assert rest.analysed == len(files) - 30
    assert [r["file"] for r in rest.rows] == [str(p) for p in files]


def test_formula_text_is_written_as_text(corpus, tmp_path):
    import openpyxl

    f = corpus / "hostile" / "formula_title.lopside"
    out_csv = tmp_path / "f.csv"
    out_xlsx = tmp_path / "f.xlsx"
    run_batch([f], out_csv, workers=1)
    run_batch([f], out_xlsx, workers=1)
    with open(out_csv, encoding="utf-8-sig", newline="") as fh:
        (rec,) = list(csv.DictReader(fh))
    assert rec["outcome"].startswith("'=HYPERLINK")
    ws = openpyxl.load_workbook(out_xlsx).worksheets[0]
    header = [c.value for c in ws[1]]
    cell = ws.cell(row=2, column=header.index("outcome") + 1)
    assert cell.data_type == "s" and cell.value.startswith("'=")
    # numbers stay numbers
    est = ws.cell(row=2, column=header.index("estimate") + 1)
    assert est.data_type == "n"
    # and the text reads back as the user typed it
    assert read_rows(out_csv)[0]["outcome"] == '=HYPERLINK("http://example.invalid","x")'


def test_parquet_output_has_typed_columns(corpus, tmp_path):
    pq = pytest.importorskip("pyarrow.parquet")
    files, _ = find_inputs([corpus / "group3"])
    out = tmp_path / "p.parquet"
    run_batch(files[:10], out, workers=1)
    table = pq.read_table(out)
    assert table.num_rows == 10
    assert str(table.schema.field("estimate").type) == "double"
    assert str(table.schema.field("k").type) == "int64"
    assert [r["file"] for r in read_rows(out)] == [str(p) for p in files[:10]]


def test_output_mistakes_stop_before_any_work(corpus, tmp_path):
    f = corpus / "group0" / "review_000.csv"
    with pytest.raises(BatchError, match="csv, .xlsx or .parquet"):
        run_batch([f], tmp_path / "out.pdf", workers=1)
    with pytest.raises(BatchError, match="also an input"):
        run_batch([f], f, workers=1)
    before = f.read_bytes()
    assert f.read_bytes() == before


@pytest.mark.loopback_only
def test_unreachable_scheduler_is_one_line_before_work(corpus, tmp_path):
    out = tmp_path / "x.csv"
    with pytest.raises(BatchError, match="cannot reach the Dask scheduler"):
        run_batch([corpus / "group0" / "review_000.csv"], out, scheduler="tcp://127.0.0.1:9")
    assert not out.exists()
    assert not (tmp_path / "x.csv.parts").exists()


def test_without_dask_the_message_says_how_and_workers_1_runs(corpus, tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "dask.distributed", None)
    f = corpus / "group0" / "review_000.csv"
    with pytest.raises(BatchError) as info:
        run_batch([f], tmp_path / "a.csv", workers=2)
    assert str(info.value) == INSTALL_HINT
    summary = run_batch([f], tmp_path / "b.csv", workers=1)
    assert summary.count("ok") == 1


def test_sheets_are_written_beside(corpus, tmp_path):
    files, _ = find_inputs([corpus / "group0"])
    sheets = tmp_path / "sheets"
    sheets.mkdir()
    summary = run_batch(
        files[:2], tmp_path / "s.csv", workers=1, options=BatchOptions(sheets_dir=str(sheets))
    )
    pdfs = sorted(sheets.glob("*.pdf"))
    assert len(pdfs) == 2
    assert all(p.read_bytes().startswith(b"%PDF") for p in pdfs)
    assert all(r["message"] is None for r in summary.rows)


def test_cli_batch_exit_status_and_summary_line(corpus, tmp_path):
    env = dict(os.environ, PYTHONPATH=str(APP))
    out = tmp_path / "cli.csv"
    proc = subprocess.run(
        [
            sys.executable,
            "-m",
            "lopside",
            "batch",
            str(corpus / "hostile"),
            "-o",
            str(out),
            "--workers",
            "1",
            "--quiet",
        ],
        capture_output=True,
        text=True,
        env=env,
        timeout=120,
    )
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.strip() == f"wrote {out}: 1 analysed, 0 not analysable, 5 with errors"
    assert proc.stderr == ""
    bad = subprocess.run(
        [sys.executable, "-m", "lopside", "batch", str(tmp_path / "none"), "-o", str(out)],
        capture_output=True,
        text=True,
        env=env,
        timeout=120,
    )
    assert bad.returncode == 2
    assert bad.stderr.count("\n") == 1 and "no such file" in bad.stderr


@pytest.mark.allow_network
def test_loopback_only_guard_still_refuses_other_addresses():
    """The marker the cluster tests use lets sockets reach this machine and nothing else."""
    import socket

    from _no_network import NetworkAccessError, block_network

    attempts: list[str] = []
    undo = block_network(attempts, loopback=True)
    try:
        assert socket.getaddrinfo("localhost", 0)
        with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
            s.bind(("127.0.0.1", 0))
            with pytest.raises(NetworkAccessError):
                s.connect(("192.0.2.1", 80))  # TEST-NET-1: never routed; refused before use
        with pytest.raises(NetworkAccessError):
            socket.getaddrinfo("example.invalid", 80)
    finally:
        undo()
    assert len(attempts) == 2


def _dies_on_poison(file: str, options) -> list:
    """Stands in for appraise_file in a worker: a file named 'poison' kills its process."""
    if "poison" in file:
        os._exit(1)
    return appraise_file(file, options)


@pytest.mark.loopback_only
def test_a_worker_that_dies_is_retried_once_then_reported(corpus, tmp_path, monkeypatch):
    from lopside.batch import _Dask

    # the workers import lopside and this test module
    monkeypatch.setenv("PYTHONPATH", os.pathsep.join([str(APP), str(Path(__file__).parent)]))
    good = str(corpus / "group0" / "review_000.csv")
    poison = tmp_path / "poison.csv"
    poison.write_text("study,estimate,se\nA,1,0.5\n", encoding="utf-8")
    rows: list[dict] = []
    dask = _Dask(2, None, False)
    try:
        dask.run([good, str(poison)], BatchOptions(), rows.extend, fn=_dies_on_poison)
    finally:
        dask.close()
    by_file = {r["file"]: r for r in rows}
    assert by_file[good]["status"] == "ok"
    assert by_file[str(poison)]["status"] == "error"
    assert "stopped twice" in by_file[str(poison)]["message"]
