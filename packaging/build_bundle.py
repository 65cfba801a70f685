"""Build the portable one-folder Lopside bundle, smoke-test it and report its size.

Run from anywhere, on Linux or Windows, with Python 3.10 or newer::

    python packaging/build_bundle.py            # venv + build + smoke test + size report
    python packaging/build_bundle.py --archive  # also pack the folder for copying
    python packaging/build_bundle.py --time     # also time start-up against the venv

On Windows use ``py -3.11 packaging\\build_bundle.py`` from a normal (non-admin) prompt.
Steps, all inside ``packaging/build`` and ``packaging/dist`` (both git-ignored):

1. a throwaway virtual environment ``packaging/build/venv`` with the exact versions of
   ``packaging/requirements-bundle.txt`` (pip, setuptools, PyInstaller and its hooks
   pinned with scipy; the Python version must be the file's ``bundle-python``); Lopside
   itself is installed from this checkout as a wheel would be (not editable, built with
   the pinned setuptools), so the bundle gets the same package data as users of the wheel;
2. PyInstaller on ``packaging/lopside.spec`` -> ``packaging/dist/Lopside/``; a hidden
   import PyInstaller could not find fails the build (unless :data:`KNOWN_ABSENT` says
   why it does not matter and the module indeed does not exist); then
   ``packaging/notices.py`` collects every licence text into
   ``THIRD-PARTY-NOTICES/`` and fails the build when a bundled distribution has none;
3. a smoke test of the built folder: ``--self-test`` offscreen (which also reads and
   renders the sheet it wrote, so pdfplumber and pypdfium2's native library are
   exercised), ``check --json`` of a bundled sample review and of a small PDF written
   here, ``sheet -o`` and ``plot`` on a sample review bundled inside it, with throwaway user
   folders; on Linux, when ``unshare`` can make a network namespace, with no network at
   all. Any failure -> exit status 1;
4. the size of the folder and of what dominates it.

Exit status: 0 when everything passed, 1 when a step failed (the message says which).
"""

from __future__ import annotations

import argparse
import json
import os
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
import zipfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
REPO = HERE.parent
BUILD = HERE / "build"
DIST = HERE / "dist"
VENV = BUILD / "venv"
WORK = BUILD / "pyinstaller"
BUNDLE = DIST / "Lopside"
REQUIREMENTS = HERE / "requirements-bundle.txt"
SPEC = HERE / "lopside.spec"
WINDOWS = sys.platform.startswith("win")

#: Modules the bundle must not contain (lopside.spec excludes them): network clients,
#: development and test tools, unused GUI toolkits and matplotlib backends.
FORBIDDEN_MODULES = (
    "http.server",
    "ftplib",
    "xmlrpc",
    "smtplib",
    "ssl",
    "PySide6.QtNetwork",
    "PySide6.QtWebEngineCore",
    "tkinter",
    "IPython",
    "statsmodels",
    "pytest",
    "hypothesis",
    "matplotlib.backends.backend_tkagg",
    "matplotlib.backends.backend_wxagg",
    "matplotlib.backends.backend_gtk3agg",
    "matplotlib.backends.backend_webagg",
)
#: Modules it must contain: the app's lazily imported parts and the backends it draws with.
REQUIRED_MODULES = (
    "lopside.cli",
    "lopside.frozen",
    "lopside.window.selftest",
    "lopside.sheet",
    "matplotlib.backends.backend_agg",
    "matplotlib.backends.backend_qtagg",
    "matplotlib.backends.backend_pdf",
    "matplotlib.backends.backend_svg",
    "lopside.intake.pdf",
    "pdfplumber",
    "pdfminer.cmapdb",
    "pypdfium2",
    "pypdfium2_raw.bindings",
)
#: Files (name patterns) that must not be in the folder: Qt's network and web parts
#: (icudtl.dat: the web engine's ICU data, in the Windows wheel's resources/).
FORBIDDEN_FILES = (
    "*Qt6Network*",
    "*QtNetwork*",
    "*Qt6WebEngine*",
    "*Qt6Qml*",
    "*qtls*",
    "*_tkinter*",
    "icudtl.dat",
    "*libssl*",
    "_ssl*",
)

#: Hidden imports that PyInstaller's own hooks ask for but that the pinned versions do not
#: have, so "not found" is expected. Each is re-checked at build time: if the module
#: exists after all (a new release brought it back), the build fails again.
KNOWN_ABSENT = {
    "scipy.special._cdflib": "listed by PyInstaller's scipy hook for older scipy releases; "
    "scipy 1.17 has no such module",
    "pycparser.lextab": "listed by the contributed pycparser hook for pycparser 2.x, whose "
    "parser tables were generated modules; pycparser 3 (pulled in through cffi by "
    "cryptography, which pdfminer uses for encrypted PDFs) has none",
    "pycparser.yacctab": "as pycparser.lextab",
}
HIDDEN_IMPORT_MISSING = re.compile(r'Hidden import [\'"]([\w.]+)[\'"] not found')

#: Keys the JSON of ``check --json`` must have (DESIGN.md section 3).
JSON_KEYS = ("measure", "k", "studies", "pooled", "heterogeneity", "tests", "trim_fill")


class StepFailed(RuntimeError):
    """A build or smoke-test step failed; the message says which and why."""


def venv_python(venv: Path = VENV) -> Path:
    """The interpreter of the build environment."""
    return venv / ("Scripts/python.exe" if WINDOWS else "bin/python")


def bundle_exes(bundle: Path = BUNDLE) -> tuple[Path, Path]:
    """(window exe, console exe) of the bundle; the same file except on Windows."""
    if WINDOWS:
        return bundle / "Lopside.exe", bundle / "lopside-cli.exe"
    exe = bundle / "lopside"
    return exe, exe


def clean_env(extra: dict[str, str] | None = None) -> dict[str, str]:
    """The environment for child processes: no PYTHONPATH (it would let the source tree
    shadow the installed package) and no Python start-up overrides."""
    env = {k: v for k, v in os.environ.items() if not k.startswith(("PYTHON", "PIP_REQUIRE"))}
    env["PYTHONNOUSERSITE"] = "1"
    env.update(extra or {})
    return env


def run(cmd: list[str | os.PathLike], what: str, **kw) -> subprocess.CompletedProcess:
    """Run a command; raise StepFailed naming ``what`` with its output when it fails."""
    kw.setdefault("env", clean_env())
    print(f"$ {' '.join(str(c) for c in cmd)}", flush=True)
    proc = subprocess.run([str(c) for c in cmd], **kw)
    if proc.returncode != 0:
        detail = ""
        if kw.get("capture_output"):
            detail = f"\n--- stdout ---\n{proc.stdout}\n--- stderr ---\n{proc.stderr}"
        raise StepFailed(f"{what} failed (exit status {proc.returncode}){detail}")
    return proc


# --- 1. environment ----------------------------------------------------------------------


def make_venv(python: str) -> Path:
    """Create (or reuse) the build environment and install the pinned set and Lopside."""
    sys.path.insert(0, str(HERE))
    from windows_readiness import read_pins

    pins, bundle_python = read_pins(REQUIREMENTS)
    py = venv_python()
    quiet = dict(capture_output=True, text=True)  # pip's output is shown only on failure
    if not py.exists():
        run([python, "-m", "venv", VENV], "creating the build environment")
    got = run(
        [py, "-c", "import sys; print('%d.%d' % sys.version_info[:2])"],
        "asking the build environment's Python version",
        **quiet,
    ).stdout.strip()
    if got != bundle_python:
        raise StepFailed(
            f"the build environment has Python {got}; requirements-bundle.txt pins "
            f"{bundle_python}: run with --python python{bundle_python} --fresh"
        )
    pip_pin = next(f"pip=={p.version}" for p in pins if p.name.lower() == "pip")
    run([py, "-m", "pip", "install", "-q", pip_pin], f"installing {pip_pin}", **quiet)
    run(
        [py, "-m", "pip", "install", "-q", "-r", REQUIREMENTS],
        "installing the pinned set",
        **quiet,
    )
    # Not editable: the bundle must see the package exactly as a wheel installs it,
    # sample reviews and resources included. --no-deps: the pins above are the deps.
    # --no-build-isolation: built with the pinned setuptools, not whatever is newest.
    run(
        [
            py,
            "-m",
            "pip",
            "install",
            "-q",
            "--no-deps",
            "--no-build-isolation",
            "--force-reinstall",
            REPO,
        ],
        "installing Lopside from this checkout",
        **quiet,
    )
    run([py, "-m", "pip", "check"], "checking the environment's dependencies", **quiet)
    return py


# --- 2. build ---------------------------------------------------------------------------


def missing_hidden_imports(log: str, exists) -> list[str]:
    """Hidden imports PyInstaller reported as not found that matter: all of them except
    those in :data:`KNOWN_ABSENT` that ``exists(name)`` confirms are really absent."""
    bad = []
    for name in dict.fromkeys(HIDDEN_IMPORT_MISSING.findall(log)):
        if name in KNOWN_ABSENT and not exists(name):
            continue
        bad.append(name)
    return bad


def _module_exists_in(py: Path):
    def exists(name: str) -> bool:
        code = f"import importlib.util as u, sys; sys.exit(0 if u.find_spec({name!r}) else 1)"
        proc = subprocess.run([str(py), "-c", code], capture_output=True, env=clean_env())
        return proc.returncode == 0

    return exists


def build(py: Path) -> Path:
    """Run PyInstaller on the spec, then collect the licence notices; return the bundle."""
    if BUNDLE.exists():
        shutil.rmtree(BUNDLE)
    proc = run(
        [
            py,
            "-m",
            "PyInstaller",
            "--noconfirm",
            "--clean",
            "--log-level",
            "WARN",
            "--distpath",
            DIST,
            "--workpath",
            WORK,
            SPEC,
        ],
        "PyInstaller",
        cwd=HERE,
        capture_output=True,
        text=True,
    )
    log = proc.stdout + proc.stderr
    print(log, end="" if log.endswith("\n") or not log else "\n")
    bad = missing_hidden_imports(log, _module_exists_in(py))
    if bad:
        raise StepFailed(
            f"PyInstaller could not find hidden imports {bad}: a module the app or a hook "
            "needs is missing from the bundle. Fix the pins or the spec; if the module "
            "truly does not exist in the pinned version, add it to KNOWN_ABSENT with why."
        )
    window_exe, cli_exe = bundle_exes()
    for exe in {window_exe, cli_exe}:
        if not exe.exists():
            raise StepFailed(f"PyInstaller finished but {exe} is missing")
    # the notes for IT and users travel with the folder
    shutil.copy2(HERE / "README-IT.md", BUNDLE / "README-IT.md")
    run(
        [py, HERE / "notices.py", "--bundle", BUNDLE, "--modules", WORK / "lopside" / "PYZ-00.toc"],
        "collecting THIRD-PARTY-NOTICES (licence texts)",
    )
    return BUNDLE


# --- 3. contents and smoke test ------------------------------------------------------


def check_contents(bundle: Path = BUNDLE, work: Path = WORK) -> list[str]:
    """What went in and what stayed out, from PyInstaller's module list and the folder."""
    import ast

    toc_file = work / "lopside" / "PYZ-00.toc"
    if not toc_file.exists():
        raise StepFailed(f"no module list {toc_file}: build first")
    modules = {entry[0] for entry in ast.literal_eval(toc_file.read_text(encoding="utf-8"))[1]}

    def has(name: str) -> bool:
        return any(m == name or m.startswith(name + ".") for m in modules)

    bad = [m for m in FORBIDDEN_MODULES if has(m)]
    if bad:
        raise StepFailed(f"the bundle contains modules it must not: {bad}")
    missing = [m for m in REQUIRED_MODULES if not has(m)]
    if missing:
        raise StepFailed(f"the bundle lacks modules: {missing}")
    files = [p for pat in FORBIDDEN_FILES for p in (bundle / "_internal").rglob(pat)]
    if files:
        raise StepFailed(f"the bundle contains files it must not: {files[:5]}")
    index = bundle / "THIRD-PARTY-NOTICES" / "INDEX.txt"
    if not index.is_file():
        raise StepFailed(f"no licence notices {index}: run packaging/notices.py")
    internal = bundle / "_internal"
    pdfium = [p for p in (internal / "pypdfium2_raw").glob("*pdfium*") if p.is_file()]
    if not pdfium:
        raise StepFailed("no pdfium library in _internal/pypdfium2_raw (PDF previews need it)")
    if not list((internal / "pdfminer" / "cmap").glob("*.gz")):
        raise StepFailed("no character maps in _internal/pdfminer/cmap (PDF text needs them)")
    if not (internal / "svglib" / "svglib.py").is_file():
        raise StepFailed("svglib is not in _internal/svglib as replaceable .py files")
    fonts = list(internal.glob("matplotlib/mpl-data/fonts/ttf/DejaVuSans.ttf"))
    platforms = {
        p.name for p in internal.rglob("*") if p.parent.name == "platforms" and p.is_file()
    }
    want = {"qwindows.dll", "qoffscreen.dll"} if WINDOWS else {"libqoffscreen.so", "libqxcb.so"}
    if not fonts or not want <= platforms:
        hint = ""
        if not WINDOWS and "libqxcb.so" not in platforms:
            # PyInstaller leaves out a Qt plugin whose system libraries it cannot find
            hint = (
                "; the xcb plugin is left out when its X11 libraries are missing on the build "
                "machine: apt-get install libxcb-cursor0 libxcb-icccm4 libxcb-keysyms1 "
                "libxcb-image0 libxcb-render-util0 libxcb-shape0 libxcb-randr0 libxcb-xfixes0 "
                "libxcb-sync1 libxcb-shm0 libxcb-render0 libxcb-util1 libxcb-xkb1 "
                "libxkbcommon-x11-0 libx11-xcb1"
            )
        raise StepFailed(f"fonts {fonts} or Qt platform plugins {sorted(platforms)} missing{hint}")
    return [
        f"{len(modules)} modules; none of {len(FORBIDDEN_MODULES)} forbidden ones "
        "(network clients, dev tools, other toolkits)",
        f"Qt platform plugins: {', '.join(sorted(platforms))}; DejaVu Sans bundled; "
        "svglib as replaceable .py files",
        f"PDF reading: {pdfium[0].name} and pdfminer's character maps bundled",
        f"licence notices: {index.relative_to(bundle)} "
        f"({sum(1 for _ in index.parent.rglob('*') if _.is_file())} files)",
    ]


def user_folders(root: Path) -> dict[str, str]:
    """Throwaway per-user folders, so a smoke test touches nothing of the builder's own
    settings and starts with an empty matplotlib cache, like a first launch."""
    env = {
        "HOME": str(root / "home"),
        "USERPROFILE": str(root / "home"),
        "APPDATA": str(root / "roaming"),
        "LOCALAPPDATA": str(root / "local"),
        "XDG_CONFIG_HOME": str(root / "config"),
        "XDG_DATA_HOME": str(root / "data"),
        "XDG_CACHE_HOME": str(root / "cache"),
        "LOPSIDE_SETTINGS_DIR": str(root / "settings"),
        "QT_QPA_PLATFORM": "offscreen",
    }
    for k in (
        "HOME",
        "APPDATA",
        "LOCALAPPDATA",
        "XDG_CONFIG_HOME",
        "XDG_DATA_HOME",
        "XDG_CACHE_HOME",
    ):
        Path(env[k]).mkdir(parents=True, exist_ok=True)
    env.pop("MPLCONFIGDIR", None)
    return env


def offline_prefix() -> list[str]:
    """``unshare -n`` (a network namespace with no interfaces up) where this works."""
    if WINDOWS or not shutil.which("unshare"):
        return []
    try:
        ok = subprocess.run(["unshare", "-n", "true"], capture_output=True, timeout=10)
    except (OSError, subprocess.TimeoutExpired):
        return []
    return ["unshare", "-n"] if ok.returncode == 0 else []


def bundled_sample(bundle: Path) -> Path:
    """A sample review shipped inside the bundle (not the checkout's copy)."""
    d = bundle / "_internal" / "lopside" / "sample_reviews"
    samples = sorted(d.glob("*.lopside"))
    if not samples:
        raise StepFailed(f"no *.lopside sample review inside the bundle ({d})")
    return samples[0]


#: The rows of the small PDF the smoke test reads (invented trials, odds ratios).
SMOKE_PDF_ROWS = (
    ("Abelard 2004", "0.62 (0.41 to 0.94)"),
    ("Brixton 2006", "0.81 (0.55 to 1.19)"),
    ("Calloway 2008", "0.47 (0.22 to 1.01)"),
    ("Dunmore 2009", "0.95 (0.72 to 1.25)"),
    ("Estover 2011", "0.70 (0.48 to 1.02)"),
)


def write_small_pdf(path: Path) -> Path:
    """A one-page PDF with a forest table as text (Helvetica, one of the 14 standard
    fonts), written byte by byte so that the smoke test needs no library of its own."""
    lines = ["BT /F1 11 Tf 72 780 Td (Table 1. Invented trials for a smoke test) Tj ET"]
    y = 750
    for label, ci in SMOKE_PDF_ROWS:
        lines.append(f"BT /F1 9 Tf 72 {y} Td ({label}) Tj ET")
        lines.append(f"BT /F1 9 Tf 260 {y} Td ({ci}) Tj ET")
        y -= 15
    stream = "\n".join(lines).encode("ascii")
    objects = [
        b"<< /Type /Catalog /Pages 2 0 R >>",
        b"<< /Type /Pages /Kids [3 0 R] /Count 1 >>",
        b"<< /Type /Page /Parent 2 0 R /MediaBox [0 0 595 842] "
        b"/Resources << /Font << /F1 4 0 R >> >> /Contents 5 0 R >>",
        b"<< /Type /Font /Subtype /Type1 /BaseFont /Helvetica /Encoding /WinAnsiEncoding >>",
        b"<< /Length %d >>\nstream\n" % len(stream) + stream + b"\nendstream",
    ]
    out = bytearray(b"%PDF-1.4\n")
    offsets = []
    for i, body in enumerate(objects, start=1):
        offsets.append(len(out))
        out += b"%d 0 obj\n" % i + body + b"\nendobj\n"
    xref = len(out)
    out += b"xref\n0 %d\n0000000000 65535 f \n" % (len(objects) + 1)
    for off in offsets:
        out += b"%010d 00000 n \n" % off
    out += b"trailer\n<< /Size %d /Root 1 0 R >>\nstartxref\n%d\n%%%%EOF\n" % (
        len(objects) + 1,
        xref,
    )
    path.write_bytes(bytes(out))
    return path


def smoke_test(bundle: Path = BUNDLE) -> list[str]:
    """Run the bundle headless; return one line per check passed; raise on a failure."""
    window_exe, cli_exe = bundle_exes(bundle)
    sample = bundled_sample(bundle)
    prefix = offline_prefix()
    passed: list[str] = []
    note = " (no network: unshare -n)" if prefix else ""
    with tempfile.TemporaryDirectory(prefix="lopside-smoke-") as tmp:
        tmp = Path(tmp)
        env = clean_env(user_folders(tmp))
        # run from an unrelated folder: nothing may be found through the working directory
        opts = dict(env=env, cwd=tmp, capture_output=True, text=True, timeout=300)

        p = run(prefix + [cli_exe, "--version"], "bundle --version", **opts)
        passed.append(f"--version: {p.stdout.strip()}")

        # on Windows both: the windowed exe (no stdout: its output goes to the log) and
        # the console one (which shows what failed)
        for exe in dict.fromkeys([cli_exe, window_exe]):
            t0 = time.perf_counter()
            run(prefix + [exe, "--self-test"], f"{exe.name} --self-test", **opts)
            dt = time.perf_counter() - t0
            passed.append(f"{exe.name} --self-test offscreen passed in {dt:.1f} s{note}")

        xvfb = shutil.which("xvfb-run") if not WINDOWS else None
        if xvfb:
            # a real X11 window (the xcb plugin and the system libraries it needs), on a
            # virtual screen of a hospital laptop's size
            t0 = time.perf_counter()
            xopts = dict(opts, env=dict(env, QT_QPA_PLATFORM="xcb"))
            run(
                prefix + [xvfb, "-a", "-s", "-screen 0 1366x768x24", window_exe, "--self-test"],
                "bundle --self-test on X11 (xvfb-run)",
                **xopts,
            )
            dt = time.perf_counter() - t0
            passed.append(f"--self-test on X11 (xcb, Xvfb 1366x768) passed in {dt:.1f} s{note}")
        else:
            passed.append("--self-test on X11 not run (no xvfb-run; the offscreen one ran)")

        p = run(prefix + [cli_exe, "check", sample, "--json"], "bundle check --json", **opts)
        try:
            data = json.loads(p.stdout)
        except json.JSONDecodeError as exc:
            raise StepFailed(
                f"check --json printed no valid JSON: {exc}\n{p.stdout[:500]}"
            ) from exc
        missing = [k for k in JSON_KEYS if k not in data]
        if missing or data.get("k", 0) < 1:
            raise StepFailed(f"check --json lacks keys {missing} or has k < 1")
        passed.append(f"check --json {sample.name}: k={data['k']}, measure={data['measure']}")

        # rows straight from a review's PDF: pdfplumber and pdfminer inside the bundle
        review_pdf = write_small_pdf(tmp / "small-review.pdf")
        p = run(
            prefix + [cli_exe, "check", review_pdf, "--measure", "OR", "--json"],
            "bundle check small-review.pdf --json",
            **opts,
        )
        try:
            data = json.loads(p.stdout)
        except json.JSONDecodeError as exc:
            raise StepFailed(
                f"check of a PDF printed no valid JSON: {exc}\n{p.stdout[:500]}"
            ) from exc
        if data.get("k") != len(SMOKE_PDF_ROWS):
            raise StepFailed(
                f"check of a PDF read k={data.get('k')}, not {len(SMOKE_PDF_ROWS)}\n{p.stderr}"
            )
        source = data.get("intake", {}).get("source", "")
        if "small-review.pdf" not in source:
            raise StepFailed(f"the intake account of a PDF names {source!r}, not the file")
        passed.append(f"check small-review.pdf: k={data['k']} read from {source}")

        pdf = tmp / "sheet.pdf"
        run(prefix + [cli_exe, "sheet", sample, "-o", pdf], "bundle sheet -o", **opts)
        head = pdf.read_bytes()[:5] if pdf.exists() else b""
        if head != b"%PDF-" or pdf.stat().st_size < 2000:
            raise StepFailed(f"sheet -o did not write a PDF ({pdf}, starts {head!r})")
        passed.append(f"sheet -o: {pdf.stat().st_size // 1024} KiB PDF")

        png = tmp / "funnel.png"
        run(
            prefix + [cli_exe, "plot", sample, "--kind", "funnel", "-o", png],
            "bundle plot --kind funnel",
            **opts,
        )
        if not png.exists() or png.read_bytes()[:8] != b"\x89PNG\r\n\x1a\n":
            raise StepFailed(f"plot did not write a PNG ({png})")
        passed.append(f"plot --kind funnel: {png.stat().st_size // 1024} KiB PNG")

        # the panel summary in Word and a journal-club slide: python-docx and python-pptx
        # need their templates in the bundle (the spec collects them)
        book = sample.parent / "heart_failure_workbook.lopside"
        for out, args, part in (
            (tmp / "panel.docx", ["panel", book], "word/document.xml"),
            (
                tmp / "slide.pptx",
                ["slide", book, "--outcome", "Serious adverse events"],
                "ppt/presentation.xml",
            ),
        ):
            run(prefix + [cli_exe, *args, "-o", out], f"bundle {args[0]} -o {out.name}", **opts)
            with zipfile.ZipFile(out) as z:
                if part not in z.namelist():
                    raise StepFailed(f"{args[0]} -o {out.name} wrote no {part}")
            passed.append(f"{args[0]} -o {out.name}: {out.stat().st_size // 1024} KiB")

        # The start-up hook must have moved matplotlib's cache to the per-user folder, or
        # every launch would rebuild the font cache.
        cache_root = Path(env["LOCALAPPDATA"] if WINDOWS else env["XDG_CACHE_HOME"])
        fontlists = list(cache_root.glob("Lopside/Lopside/**/matplotlib/fontlist-*.json"))
        if not fontlists:
            raise StepFailed(f"no matplotlib font cache under {cache_root / 'Lopside'}")
        passed.append(f"matplotlib cache kept per user: {fontlists[0].relative_to(tmp)}")
    return passed


# --- 4. size ----------------------------------------------------------------------------


def tree_size(path: Path) -> int:
    if path.is_file():
        return path.stat().st_size
    return sum(p.stat().st_size for p in path.rglob("*") if p.is_file() and not p.is_symlink())


def human(n: float) -> str:
    for unit in ("B", "KiB", "MiB", "GiB"):
        if n < 1024 or unit == "GiB":
            return f"{n:.0f} {unit}" if unit == "B" else f"{n:.1f} {unit}"
        n /= 1024
    return f"{n:.1f} GiB"


def size_report(bundle: Path = BUNDLE, top: int = 15) -> str:
    """Total size and the biggest top-level entries of _internal (and of PySide6)."""
    total = tree_size(bundle)
    files = sum(1 for p in bundle.rglob("*") if p.is_file() and not p.is_symlink())
    lines = [f"bundle {bundle}: {human(total)} in {files} files"]
    internal = bundle / "_internal"
    for title, folder in (("_internal", internal), ("_internal/PySide6", internal / "PySide6")):
        if not folder.is_dir():
            continue
        entries = sorted(
            ((tree_size(p), p.name) for p in folder.iterdir() if not p.is_symlink()),
            reverse=True,
        )
        lines.append(f"largest in {title}:")
        lines += [f"  {human(s):>10}  {name}" for s, name in entries[:top]]
    biggest = sorted(
        ((p.stat().st_size, p) for p in bundle.rglob("*") if p.is_file() and not p.is_symlink()),
        reverse=True,
    )[:10]
    lines.append("largest files:")
    lines += [f"  {human(s):>10}  {p.relative_to(bundle)}" for s, p in biggest]
    return "\n".join(lines)


def make_archive(bundle: Path = BUNDLE) -> Path:
    """Pack the folder into one file for copying to PCs: a zip on Windows; a .tar.gz
    elsewhere, which keeps the library symlinks PyInstaller makes on Linux (a zip would
    store each twice)."""
    import platform

    name = f"Lopside-{_version()}-{sys.platform}-{platform.machine().lower()}"
    fmt = "zip" if WINDOWS else "gztar"
    out = shutil.make_archive(str(DIST / name), fmt, root_dir=DIST, base_dir=bundle.name)
    return Path(out)


def _version() -> str:
    out = subprocess.run(
        [str(venv_python()), "-c", "import lopside; print(lopside.__version__)"],
        capture_output=True,
        text=True,
        env=clean_env(),
        cwd=BUILD,
    )
    return out.stdout.strip() or "unknown"


# --- start-up timing ----------------------------------------------------------------------


def _timed(cmd: list[str], env: dict[str, str], cwd: Path, what: str) -> float:
    t0 = time.perf_counter()
    run(cmd, what, env=env, cwd=cwd, capture_output=True, text=True, timeout=300)
    return time.perf_counter() - t0


def time_startup(bundle: Path = BUNDLE, runs: int = 5) -> str:
    """Time ``--self-test`` of the bundle against ``python -m lopside --self-test`` run by
    the build environment's interpreter on this checkout's code (as a developer's
    editable install runs it), in the same run, with throwaway user folders.

    Both use the same interpreter and the same pinned libraries, so the difference is what
    freezing costs or saves. The first launch of each (empty matplotlib font cache) is
    timed on its own, then ``runs`` more (hyperfine when installed, else a plain loop).
    """
    window_exe, _ = bundle_exes(bundle)
    commands = {
        "bundle": [str(window_exe), "--self-test"],
        "venv": [str(venv_python()), "-m", "lopside", "--self-test"],
    }
    lines = []
    with tempfile.TemporaryDirectory(prefix="lopside-time-") as tmp:
        tmp = Path(tmp)
        env = clean_env(user_folders(tmp))
        envs = {
            "bundle": env,
            # a normal install keeps matplotlib's cache in MPLCONFIGDIR (here: its own)
            "venv": dict(env, MPLCONFIGDIR=str(tmp / "venv-mpl"), PYTHONPATH=str(REPO / "app")),
        }
        for name, cmd in commands.items():
            dt = _timed(cmd, envs[name], tmp, f"first {name} --self-test")
            lines.append(f"first launch ({name}, empty font cache): {dt:.2f} s")
        hyperfine = shutil.which("hyperfine")
        for name, cmd in commands.items():
            if hyperfine:
                out = tmp / f"hf-{name}.json"
                run(
                    [
                        hyperfine,
                        "--warmup",
                        "1",
                        "--runs",
                        str(runs),
                        "--export-json",
                        out,
                        "-N",
                        "-n",
                        name,
                        " ".join(f'"{c}"' for c in cmd),
                    ],
                    f"hyperfine {name}",
                    env=envs[name],
                    cwd=tmp,
                    capture_output=True,
                    text=True,
                )
                r = json.loads(out.read_text())["results"][0]
                mean, sd, lo, hi, n = r["mean"], r["stddev"], r["min"], r["max"], len(r["times"])
                how = "hyperfine"
            else:
                t = [_timed(cmd, envs[name], tmp, f"{name} --self-test") for _ in range(runs)]
                mean, lo, hi, n = statistics.mean(t), min(t), max(t), len(t)
                sd = statistics.stdev(t) if n > 1 else 0.0
                how = "loop"
            lines.append(
                f"warm ({name}, {how}): mean {mean:.2f} s +- {sd:.2f} s, "
                f"min {lo:.2f} s, max {hi:.2f} s over {n} runs"
            )
        # where the time goes: the self-test prints "ok  <step> (<n> ms)" per step, and
        # --version is the bare cost of starting the interpreter and the CLI
        for name, cmd in commands.items():
            proc = run(
                cmd,
                f"{name} --self-test",
                env=envs[name],
                cwd=tmp,
                capture_output=True,
                text=True,
                timeout=300,
            )
            steps = [
                ln.strip()[4:] for ln in proc.stdout.splitlines() if ln.strip().startswith("ok  ")
            ]
            lines.append(f"steps ({name}): " + "; ".join(steps))
            version = cmd[:-1] + ["--version"]
            t = [_timed(version, envs[name], tmp, f"{name} --version") for _ in range(runs)]
            lines.append(
                f"--version ({name}): mean {statistics.mean(t):.2f} s, min {min(t):.2f} s "
                f"over {runs} runs"
            )
    return "\n".join(lines)


# --- main -------------------------------------------------------------------------------


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument(
        "--python",
        default=sys.executable,
        help="interpreter to make the build environment from (default: this one)",
    )
    ap.add_argument(
        "--fresh", action="store_true", help="delete packaging/build and packaging/dist first"
    )
    ap.add_argument(
        "--skip-build",
        action="store_true",
        help="only smoke-test (and measure) the existing bundle",
    )
    ap.add_argument(
        "--archive",
        action="store_true",
        help="also pack the folder (zip on Windows, tar.gz elsewhere)",
    )
    ap.add_argument(
        "--time",
        action="store_true",
        help="also time start-up of the bundle against the build environment",
    )
    args = ap.parse_args(argv)
    try:
        if args.fresh:
            shutil.rmtree(BUILD, ignore_errors=True)
            shutil.rmtree(DIST, ignore_errors=True)
        BUILD.mkdir(parents=True, exist_ok=True)
        if not args.skip_build:
            t0 = time.perf_counter()
            py = make_venv(args.python)
            build(py)
            print(f"== built {BUNDLE} in {time.perf_counter() - t0:.0f} s")
        print("== contents")
        for line in check_contents():
            print(f"  ok  {line}")
        print("== smoke test")
        for line in smoke_test():
            print(f"  ok  {line}")
        print("== size")
        report = size_report()
        print(report)
        (DIST / "size-report.txt").write_text(report + "\n", encoding="utf-8")
        if args.archive:
            z = make_archive()
            print(f"== archive {z.name}: {human(z.stat().st_size)}")
        if args.time:
            print("== start-up (--self-test, offscreen)")
            print(time_startup())
    except StepFailed as exc:
        print(f"build_bundle: FAILED: {exc}", file=sys.stderr)
        return 1
    except subprocess.TimeoutExpired as exc:
        print(f"build_bundle: FAILED: {exc.cmd} took longer than {exc.timeout} s", file=sys.stderr)
        return 1
    print("build_bundle: all steps passed")
    return 0


if __name__ == "__main__":
    sys.exit(main())
