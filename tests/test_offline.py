"""Offline by construction (DESIGN.md section 1: hospital PCs, often with no internet).

Two kinds of check:

* run the headless path (load each sample review, analyse, JSON, sheet, funnel PNG) and
  the window's self-test in a subprocess whose ``socket`` functions raise, and assert that
  no socket was even attempted;
* read every module of the app (with ``ast``, not a regular expression, so comments and
  docstrings do not count) and refuse network libraries and URL openers.

The socket guard is the one of the ``_no_network`` pytest plugin (tests/_no_network.py);
a test here also proves that the plugin fails a test that touches the network.
"""

from __future__ import annotations

import ast
import json
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

TESTS = Path(__file__).resolve().parent
REPO = TESTS.parent
APP = REPO / "app"
PKG = APP / "lopside"

#: Modules that reach the network. Importing any of them from the app is refused unless
#: the module is listed in ALLOWED_NETWORK_IMPORTS with the reason.
NETWORK_MODULES = (
    "socket",
    "ssl",
    "urllib.request",
    "urllib3",
    "http.client",
    "http.server",
    "requests",
    "httpx",
    "aiohttp",
    "ftplib",
    "smtplib",
    "poplib",
    "imaplib",
    "xmlrpc",
    "telnetlib",
    "PySide6.QtNetwork",
    "PySide6.QtWebEngineCore",
    "PySide6.QtWebEngineWidgets",
    "PySide6.QtWebSockets",
)
#: path relative to app/lopside -> {module: why it is acceptable}. Empty: nothing needs one.
ALLOWED_NETWORK_IMPORTS: dict[str, dict[str, str]] = {}

#: Calls that hand a URL to another program (browser, mail client). Opening a local file
#: this way (the help pages, an exported sheet) is fine; a remote address is not.
URL_OPENERS = ("open", "open_new", "open_new_tab", "openUrl")
REMOTE_SCHEMES = ("http://", "https://", "ftp://", "mailto:", "www.")


def _env(**extra: str) -> dict[str, str]:
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join([str(TESTS), str(APP), env.get("PYTHONPATH", "")])
    env["QT_QPA_PLATFORM"] = "offscreen"
    env.update(extra)
    return env


def _run_guarded(body: str, tmp_path: Path, timeout: int = 300) -> dict:
    """Run ``body`` in a fresh interpreter with the network blocked before any import of
    the app; return the JSON object the script prints on its last line."""
    script = (
        textwrap.dedent(
            """
        import json, socket, sys
        from _no_network import NetworkAccessError, block_network

        attempts = []
        undo = block_network(attempts)
        # the guard must be live before anything of the app is imported; creating a socket
        # sends nothing, so this probe is harmless even if the guard were broken
        try:
            socket.socket(socket.AF_INET, socket.SOCK_STREAM).close()
            probe = "not blocked"
        except NetworkAccessError:
            probe = "blocked"
        attempts.clear()
        out = {"probe": probe}
        """
        )
        + textwrap.dedent(body)
        + textwrap.dedent(
            """
        out["attempts"] = attempts
        print(json.dumps(out))
        """
        )
    )
    proc = subprocess.run(
        [sys.executable, "-c", script],
        capture_output=True,
        text=True,
        cwd=tmp_path,
        env=_env(LOPSIDE_SETTINGS_DIR=str(tmp_path / "settings")),
        timeout=timeout,
    )
    assert proc.returncode == 0, f"stdout:\n{proc.stdout[-2000:]}\nstderr:\n{proc.stderr[-4000:]}"
    last = proc.stdout.strip().splitlines()[-1]
    return json.loads(last)


def test_headless_path_attempts_no_socket(tmp_path):
    """Every sample review through load, analyse, JSON, sheet and funnel PNG, offline."""
    out = _run_guarded(
        f"""
        from argparse import Namespace
        from pathlib import Path
        from lopside.analysis import analyse
        from lopside.cli_common import load_outcomes, load_review_file
        from lopside.figures.cli_plot import build_figure
        from lopside.figures.export import save_figure
        from lopside.paths import sample_reviews
        from lopside.report import to_json
        from lopside.settings import AnalysisSettings
        from lopside.sheet import write_sheet

        tmp = Path({str(tmp_path)!r})
        done = []
        for f in sample_reviews():
            # a pasted-text or CSV sample names no measure; its project-file twin does
            twin = f.with_suffix(".lopside")
            measure = None
            if f.suffix != ".lopside" and twin.exists():
                measure = load_review_file(twin)[0].details.measure
            # every outcome of a workbook
            for i, (_name, review, saved) in enumerate(load_outcomes(f, measure)):
                result = analyse(review, AnalysisSettings.from_dict(saved))
                text = json.dumps(to_json(result), allow_nan=False)
                pdf, png = tmp / f"{{f.name}}{{i}}.pdf", tmp / f"{{f.name}}{{i}}.png"
                write_sheet(result, pdf)
                save_figure(build_figure(result, Namespace(kind="funnel")), png)
                done.append({{
                    "file": f.name,
                    "json_k": json.loads(text)["k"],
                    "sheet": pdf.read_bytes()[:5].decode("latin-1"),
                    "png": png.read_bytes()[1:4].decode("latin-1"),
                }})
        out["done"] = done
        """,
        tmp_path,
    )
    assert out["probe"] == "blocked", "the socket guard was not active"
    assert out["attempts"] == [], f"the headless path tried the network: {out['attempts']}"
    assert len(out["done"]) >= 3, f"expected the sample reviews, got {out['done']}"
    for item in out["done"]:
        assert item["json_k"] >= 1, item
        assert item["sheet"] == "%PDF-", item
        assert item["png"] == "PNG", item


@pytest.mark.skipif(
    not (PKG / "window" / "selftest.py").exists(),
    reason="the window's self-test (app/lopside/window/selftest.py) is not in the tree yet",
)
def test_window_self_test_attempts_no_socket(tmp_path):
    """The window built offscreen (``lopside --self-test``) opens no Python socket.

    Qt's own C++ networking would not pass through Python's ``socket``; that the app
    never imports QtNetwork or QtWebEngine is checked by the source scan below.
    """
    out = _run_guarded(
        """
        from lopside.cli import main
        out["rc"] = main(["--self-test"])
        """,
        tmp_path,
    )
    assert out["probe"] == "blocked"
    assert out["rc"] == 0
    assert out["attempts"] == [], f"the window tried the network: {out['attempts']}"


# --- source scan ---------------------------------------------------------------------


def _dotted(node: ast.AST) -> str:
    """``a.b.c`` for a Name/Attribute chain, '' for anything else."""
    parts = []
    while isinstance(node, ast.Attribute):
        parts.append(node.attr)
        node = node.value
    if isinstance(node, ast.Name):
        parts.append(node.id)
        return ".".join(reversed(parts))
    return ""


def _is_network_module(name: str) -> str | None:
    for m in NETWORK_MODULES:
        if name == m or name.startswith(m + "."):
            return m
    return None


def _is_remote(value: object) -> bool:
    return isinstance(value, str) and value.strip().lower().startswith(REMOTE_SCHEMES)


def _remote_literal(node: ast.AST, constants: dict[str, str]) -> str | None:
    """A remote address written in ``node``, directly or through a module constant."""
    for sub in ast.walk(node):
        if isinstance(sub, ast.Constant) and _is_remote(sub.value):
            return sub.value
        if isinstance(sub, ast.Name) and sub.id in constants:
            return constants[sub.id]
    return None


def _remote_constants(tree: ast.Module) -> dict[str, str]:
    """Module-level ``NAME = "https://..."`` assignments."""
    found = {}
    for node in tree.body:
        if isinstance(node, ast.Assign | ast.AnnAssign):
            value = node.value
            targets = node.targets if isinstance(node, ast.Assign) else [node.target]
            if isinstance(value, ast.Constant) and _is_remote(value.value):
                found.update({t.id: value.value for t in targets if isinstance(t, ast.Name)})
    return found


def scan_source(source: str, name: str) -> list[str]:
    """Problems in one module: network imports, and URL openers given a remote address.

    Parameters
    ----------
    source : str
        The module's text.
    name : str
        Its path relative to app/lopside (for messages and the allow-list).

    Returns
    -------
    list of str
        One line per problem, naming the file and line.
    """
    allowed = ALLOWED_NETWORK_IMPORTS.get(name, {})
    problems = []
    tree = ast.parse(source, filename=name)
    constants = _remote_constants(tree)
    for node in ast.walk(tree):
        names: list[str] = []
        if isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            names = [node.module] + [f"{node.module}.{a.name}" for a in node.names]
        for n in names:
            m = _is_network_module(n)
            if m and m not in allowed:
                problems.append(f"{name}:{node.lineno}: imports {n} (network)")
                break
        if isinstance(node, ast.Call):
            func = _dotted(node.func)
            last = func.rsplit(".", 1)[-1]
            if last in URL_OPENERS or last == "QUrl" or func.endswith("QUrl.fromUserInput"):
                url = next(
                    (
                        u
                        for a in (*node.args, *(k.value for k in node.keywords))
                        if (u := _remote_literal(a, constants))
                    ),
                    None,
                )
                if url and (last != "open" or func.startswith("webbrowser")):
                    problems.append(f"{name}:{node.lineno}: {func}({url!r}) opens a remote URL")
            if func in ("__import__", "importlib.import_module") and node.args:
                arg = node.args[0]
                if isinstance(arg, ast.Constant) and isinstance(arg.value, str):
                    m = _is_network_module(arg.value)
                    if m and m not in allowed:
                        problems.append(f"{name}:{node.lineno}: imports {arg.value} (network)")
    return problems


def test_app_imports_no_network_module_and_opens_no_url():
    files = sorted(PKG.rglob("*.py"))
    assert len(files) > 20, f"expected the app's modules under {PKG}"
    problems = []
    for f in files:
        problems += scan_source(f.read_text(encoding="utf-8"), f.relative_to(PKG).as_posix())
    assert problems == [], "network use in the app:\n" + "\n".join(problems)


def test_allow_list_names_real_files_and_reasons():
    for rel, entries in ALLOWED_NETWORK_IMPORTS.items():
        assert (PKG / rel).is_file(), f"allow-list names a missing file {rel}"
        assert all(len(why) > 20 for why in entries.values()), f"give a reason for {rel}"


@pytest.mark.parametrize(
    "source, expected",
    [
        ("import socket\n", "imports socket"),
        ("import urllib.request as u\n", "imports urllib.request"),
        ("from urllib import request\n", "imports urllib.request"),
        ("from http.client import HTTPSConnection\n", "imports http.client"),
        ("import requests\n", "imports requests"),
        ("from PySide6.QtNetwork import QNetworkAccessManager\n", "imports PySide6.QtNetwork"),
        ("import webbrowser\nwebbrowser.open('http://example.org')\n", "opens a remote URL"),
        (
            "import webbrowser\nHELP = 'https://example.org/help'\n"
            "def f():\n    webbrowser.open_new_tab(HELP)\n",
            "opens a remote URL",
        ),
        ("import importlib\nimportlib.import_module('http.client')\n", "imports http.client"),
        (
            "from PySide6.QtGui import QDesktopServices\nfrom PySide6.QtCore import QUrl\n"
            "QDesktopServices.openUrl(QUrl('https://example.org/help'))\n",
            "opens a remote URL",
        ),
    ],
)
def test_scan_catches_network_use(source, expected):
    """The scan can fail: each offending snippet is reported."""
    problems = scan_source(source, "probe.py")
    assert any(expected in p for p in problems), problems


@pytest.mark.parametrize(
    "source",
    [
        '"""See https://doi.org/10.1136/bmj.d4002 for the method."""\n',  # a docstring cites
        "import urllib.parse\nurllib.parse.quote('a b')\n",  # text handling, no network
        "from PySide6.QtCore import QUrl\nQUrl.fromLocalFile('/tmp/help.html')\n",
        "open('https.txt')\n",  # the built-in open of a local file
        "import http\n",  # only http.HTTPStatus
        "import webbrowser\nwebbrowser.open(path.as_uri())\n",  # a local help page
    ],
)
def test_scan_accepts_offline_code(source):
    assert scan_source(source, "probe.py") == []


# --- the pytest plugin ------------------------------------------------------------------


def test_plugin_fails_tests_that_touch_the_network(tmp_path):
    (tmp_path / "test_probe.py").write_text(
        textwrap.dedent(
            """
            import socket
            import pytest

            def test_connects():
                # the guard raises before any packet; 127.0.0.1 keeps it local even if not
                socket.create_connection(("127.0.0.1", 9), timeout=0.1)

            def test_swallows_the_error():
                try:
                    socket.getaddrinfo("localhost", 80)
                except Exception:
                    pass

            def test_local_socketpair_is_fine():
                a, b = socket.socketpair()
                a.close()
                b.close()

            def test_offline_work_is_fine():
                assert sum(range(4)) == 6

            @pytest.mark.allow_network
            def test_opted_out():
                socket.socket().close()
            """
        ),
        encoding="utf-8",
    )
    proc = subprocess.run(
        [
            sys.executable,
            "-m",
            "pytest",
            "-p",
            "_no_network",
            "-p",
            "no:cacheprovider",
            "-q",
            "-rfEp",
            "--strict-markers",
            "-o",
            "addopts=",
            "test_probe.py",
        ],
        capture_output=True,
        text=True,
        cwd=tmp_path,
        env=_env(),
        timeout=120,
    )
    out = proc.stdout
    assert proc.returncode == 1, out + proc.stderr
    assert "FAILED test_probe.py::test_connects" in out, out
    assert "FAILED test_probe.py::test_swallows_the_error" in out, out
    assert "tried to use the network" in out, out
    for ok in ("test_local_socketpair_is_fine", "test_offline_work_is_fine", "test_opted_out"):
        assert f"PASSED test_probe.py::{ok}" in out, out
    assert "2 failed, 3 passed" in out, out
