"""Can the bundle be built and run on Windows? What can be checked without a Windows PC.

    python packaging/windows_readiness.py            # scan app/ (offline)
    python packaging/windows_readiness.py --download # also fetch every pin for Windows

1. :func:`scan` reads every module of ``app/lopside`` and reports code that breaks or
   misbehaves on Windows: ``os.fork`` and other POSIX-only calls or modules, POSIX-only
   signals, hard-coded POSIX paths (``/tmp``, ``/dev/null``, ``/home``), file names
   compared by suffix without folding case, text files opened without an explicit
   encoding (Windows would use the ANSI code page), and output printed from the window's
   modules (the windowed ``Lopside.exe`` has no console). A line may carry
   ``# windows-ok: <reason>`` to accept a finding with its reason. Run by
   tests/test_windows_readiness.py.
2. :func:`download_check` asks the package index, with ``pip download --only-binary=:all:
   --platform win_amd64 --python-version <the bundle's Python>``, for a Windows wheel of
   every pin in ``packaging/requirements-bundle.txt`` (the Windows-only ones included,
   their markers set aside), one ``--no-deps`` request per pin into a temporary folder
   (the pins are the whole set). Needs the index; run by ``.ci/run``.

Exit status 0 when nothing was found, 1 otherwise (each finding on its own line).
"""

from __future__ import annotations

import argparse
import ast
import re
import subprocess
import sys
import tempfile
from dataclasses import dataclass
from pathlib import Path

HERE = Path(__file__).resolve().parent
REPO = HERE.parent
APP = REPO / "app" / "lopside"
REQUIREMENTS = HERE / "requirements-bundle.txt"

#: Modules that do not exist on Windows.
POSIX_MODULES = {"fcntl", "termios", "tty", "pty", "pwd", "grp", "resource", "posix", "crypt"}
#: os functions missing on Windows (or meaningless there).
POSIX_OS_CALLS = {
    "fork",
    "forkpty",
    "setsid",
    "setpgid",
    "getpgid",
    "killpg",
    "getuid",
    "geteuid",
    "getgid",
    "getegid",
    "chown",
    "lchown",
    "mkfifo",
    "mknod",
    "nice",
    "sync",
    "wait3",
    "wait4",
    "uname",
}
#: Signals Windows does not have (it has SIGINT, SIGTERM, SIGABRT, SIGBREAK...).
POSIX_SIGNALS = {
    "SIGHUP",
    "SIGKILL",
    "SIGUSR1",
    "SIGUSR2",
    "SIGALRM",
    "SIGCHLD",
    "SIGPIPE",
    "SIGQUIT",
    "SIGSTOP",
    "SIGCONT",
    "SIGTSTP",
    "SIGWINCH",
}
POSIX_SIGNAL_CALLS = {"alarm", "setitimer", "pause", "sigwait", "pthread_kill"}
POSIX_PATH = re.compile(r"^(/tmp|/var/tmp|/dev/null|/home/|/usr/|/etc/|~/\.)")
#: Modules of the window: the windowed exe has no console to print to. The self-test is
#: meant for the console twin (lopside-cli.exe --self-test); from Lopside.exe its lines
#: go to the log file (lopside.frozen).
WINDOW_DIR = "window"
PRINT_ALLOWED = {"window/selftest.py"}
WAIVER = re.compile(r"#\s*windows-ok:\s*\S")


@dataclass(frozen=True)
class Finding:
    path: str
    line: int
    rule: str
    message: str

    def __str__(self) -> str:
        return f"{self.path}:{self.line}: [{self.rule}] {self.message}"


def _call_name(node: ast.Call) -> tuple[str | None, str | None]:
    """(object, attribute) of ``obj.attr(...)``, or (None, name) of ``name(...)``."""
    f = node.func
    if isinstance(f, ast.Attribute):
        base = f.value
        obj = base.id if isinstance(base, ast.Name) else None
        return obj, f.attr
    if isinstance(f, ast.Name):
        return None, f.id
    return None, None


def _mode_is_binary(node: ast.Call, mode_pos: int) -> bool:
    mode = None
    if len(node.args) > mode_pos:
        mode = node.args[mode_pos]
    for kw in node.keywords:
        if kw.arg == "mode":
            mode = kw.value
    if mode is None:
        return False
    if isinstance(mode, ast.Constant) and isinstance(mode.value, str):
        return "b" in mode.value
    return True  # a computed mode: cannot tell, do not guess


def _has_kw(node: ast.Call, name: str) -> bool:
    return any(kw.arg == name for kw in node.keywords)


def _suffix_unfolded(node: ast.Compare) -> bool:
    """``x.suffix == '.csv'`` or ``x.suffix in (...)`` without ``.lower()``."""
    left = node.left
    if not (isinstance(left, ast.Attribute) and left.attr == "suffix"):
        return False
    for comp in node.comparators:
        values = comp.elts if isinstance(comp, (ast.Tuple, ast.List, ast.Set)) else [comp]
        for v in values:
            if isinstance(v, ast.Constant) and isinstance(v.value, str) and v.value:
                return True
    return False


def scan_source(text: str, rel: str) -> list[Finding]:
    """The findings in one module's source (``rel``: its path below app/lopside)."""
    tree = ast.parse(text, filename=rel)
    lines = text.splitlines()
    found: list[Finding] = []

    def add(node: ast.AST, rule: str, message: str) -> None:
        ln = getattr(node, "lineno", 0)
        end = getattr(node, "end_lineno", ln) or ln
        if any(WAIVER.search(lines[i - 1]) for i in range(ln, end + 1) if 0 < i <= len(lines)):
            return
        found.append(Finding(rel, ln, rule, message))

    in_window = rel.startswith(WINDOW_DIR + "/")
    for node in ast.walk(tree):
        if isinstance(node, (ast.Import, ast.ImportFrom)):
            names = [a.name for a in node.names] if isinstance(node, ast.Import) else [node.module]
            for n in names:
                if n and n.split(".")[0] in POSIX_MODULES:
                    add(node, "posix-module", f"imports {n}, which Windows does not have")
        elif isinstance(node, ast.Call):
            obj, attr = _call_name(node)
            if obj == "os" and attr in POSIX_OS_CALLS:
                add(node, "posix-call", f"os.{attr}() does not exist on Windows")
            elif obj == "signal" and attr in POSIX_SIGNAL_CALLS:
                add(node, "posix-signal", f"signal.{attr}() does not exist on Windows")
            elif attr == "open" and obj in (None, "io", "codecs") or attr == "fdopen":
                pos = 1
                if not _mode_is_binary(node, pos) and not _has_kw(node, "encoding"):
                    add(node, "encoding", "text file opened without encoding= (cp1252 on Windows)")
            elif attr in ("read_text", "write_text") and isinstance(node.func, ast.Attribute):
                # Path.read_text(encoding, ...) / Path.write_text(data, encoding, ...)
                positional_encoding = len(node.args) >= (1 if attr == "read_text" else 2)
                if not _has_kw(node, "encoding") and not positional_encoding:
                    add(node, "encoding", f".{attr}() without encoding= (cp1252 on Windows)")
            elif in_window and rel not in PRINT_ALLOWED and attr == "print" and obj is None:
                add(node, "console-output", "print() in the window: Lopside.exe has no console")
            elif (
                in_window
                and rel not in PRINT_ALLOWED
                and attr == "write"
                and (
                    isinstance(node.func, ast.Attribute)
                    and isinstance(node.func.value, ast.Attribute)
                    and node.func.value.attr in ("stdout", "stderr")
                )
            ):
                add(node, "console-output", "writes to stdout/stderr in the window (no console)")
        elif isinstance(node, ast.Attribute):
            if (
                isinstance(node.value, ast.Name)
                and node.value.id == "signal"
                and node.attr in POSIX_SIGNALS
            ):
                add(node, "posix-signal", f"signal.{node.attr} does not exist on Windows")
        elif isinstance(node, ast.Constant) and isinstance(node.value, str):
            if POSIX_PATH.match(node.value):
                add(node, "posix-path", f"hard-coded POSIX path {node.value!r}")
        elif isinstance(node, ast.Compare) and _suffix_unfolded(node):
            add(node, "path-case", "file suffix compared without .lower() (Windows: REVIEW.CSV)")
    # docstrings are string constants too: ignore findings inside them
    doc_lines = _docstring_lines(tree)
    return sorted(
        (f for f in found if not (f.rule == "posix-path" and f.line in doc_lines)),
        key=lambda f: (f.path, f.line, f.rule),
    )


def _docstring_lines(tree: ast.AST) -> set[int]:
    out: set[int] = set()
    for node in ast.walk(tree):
        if isinstance(node, (ast.Module, ast.ClassDef, ast.FunctionDef, ast.AsyncFunctionDef)):
            body = getattr(node, "body", [])
            if body and isinstance(body[0], ast.Expr) and isinstance(body[0].value, ast.Constant):
                d = body[0]
                out.update(range(d.lineno, (d.end_lineno or d.lineno) + 1))
    return out


def scan(app: Path = APP) -> list[Finding]:
    """Findings in every module of the app."""
    found: list[Finding] = []
    for path in sorted(app.rglob("*.py")):
        rel = path.relative_to(app).as_posix()
        found += scan_source(path.read_text(encoding="utf-8"), rel)
    return found


# --- pins -------------------------------------------------------------------------------


@dataclass(frozen=True)
class Pin:
    name: str
    version: str
    marker: str  # "" for every platform

    def for_windows(self) -> bool:
        m = self.marker.replace(" ", "").replace('"', "'")
        return not m or "sys_platform=='win32'" in m or "platform_system=='Windows'" in m


def read_pins(path: Path = REQUIREMENTS) -> tuple[list[Pin], str]:
    """(pins, the bundle's Python 'major.minor') from the requirements file. The Python
    version is the file's ``# bundle-python: X.Y`` line."""
    pins: list[Pin] = []
    python = ""
    for raw in path.read_text(encoding="utf-8").splitlines():
        m = re.match(r"#\s*bundle-python:\s*(\d+\.\d+)", raw.strip())
        if m:
            python = m.group(1)
        line = raw.split("#", 1)[0].strip()
        if not line:
            continue
        spec, _, marker = line.partition(";")
        name, sep, version = spec.strip().partition("==")
        if not sep or not re.fullmatch(r"[\w.!+-]+", version.strip()):
            raise ValueError(f"{path.name}: not an exact pin: {raw!r}")
        pins.append(Pin(name.strip(), version.strip(), marker.strip()))
    if not python:
        raise ValueError(f"{path.name}: no '# bundle-python: X.Y' line")
    return pins, python


def download_check(pins: list[Pin], python: str, pip: list[str] | None = None) -> list[str]:
    """Problems fetching a Windows wheel for each pin (empty when all were found)."""
    pip = pip or [sys.executable, "-m", "pip"]
    problems: list[str] = []
    with tempfile.TemporaryDirectory(prefix="lopside-win-wheels-") as tmp:
        for pin in pins:
            if not pin.for_windows():
                continue
            cmd = pip + [
                "download",
                "--quiet",
                "--no-deps",
                "--only-binary=:all:",
                "--platform",
                "win_amd64",
                "--python-version",
                python,
                "--implementation",
                "cp",
                "--dest",
                tmp,
                f"{pin.name}=={pin.version}",
            ]
            proc = subprocess.run(cmd, capture_output=True, text=True)
            if proc.returncode != 0:
                tail = (proc.stderr or proc.stdout).strip().splitlines()[-1:]
                problems.append(f"{pin.name}=={pin.version}: no Windows wheel ({' '.join(tail)})")
            else:
                print(f"  ok  {pin.name}=={pin.version}", flush=True)
    return problems


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument(
        "--download",
        action="store_true",
        help="also fetch a Windows wheel of every pin (needs the package index)",
    )
    args = ap.parse_args(argv)
    findings = scan()
    for f in findings:
        print(f)
    print(f"windows readiness: {len(findings)} findings in app/lopside")
    failed = bool(findings)
    if args.download:
        pins, python = read_pins()
        n = sum(p.for_windows() for p in pins)
        print(f"windows readiness: fetching {n} pins for win_amd64, Python {python}")
        problems = download_check(pins, python)
        for p in problems:
            print(p)
        print(f"windows readiness: {n - len(problems)} of {n} pins have a Windows wheel")
        failed = failed or bool(problems)
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
