"""Many reviews at once: one pure function per input file, mapped onto Dask.

Design invariants
-----------------
* :func:`appraise_file` is the unit of work: it reads one file, analyses every outcome
  with the same engine as ``lopside check`` and returns one flat row per outcome. It never
  raises: a file that cannot be read or analysed becomes one ``error`` row with a one-line
  message, so one bad file never stops a batch.
* Parallel work is Dask's (a ``LocalCluster`` of processes on the loopback interface, or an
  existing ``dask.distributed`` scheduler by address); Lopside adds no scheduler of its own.
  ``--workers 1`` runs the same function in this process, without Dask.
* Rows are written as they arrive, a part file per chunk beside the output
  (``OUT.parts/``); the output itself is written (atomically) from the parts at the end, also
  after Ctrl+C. A crash loses at most the chunk in flight; ``--resume`` skips inputs whose
  content hash is already recorded with status ``ok`` or ``not analysable``.
* Text cells a spreadsheet could run as a formula are written as plain text.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import math
import os
import sys
import time
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .outcome_row import INTEGER_COLUMNS, OUTCOME_COLUMNS, TEXT_COLUMNS

#: Columns of a batch result, in order.
BATCH_COLUMNS: tuple[str, ...] = (
    "file",
    "status",
    "message",
    *OUTCOME_COLUMNS,
    "input_sha256",
)
BATCH_TEXT_COLUMNS = TEXT_COLUMNS | {"file", "status", "message", "input_sha256"}
STATUSES = ("ok", "not analysable", "error")
#: Output formats by suffix.
OUTPUT_SUFFIXES = (".csv", ".xlsx", ".parquet")
#: Input files a folder is searched for (a PDF is read from its page with most study rows).
INPUT_SUFFIXES = (".lopside", ".csv", ".xlsx", ".txt", ".pdf")
#: Rows per part file: a crash loses at most this many finished rows.
CHUNK_ROWS = 25

INSTALL_HINT = (
    "parallel batches need Dask: pip install 'lopside[batch]' "
    "(or run one file at a time in this process with --workers 1)"
)


class BatchError(Exception):
    """A batch cannot start (bad output path, unreachable scheduler, Dask missing)."""


@dataclass(frozen=True, slots=True)
class BatchOptions:
    """What every file of a batch is analysed with (the same options as ``check``)."""

    measure: str | None = None
    favours: str | None = None
    tau2_method: str | None = None
    ci_method: str | None = None
    hksj: bool = False
    sheets_dir: str | None = None


@dataclass(slots=True)
class BatchSummary:
    """What a run did; ``rows`` are all rows in the output (old ones too, with --resume)."""

    output: Path
    inputs: int = 0
    analysed: int = 0
    skipped: int = 0
    interrupted: bool = False
    rows: list[dict[str, Any]] = field(default_factory=list)

    def count(self, status: str) -> int:
        return sum(1 for r in self.rows if r.get("status") == status)


# ------------------------------------------------------------------------------------
# finding inputs


def find_inputs(
    paths: Iterable[str | os.PathLike[str]], output: str | os.PathLike[str] | None = None
) -> tuple[list[Path], list[str]]:
    """Files to analyse (folders searched recursively, in name order) and problems.

    A path that does not exist is a problem (the run stops before any work); a named file
    with another suffix is kept, so that it gets an error row saying why it was not read.
    A folder search passes over hidden files, the results file ``output`` and its parts.
    """
    files: list[Path] = []
    problems: list[str] = []
    seen: set[str] = set()
    skip: set[str] = set()
    if output is not None:
        out = Path(output)
        skip = {
            os.path.normcase(os.path.abspath(out)),
            os.path.normcase(os.path.abspath(out.with_name(out.name + ".parts"))),
        }

    def skipped(q: Path) -> bool:
        return any(os.path.normcase(os.path.abspath(a)) in skip for a in (q, *q.parents))

    def add(p: Path) -> None:
        key = os.path.normcase(os.path.abspath(p))
        if key not in seen:
            seen.add(key)
            files.append(p)

    for raw in paths:
        p = Path(raw)
        if p.is_dir():
            found = sorted(
                (
                    q
                    for q in p.rglob("*")
                    if q.is_file()
                    and q.suffix.lower() in INPUT_SUFFIXES
                    and not any(part.startswith(".") for part in q.relative_to(p).parts)
                    and not skipped(q)
                ),
                key=lambda q: q.as_posix().lower(),
            )
            for q in found:
                add(q)
        elif p.exists():
            add(p)
        else:
            problems.append(f"{p}: no such file or folder.")
    return files, problems


def file_sha256(path: Path) -> str | None:
    h = hashlib.sha256()
    try:
        with open(path, "rb") as fh:
            for block in iter(lambda: fh.read(1 << 20), b""):
                h.update(block)
    except OSError:
        return None
    return h.hexdigest()


# ------------------------------------------------------------------------------------
# the unit of work


def _one_line(text: str) -> str:
    return " ".join(str(text).split())


def _error_row(file: str, message: str, sha: str | None, status: str = "error") -> dict:
    row: dict[str, Any] = dict.fromkeys(BATCH_COLUMNS)
    row.update(file=file, status=status, message=_one_line(message), input_sha256=sha)
    return row


def _sheet_name(file: str, outcome: str = "") -> str:
    """The sheet's file name: the input's path, and the outcome's name when it has several."""
    stem = Path(file).with_suffix("").as_posix().strip("/")
    if outcome:
        stem = f"{stem}--{outcome}"
    safe = "".join(c if c.isalnum() or c in "-_." else "_" for c in f"{stem}")
    return f"{safe.strip('._') or 'review'}.pdf"


def appraise_file(file: str, options: BatchOptions = BatchOptions()) -> list[dict[str, Any]]:
    """Rows for one input file: one per outcome, or one ``error`` row. Never raises.

    The analysis is exactly ``lopside check``'s: the same loader, settings and engine.
    """
    from .cli_common import INPUT_ERRORS, load_outcomes

    path = Path(file)
    sha = file_sha256(path)
    try:
        if sha is None:
            raise OSError("cannot be read")
        outcomes = load_outcomes(path, options.measure, favours=options.favours)
    except INPUT_ERRORS as exc:
        return [_error_row(file, str(exc), sha)]
    except (OSError, ValueError, MemoryError) as exc:
        return [_error_row(file, f"{path.name}: cannot be read ({exc}).", sha)]
    except Exception as exc:  # noqa: BLE001 - one bad file never stops a batch
        return [_error_row(file, f"{path.name}: cannot be read ({type(exc).__name__}).", sha)]

    several = len(outcomes) > 1
    return [
        _analyse_outcome(file, name, review, _settings(saved, options), sha, options, several)
        for name, review, saved in outcomes
    ]


def _settings(saved: dict[str, Any], options: BatchOptions):
    """The outcome's saved settings with the batch's own options over them."""
    from dataclasses import replace

    from .settings import AnalysisSettings

    settings = AnalysisSettings.from_dict(saved)
    changes: dict[str, Any] = {}
    if options.tau2_method:
        changes["tau2_method"] = options.tau2_method
    if options.ci_method:
        changes["ci_method"] = options.ci_method
    if options.hksj:
        changes["hksj"] = True
    return replace(settings, **changes) if changes else settings


def _analyse_outcome(file, outcome, review, settings, sha, options, several) -> dict[str, Any]:
    from .assessment import assess
    from .outcome_row import outcome_row

    try:
        # one assessment: the row and the sheet read the same numbers and reading
        assessment = assess(review, settings)
        result, appraisal = assessment.analysis, assessment.appraisal
        row = dict.fromkeys(BATCH_COLUMNS)
        row.update(outcome_row(result, appraisal, outcome))
    except Exception as exc:  # noqa: BLE001 - an analysis failure is a row, not a stop
        row = _error_row(file, f"analysis failed ({type(exc).__name__}: {exc})", sha)
        row["outcome"] = outcome
        return row
    row.update(file=file, input_sha256=sha)
    if result.k == 0:
        row["status"] = "not analysable"
        reasons = [getattr(p, "message", str(p)) for p in result.problems][:3]
        row["message"] = _one_line(
            "no study could be analysed" + (": " + "; ".join(reasons) if reasons else "")
        )
    else:
        row["status"] = "ok"
        row["message"] = None
    if options.sheets_dir and result.k > 0:
        from .sheet import write_sheet

        target = Path(options.sheets_dir) / _sheet_name(file, outcome if several else "")
        try:
            if os.path.abspath(target) == os.path.abspath(file):
                raise OSError("the sheet would replace its own input")
            write_sheet(assessment, target)
        except OSError as exc:
            row["message"] = _one_line(
                f"sheet not written: {target} ({getattr(exc, 'strerror', None) or exc})"
            )
    return row


# ------------------------------------------------------------------------------------
# writing rows


def _cell_text(value: Any) -> str:
    from .intake.table import spreadsheet_safe

    return spreadsheet_safe(str(value))


def _csv_value(name: str, value: Any) -> str:
    if value is None:
        return ""
    if name in BATCH_TEXT_COLUMNS:
        return _cell_text(value)
    if isinstance(value, float):
        return repr(value)
    return str(value)


def _typed(name: str, text: str) -> Any:
    """A CSV or part-file cell back to its value (the inverse of :func:`_csv_value`)."""
    if text == "" or text is None:
        return None
    if name in BATCH_TEXT_COLUMNS:
        from .intake.table import unquote_formula

        return unquote_formula(text)
    try:
        return int(text) if name in INTEGER_COLUMNS else float(text)
    except ValueError:
        return None


def _atomic_write(path: Path, write: Callable[[Path], None]) -> None:
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    try:
        write(tmp)
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()


def write_rows(rows: Sequence[dict[str, Any]], path: Path) -> None:
    """Write the batch rows to CSV, XLSX or Parquet (by suffix), atomically."""
    suffix = path.suffix.lower()
    if suffix == ".csv":

        def write(tmp: Path) -> None:
            buf = io.StringIO(newline="")
            w = csv.writer(buf, lineterminator="\r\n")
            w.writerow(BATCH_COLUMNS)
            for r in rows:
                w.writerow([_csv_value(c, r.get(c)) for c in BATCH_COLUMNS])
            tmp.write_text(buf.getvalue(), encoding="utf-8-sig", newline="")

    elif suffix == ".xlsx":

        def write(tmp: Path) -> None:
            import openpyxl

            wb = openpyxl.Workbook(write_only=True)
            ws = wb.create_sheet("results")
            ws.append(list(BATCH_COLUMNS))
            for r in rows:
                out = []
                for c in BATCH_COLUMNS:
                    v = r.get(c)
                    out.append(_cell_text(v) if v is not None and c in BATCH_TEXT_COLUMNS else v)
                ws.append(out)
            wb.save(tmp)

    elif suffix == ".parquet":

        def write(tmp: Path) -> None:
            pa, pq = _pyarrow()
            cols = {}
            for c in BATCH_COLUMNS:
                values = [r.get(c) for r in rows]
                if c in BATCH_TEXT_COLUMNS:
                    cols[c] = pa.array(values, type=pa.string())
                elif c in INTEGER_COLUMNS:
                    cols[c] = pa.array(values, type=pa.int64())
                else:
                    cols[c] = pa.array(values, type=pa.float64())
            pq.write_table(pa.table(cols), tmp)

    else:
        raise BatchError(f"{path}: write results to .csv, .xlsx or .parquet.")
    _atomic_write(path, write)


def _pyarrow():
    try:
        import pyarrow as pa
        import pyarrow.parquet as pq
    except ImportError as exc:
        raise BatchError(
            "Parquet output needs pyarrow: pip install 'lopside[batch]', "
            "or write .csv or .xlsx instead."
        ) from exc
    return pa, pq


def read_rows(path: Path) -> list[dict[str, Any]]:
    """Rows of an earlier batch output (for --resume); [] when there is none."""
    if not path.exists():
        return []
    suffix = path.suffix.lower()
    try:
        if suffix == ".csv":
            text = path.read_text(encoding="utf-8-sig")
            reader = csv.DictReader(io.StringIO(text, newline=""))
            return [{c: _typed(c, r.get(c, "")) for c in BATCH_COLUMNS} for r in reader]
        if suffix == ".xlsx":
            import openpyxl

            wb = openpyxl.load_workbook(path, read_only=True, data_only=True)
            try:
                ws = wb.worksheets[0]
                it = ws.iter_rows(values_only=True)
                header = [str(h) for h in next(it, ())]
                out = []
                for values in it:
                    rec = dict(zip(header, values))
                    out.append(
                        {
                            c: _typed(c, rec.get(c)) if isinstance(rec.get(c), str) else rec.get(c)
                            for c in BATCH_COLUMNS
                        }
                    )
                return out
            finally:
                wb.close()
        if suffix == ".parquet":
            _, pq = _pyarrow()
            table = pq.read_table(path)
            return [{c: rec.get(c) for c in BATCH_COLUMNS} for rec in table.to_pylist()]
    except BatchError:
        raise
    except Exception as exc:  # noqa: BLE001 - a damaged earlier output is a plain message
        raise BatchError(
            f"{path}: the earlier results cannot be read for --resume ({exc}); "
            "move the file away or write to a new name."
        ) from exc
    raise BatchError(f"{path}: write results to .csv, .xlsx or .parquet.")


class PartWriter:
    """Finished rows go to numbered JSON-lines part files beside the output."""

    def __init__(self, output: Path) -> None:
        self.folder = output.with_name(output.name + ".parts")
        self.folder.mkdir(exist_ok=True)
        existing = sorted(self.folder.glob("part-*.jsonl"))
        self.next_index = len(existing) + 1
        self.pending: list[dict[str, Any]] = []

    def add(self, rows: Iterable[dict[str, Any]]) -> None:
        self.pending.extend(rows)
        if len(self.pending) >= CHUNK_ROWS:
            self.flush()

    def flush(self) -> None:
        if not self.pending:
            return
        target = self.folder / f"part-{self.next_index:06d}.jsonl"
        body = "".join(
            json.dumps(r, ensure_ascii=False, allow_nan=False) + "\n" for r in self.pending
        )
        _atomic_write(target, lambda tmp: tmp.write_text(body, encoding="utf-8"))
        self.next_index += 1
        self.pending = []

    def rows(self) -> list[dict[str, Any]]:
        out: list[dict[str, Any]] = []
        for part in sorted(self.folder.glob("part-*.jsonl")):
            for line in part.read_text(encoding="utf-8").splitlines():
                if line.strip():
                    rec = json.loads(line)
                    out.append({c: rec.get(c) for c in BATCH_COLUMNS})
        return out

    def remove(self) -> None:
        for part in self.folder.glob("part-*.jsonl"):
            part.unlink()
        try:
            self.folder.rmdir()
        except OSError:
            pass


def _clean(row: dict[str, Any]) -> dict[str, Any]:
    """Non-finite floats become None (JSON and Parquet carry no NaN)."""
    return {
        k: (None if isinstance(v, float) and not math.isfinite(v) else v) for k, v in row.items()
    }


# ------------------------------------------------------------------------------------
# running


ProgressFn = Callable[[int, int, int], None]


def check_output(output: Path, inputs: Sequence[Path]) -> None:
    if output.suffix.lower() not in OUTPUT_SUFFIXES:
        raise BatchError(
            f"{output}: write results to .csv, .xlsx or .parquet "
            f"(the suffix says which); '{output.suffix or 'none'}' is none of them."
        )
    if output.is_dir():
        raise BatchError(f"{output}: is a folder; give a file name for the results.")
    out_key = os.path.normcase(os.path.realpath(output))
    for p in inputs:
        if os.path.normcase(os.path.realpath(p)) == out_key:
            raise BatchError(f"{output}: is also an input; write the results to another file.")
    if output.suffix.lower() == ".parquet":
        _pyarrow()


def run_batch(
    inputs: Sequence[Path],
    output: Path,
    *,
    options: BatchOptions = BatchOptions(),
    workers: int | None = None,
    scheduler: str | None = None,
    dashboard: bool = False,
    resume: bool = False,
    progress: ProgressFn | None = None,
) -> BatchSummary:
    """Analyse every input and write one row per outcome to ``output``.

    Parameters
    ----------
    inputs : sequence of Path
        Files (from :func:`find_inputs`).
    output : Path
        ``.csv``, ``.xlsx`` or ``.parquet``; written atomically at the end (and after
        Ctrl+C), with finished rows kept in ``OUTPUT.parts/`` meanwhile.
    workers : int, optional
        Processes of the local Dask cluster (default: one per core). 1 runs in this
        process without Dask.
    scheduler : str, optional
        Address of an existing ``dask.distributed`` scheduler (``tcp://host:port``).
    resume : bool
        Skip inputs whose content hash is already in the output (or its parts) with status
        ``ok`` or ``not analysable``; ``error`` rows are tried again.
    progress : callable(done, total, errors), optional
    """
    output = Path(output)
    check_output(output, inputs)
    summary = BatchSummary(output=output, inputs=len(inputs))
    earlier: list[dict[str, Any]] = read_rows(output) if resume else []
    # connect before anything is written: an unreachable scheduler leaves no trace
    dask = None if (workers == 1 and scheduler is None) else _Dask(workers, scheduler, dashboard)
    try:
        return _run(inputs, output, summary, earlier, options, dask, resume, progress)
    finally:
        if dask is not None:
            dask.close()


def _run(inputs, output, summary, earlier, options, dask, resume, progress) -> BatchSummary:
    parts = PartWriter(output)
    if resume:
        earlier = earlier + parts.rows()
    else:
        parts.remove()
        parts = PartWriter(output)
    done_keys = {
        (r.get("file"), r.get("input_sha256"))
        for r in earlier
        if r.get("status") in ("ok", "not analysable") and r.get("input_sha256")
    }
    todo: list[str] = []
    kept_earlier: list[dict[str, Any]] = []
    todo_files = set()
    for p in inputs:
        key = (str(p), file_sha256(p))
        if key in done_keys:
            summary.skipped += 1
        else:
            todo.append(str(p))
            todo_files.add(str(p))
    # earlier rows are kept unless their file is analysed again now
    seen_keys = set()
    for r in earlier:
        key = (r.get("file"), r.get("input_sha256"), r.get("outcome"))
        if r.get("file") in todo_files or key in seen_keys:
            continue
        seen_keys.add(key)
        kept_earlier.append(r)

    errors = 0
    done = 0

    def arrived(rows: list[dict[str, Any]]) -> None:
        nonlocal errors, done
        rows = [_clean(r) for r in rows]
        parts.add(rows)
        new_rows.extend(rows)
        errors += sum(1 for r in rows if r.get("status") == "error")
        done += 1
        if progress is not None:
            progress(done, len(todo), errors)

    new_rows: list[dict[str, Any]] = []
    try:
        if dask is None:
            for f in todo:
                arrived(appraise_file(f, options))
        elif todo:
            dask.run(todo, options, arrived)
    except KeyboardInterrupt:
        summary.interrupted = True
    finally:
        parts.flush()
    summary.analysed = done
    order = {str(p): i for i, p in enumerate(inputs)}
    all_rows = kept_earlier + parts.rows() if resume else parts.rows()
    # rows from this run replace earlier rows of the same file
    latest: dict[tuple, dict[str, Any]] = {}
    for r in all_rows:
        latest[(r.get("file"), r.get("outcome"), r.get("status") == "error")] = r
    rows = list(latest.values())
    finished_files = {r.get("file") for r in rows if r.get("status") != "error"}
    rows = [r for r in rows if not (r.get("status") == "error" and r.get("file") in finished_files)]
    rows.sort(key=lambda r: (order.get(r.get("file"), len(order)), str(r.get("file"))))
    write_rows(rows, output)
    if not summary.interrupted:
        parts.remove()
    summary.rows = rows
    return summary


class _Dask:
    """A Dask client on a local cluster of processes, or on an existing scheduler."""

    def __init__(self, workers: int | None, scheduler: str | None, dashboard: bool) -> None:
        try:
            from dask.distributed import Client, LocalCluster
        except ImportError as exc:
            raise BatchError(INSTALL_HINT) from exc
        import logging

        logging.getLogger("distributed").setLevel(logging.ERROR)
        self.cluster = None
        if scheduler:
            try:
                self.client = Client(scheduler, timeout="10s")
            except Exception as exc:  # noqa: BLE001 - any connection failure is one line
                raise BatchError(
                    f"cannot reach the Dask scheduler at {scheduler} ({type(exc).__name__}); "
                    "check the address, or leave out --scheduler to run on this computer."
                ) from exc
        else:
            import dask

            # a task whose worker dies is not re-run by the scheduler on its own (it could
            # kill every worker in turn); Dask's retry runs it once more, then it is an
            # error row
            dask.config.set({"distributed.scheduler.allowed-failures": 0})
            self.cluster = LocalCluster(
                n_workers=workers or os.cpu_count() or 1,
                threads_per_worker=1,
                processes=True,
                host="127.0.0.1",
                dashboard_address="127.0.0.1:8787" if dashboard else None,
                silence_logs=logging.ERROR,
            )
            self.client = Client(self.cluster)

    def run(self, todo: Sequence[str], options: BatchOptions, arrived, fn=None) -> None:
        """Submit ``fn(file, options)`` (default :func:`appraise_file`) per file."""
        from dask.distributed import as_completed

        fn = fn or appraise_file
        futures = {self.client.submit(fn, f, options, retries=1, pure=False): f for f in todo}
        try:
            for fut in as_completed(futures):
                f = futures[fut]
                try:
                    rows = fut.result()
                except Exception as exc:  # noqa: BLE001 - a dead worker is an error row
                    rows = [
                        _error_row(
                            f,
                            f"the worker analysing this file stopped twice ({type(exc).__name__})",
                            file_sha256(Path(f)),
                        )
                    ]
                arrived(rows)
        except KeyboardInterrupt:
            self.client.cancel(list(futures))
            raise

    def close(self) -> None:
        self.client.close()
        if self.cluster is not None:
            self.cluster.close()


def console_progress(stream=None) -> ProgressFn:
    """A counter line: redrawn in place on a terminal, a line every few seconds otherwise."""
    stream = stream or sys.stderr
    tty = hasattr(stream, "isatty") and stream.isatty()
    last = [0.0]

    def show(done: int, total: int, errors: int) -> None:
        now = time.monotonic()
        text = f"{done}/{total} files analysed" + (f", {errors} with errors" if errors else "")
        if tty:
            width = 24
            filled = int(width * done / total) if total else width
            stream.write(f"\r[{'#' * filled}{'.' * (width - filled)}] {text}")
            if done == total:
                stream.write("\n")
        elif done == total or now - last[0] >= 2.0:
            stream.write(text + "\n")
            last[0] = now
        stream.flush()

    return show
