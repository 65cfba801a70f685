"""The command line's output never depends on the console's code page (issue 22, item 1).

On Windows, output redirected to a file or a pipe is written in the ANSI code page
(cp1252), which has no τ, √, ≥ or −; before the fix ``check --json > out.json`` exited 3
and left a cut-off file. Reproduced here the way ENGINEERING-NOTES.md says: with
``PYTHONIOENCODING=cp1252``, and with a locale whose encoding is ASCII (``LC_ALL=C`` with
Python's UTF-8 mode and locale coercion switched off), each redirected to a file and to a
pipe, in text and JSON, for check, sheet and plot; and on a pseudo-terminal that cannot
show the characters.
"""

from __future__ import annotations

import io
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from lopside import console
from lopside.cli import main

REPO = Path(__file__).resolve().parents[1]
APP = REPO / "app"
SAMPLE = REPO / "sample_reviews" / "delirium_vantoprine.lopside"

#: Environments whose own choice for redirected output cannot carry τ, √, ≥, −.
HOSTILE = {
    "cp1252": {"PYTHONIOENCODING": "cp1252"},
    "ascii-locale": {
        "LC_ALL": "C",
        "LANG": "C",
        "PYTHONUTF8": "0",
        "PYTHONCOERCECLOCALE": "0",
    },
}


def _env(name: str) -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if not k.startswith(("PYTHON", "LC_"))}
    env.update(HOSTILE[name])
    env["PYTHONPATH"] = str(APP)
    env["QT_QPA_PLATFORM"] = "offscreen"
    return env


def _run(args, env_name: str, dest: str, tmp_path: Path) -> tuple[int, bytes, bytes]:
    """Run ``python -m lopside ARGS`` with stdout to a file or a pipe; (status, out, err)."""
    cmd = [sys.executable, "-m", "lopside", *map(str, args)]
    kw = dict(env=_env(env_name), cwd=tmp_path, timeout=300, stderr=subprocess.PIPE)
    if dest == "file":
        out_file = tmp_path / "stdout.txt"
        with open(out_file, "wb") as fh:
            proc = subprocess.run(cmd, stdout=fh, **kw)
        return proc.returncode, out_file.read_bytes(), proc.stderr
    proc = subprocess.run(cmd, stdout=subprocess.PIPE, **kw)
    return proc.returncode, proc.stdout, proc.stderr


def test_the_hostile_environments_really_are_hostile():
    """Without Lopside's choice, these environments would write cp1252 / ASCII."""
    for name, want in (("cp1252", "cp1252"), ("ascii-locale", "ascii")):
        probe = subprocess.run(
            [sys.executable, "-c", "import sys; print(sys.stdout.encoding)"],
            env=_env(name),
            stdout=subprocess.PIPE,
            text=True,
            timeout=60,
        )
        import codecs

        assert codecs.lookup(probe.stdout.strip()).name == codecs.lookup(want).name


@pytest.mark.parametrize("env_name", sorted(HOSTILE))
@pytest.mark.parametrize("dest", ["file", "pipe"])
@pytest.mark.parametrize("fmt", ["text", "json"])
def test_check_output_is_utf8_when_redirected(tmp_path, capsys, env_name, dest, fmt):
    extra = ["--json"] if fmt == "json" else []
    status, out, err = _run(["check", SAMPLE, *extra], env_name, dest, tmp_path)
    assert status == 0, err.decode("utf-8", "replace")
    assert err == b""
    text = out.decode("utf-8")  # strict: every byte is UTF-8
    assert not text.startswith("\ufeff")  # no byte-order mark
    # the same text as an in-process run (pytest captures it as str, no code page)
    assert main(["check", str(SAMPLE), *extra]) == 0
    expected = capsys.readouterr().out
    if fmt == "json":
        assert json.loads(text) == json.loads(expected)
        assert "τ" in text or "−" in text or "²" in text  # the characters that broke it
    else:
        assert text.replace("\r\n", "\n") == expected
        assert "τ²" in text


@pytest.mark.parametrize(
    "command,env_name,dest",
    [
        ("sheet", "cp1252", "file"),
        ("sheet", "ascii-locale", "pipe"),
        ("plot", "cp1252", "pipe"),
        ("plot", "ascii-locale", "file"),
    ],
)
def test_sheet_and_plot_messages_survive_a_hostile_code_page(tmp_path, command, env_name, dest):
    # an output name with characters neither cp1252 nor ASCII has, so the "wrote" line
    # needs them too
    out = tmp_path / ("τ−sheet.pdf" if command == "sheet" else "τ−funnel.png")
    status, stdout, stderr = _run([command, SAMPLE, "-o", out], env_name, dest, tmp_path)
    assert status == 0, stderr.decode("utf-8", "replace")
    assert stdout.decode("utf-8").strip() == f"wrote {out}"
    magic = b"%PDF-" if command == "sheet" else b"\x89PNG"
    assert out.read_bytes().startswith(magic)
    # atomic writes leave no temporary file beside the output
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(
        [out.name] + (["stdout.txt"] if dest == "file" else [])
    )


def test_an_error_message_naming_a_non_ascii_file_is_utf8_on_a_pipe(tmp_path):
    missing = tmp_path / "τ review ≥ 2.csv"
    status, out, err = _run(["check", missing], "cp1252", "pipe", tmp_path)
    assert status == 2 and out == b""
    msg = err.decode("utf-8")
    assert str(missing) in msg and "no such file" in msg and "Traceback" not in msg


@pytest.mark.skipif(not hasattr(os, "openpty"), reason="needs a pseudo-terminal (POSIX)")
def test_a_console_that_cannot_show_the_characters_gets_ascii_spellings():
    import pty

    master, slave = pty.openpty()
    proc = subprocess.Popen(
        [sys.executable, "-m", "lopside", "check", str(SAMPLE)],
        stdout=slave,
        stderr=slave,
        env=_env("ascii-locale"),
    )
    os.close(slave)
    chunks = []
    while True:
        try:
            chunk = os.read(master, 65536)
        except OSError:  # EIO: the child closed the terminal
            break
        if not chunk:
            break
        chunks.append(chunk)
    os.close(master)
    assert proc.wait(timeout=300) == 0, b"".join(chunks)[-2000:]
    out = b"".join(chunks)
    assert out.isascii(), [b for b in out if b > 127][:5]
    text = out.decode("ascii")
    assert "tau2" in text and "Model" in text and "Traceback" not in text


# --- the choice itself, in-process ------------------------------------------------------


def test_ascii_spellings_of_the_characters_lopside_prints():
    assert console.to_ascii("τ² ≥ 0.1, √n, −0.5 ≤ x, 1–3") == "tau2 >= 0.1, sqrtn, -0.5 <= x, 1-3"
    assert console.to_ascii("Müller") == "Muller"  # decomposed letters keep the name readable
    assert console.to_ascii("試") == "?"
    # a cp1252 console keeps what it can show and spells the rest
    assert "τ² ≥ −1".encode("cp1252", console.ERRORS).decode("cp1252") == "tau² >= -1"


def test_ascii_spellings_keep_table_columns_in_line():
    # a longer spelling takes its extra width from the padding after it (keeping one
    # space), so the columns of the text tables stay where they were; prose keeps its
    # single spaces
    rows = [
        "Random effects, REML τ²   0.16   0.11",
        "Fixed effect              0.18   0.12",
        "I²                        22 %",
    ]
    for enc in ("ascii", "cp1252"):
        out = [r.encode(enc, console.ERRORS).decode(enc) for r in rows]
        assert [len(o) for o in out] == [len(r) for r in rows], out
        assert out[0].index("0.16") == rows[0].index("0.16")
        assert out[0].startswith("Random effects, REML tau")
    prose = "τ² = 0.01 and √n ≥ 2"
    assert prose.encode("ascii", console.ERRORS).decode() == "tau2 = 0.01 and sqrtn >= 2"


class _FakeConsole(io.TextIOWrapper):
    def isatty(self):
        return True


def test_use_safe_output_picks_utf8_for_redirected_and_ascii_for_a_poor_console(monkeypatch):
    redirected = io.TextIOWrapper(io.BytesIO(), encoding="cp1252")
    poor_console = _FakeConsole(io.BytesIO(), encoding="ascii")
    monkeypatch.setattr(sys, "stdout", redirected)
    monkeypatch.setattr(sys, "stderr", poor_console)
    console.use_safe_output()
    print("τ² √ ≥ −")
    print("τ² √ ≥ −", file=sys.stderr)
    sys.stdout.flush()
    sys.stderr.flush()
    assert redirected.buffer.getvalue() == "τ² √ ≥ −\n".encode()
    # a POSIX file name's undecodable byte goes out as that byte; a stray surrogate escaped
    sys.stdout.write("a\udcceb\ud800\n")
    sys.stdout.flush()
    assert redirected.buffer.getvalue().endswith(b"a\xceb\\ud800\n")
    assert poor_console.buffer.getvalue() == b"tau2 sqrt >= -\n"


def test_missing_or_plain_streams_are_left_alone(monkeypatch):
    buf = io.StringIO()
    monkeypatch.setattr(sys, "stdout", None)
    monkeypatch.setattr(sys, "stderr", buf)
    console.use_safe_output()  # must not raise
    assert sys.stdout is None and sys.stderr is buf


def test_only_the_console_module_chooses_an_output_encoding():
    """Chosen once, in one place: no other module re-configures the standard streams."""
    offenders = []
    for path in (APP / "lopside").rglob("*.py"):
        if path.name == "console.py":
            continue
        text = path.read_text(encoding="utf-8")
        if ".reconfigure(" in text or "PYTHONIOENCODING" in text:
            offenders.append(str(path.relative_to(APP)))
    assert offenders == []
