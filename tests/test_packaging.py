"""The wheel and the sdist carry what users need; the frozen-app start-up hooks work.

The wheel test builds from a copy of the project files in a temporary folder (so nothing
is written into the checkout while others work in it) with ``pip wheel --no-deps``. pip
fetches setuptools into an isolated build environment, which needs the package registry;
only when that is unreachable is the test skipped, and it says so. CI reaches the
registry, so it runs there. ``.ci/wheel_check.sh`` goes further: it installs the wheel
into a fresh environment and runs the commands from outside the source tree.
"""

from __future__ import annotations

import configparser
import os
import shutil
import subprocess
import sys
import tarfile
import textwrap
import zipfile
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
APP = REPO / "app"
#: What a build of the project reads (pyproject's package-dir, readme, MANIFEST.in).
PROJECT_FILES = ("pyproject.toml", "README.md", "DEVELOPERS.md", "MANIFEST.in")
PROJECT_DIRS = ("app", "sample_reviews", "resources")
#: pip output that means "could not reach the registry", not "the build is broken".
OFFLINE_SIGNS = (
    "Could not find a version that satisfies the requirement setuptools",
    "No matching distribution found for setuptools",
    "Failed to establish a new connection",
    "Temporary failure in name resolution",
    "Network is unreachable",
    "NewConnectionError",
)


def _copy_project(dest: Path) -> Path:
    src = dest / "src"
    src.mkdir()
    for name in PROJECT_FILES:
        if (REPO / name).exists():
            shutil.copy2(REPO / name, src / name)
    ignore = shutil.ignore_patterns("__pycache__", "*.pyc", "*.egg-info", "build")
    for name in PROJECT_DIRS:
        shutil.copytree(REPO / name, src / name, ignore=ignore)
    return src


@pytest.fixture(scope="module")
def built(tmp_path_factory) -> dict[str, Path]:
    """The project's wheel, built once for this module's tests."""
    tmp = tmp_path_factory.mktemp("wheel")
    src = _copy_project(tmp)
    out = tmp / "dist"
    proc = subprocess.run(
        [sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w", str(out), str(src)],
        capture_output=True,
        text=True,
        timeout=600,
    )
    if proc.returncode != 0:
        text = proc.stdout + proc.stderr
        if any(sign in text for sign in OFFLINE_SIGNS):
            pytest.skip(
                "pip wheel could not fetch its build requirements (setuptools) from the "
                "package registry: this machine is offline. CI reaches the registry."
            )
        pytest.fail(f"pip wheel failed:\n{text[-3000:]}")
    wheels = sorted(out.glob("lopside-*.whl"))
    assert len(wheels) == 1, list(out.iterdir())
    return {"wheel": wheels[0], "src": src}


def _names(wheel: Path) -> list[str]:
    with zipfile.ZipFile(wheel) as z:
        return z.namelist()


def test_wheel_has_every_sample_review(built):
    names = _names(built["wheel"])
    in_wheel = sorted(
        n.split("/")[-1]
        for n in names
        if n.startswith("lopside/sample_reviews/") and not n.endswith("/")
    )
    in_repo = sorted(
        p.name for p in (REPO / "sample_reviews").iterdir() if p.is_file() and p.suffix != ".py"
    )
    assert any(n.endswith(".lopside") for n in in_wheel), in_wheel
    assert in_wheel == in_repo, "the wheel and sample_reviews/ differ"


def test_wheel_has_every_resource(built):
    names = set(_names(built["wheel"]))
    in_repo = sorted(
        "lopside/resources/" + p.relative_to(REPO / "resources").as_posix()
        for p in (REPO / "resources").rglob("*")
        if p.is_file() and "__pycache__" not in p.parts
    )
    assert in_repo, "resources/ is empty"
    missing = [n for n in in_repo if n not in names]
    assert missing == [], f"resources missing from the wheel: {missing}"


def test_wheel_has_every_module_and_the_entry_point(built):
    names = set(_names(built["wheel"]))
    modules = sorted(
        "lopside/" + p.relative_to(APP / "lopside").as_posix()
        for p in (APP / "lopside").rglob("*.py")
        if "__pycache__" not in p.parts
    )
    missing = [m for m in modules if m not in names]
    assert missing == [], f"modules missing from the wheel (list their package?): {missing}"
    with zipfile.ZipFile(built["wheel"]) as z:
        ep_name = next(n for n in z.namelist() if n.endswith(".dist-info/entry_points.txt"))
        ep = configparser.ConfigParser()
        ep.read_string(z.read(ep_name).decode("utf-8"))
        meta_name = next(n for n in z.namelist() if n.endswith(".dist-info/METADATA"))
        meta = z.read(meta_name).decode("utf-8")
    assert ep["console_scripts"]["lopside"].strip() == "lopside.cli:main"
    # the runtime dependencies the bundle and the wheel rely on are declared
    for dep in ("PySide6-Essentials", "numpy", "scipy", "matplotlib", "reportlab"):
        assert f"Requires-Dist: {dep}" in meta, dep


def test_wheel_carries_no_test_or_build_clutter(built):
    names = _names(built["wheel"])
    clutter = [n for n in names if "__pycache__" in n or n.endswith(".pyc") or "/tests/" in n]
    assert clutter == []


def test_sdist_has_sample_reviews_and_resources(tmp_path):
    """The sdist (built offline with the PEP 517 hook of the installed setuptools) carries
    the top-level sample_reviews/ and resources/, so a wheel built from it has them too."""
    pytest.importorskip("setuptools", reason="setuptools is not installed in this Python")
    src = _copy_project(tmp_path)
    out = tmp_path / "sdist"
    out.mkdir()
    code = textwrap.dedent(
        f"""
        import setuptools.build_meta as b
        print(b.build_sdist({str(out)!r}))
        """
    )
    proc = subprocess.run(
        [sys.executable, "-c", code],
        cwd=src,
        capture_output=True,
        text=True,
        timeout=300,
        env={**os.environ, "PYTHONPATH": ""},
    )
    assert proc.returncode == 0, proc.stderr[-3000:]
    sdist = out / proc.stdout.strip().splitlines()[-1]
    with tarfile.open(sdist) as t:
        names = [n.split("/", 1)[1] for n in t.getnames() if "/" in n]
    for p in (REPO / "sample_reviews").iterdir():
        assert f"sample_reviews/{p.name}" in names, p.name
    for p in (REPO / "resources").rglob("*"):
        if p.is_file():
            rel = p.relative_to(REPO).as_posix()
            assert rel in names, rel
    for f in ("pyproject.toml", "README.md", "MANIFEST.in", "app/lopside/cli/__init__.py"):
        assert f in names, f


# --- frozen-app start-up hooks (app/lopside/frozen.py) --------------------------------


@pytest.mark.parametrize(
    "platform, env, expected",
    [
        ("win32", {"LOCALAPPDATA": r"C:\Users\ann\AppData\Local"}, "Local/Lopside/Lopside/cache"),
        ("win32", {"APPDATA": r"C:\Users\ann\AppData\Roaming"}, "Roaming/Lopside/Lopside/cache"),
        ("linux", {"HOME": "/home/ann", "XDG_CACHE_HOME": "/tmp/c"}, "/tmp/c/Lopside/Lopside"),
        ("linux", {"HOME": "/home/ann"}, "/home/ann/.cache/Lopside/Lopside"),
        ("darwin", {"HOME": "/Users/ann"}, "/Users/ann/Library/Caches/Lopside/Lopside"),
    ],
)
def test_user_cache_dir_per_platform(platform, env, expected):
    from lopside.frozen import user_cache_dir

    got = user_cache_dir(env, platform).as_posix().replace("\\", "/")
    assert got.endswith(expected), got


def test_user_cache_dir_is_qt_cache_location(tmp_path):
    """The folder worked out without Qt is the one Qt itself reports (checked on this
    platform; the Windows and macOS rows above follow Qt's documented layout)."""
    code = textwrap.dedent(
        """
        from PySide6.QtCore import QCoreApplication, QStandardPaths
        from lopside.frozen import APP_NAME, ORG_NAME, user_cache_dir
        app = QCoreApplication([])
        QCoreApplication.setOrganizationName(ORG_NAME)
        QCoreApplication.setApplicationName(APP_NAME)
        qt = QStandardPaths.writableLocation(QStandardPaths.CacheLocation)
        print(qt == str(user_cache_dir()), qt, user_cache_dir())
        """
    )
    env = {
        **os.environ,
        "PYTHONPATH": str(APP),
        "HOME": str(tmp_path),
        "QT_QPA_PLATFORM": "offscreen",
    }
    env.pop("XDG_CACHE_HOME", None)
    env.pop("LOCALAPPDATA", None)
    proc = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=60
    )
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.startswith("True "), proc.stdout


def test_window_names_match_the_cache_folder_names():
    from lopside.frozen import APP_NAME, ORG_NAME
    from lopside.window import messages

    assert (messages.ORG_NAME, messages.APP_NAME) == (ORG_NAME, APP_NAME)


def test_prepare_is_a_no_op_outside_a_bundle():
    code = (
        "import os, sys; from lopside.frozen import prepare; "
        "r = prepare(); print(r, os.environ.get('MPLCONFIGDIR'))"
    )
    env = {k: v for k, v in os.environ.items() if k != "MPLCONFIGDIR"}
    env["PYTHONPATH"] = str(APP)
    proc = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=60
    )
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.strip() == "{'mplconfigdir': None, 'log': None} None"


def test_prepare_sets_matplotlib_cache_and_logs_when_stdout_is_none(tmp_path):
    """What a windowed Windows bundle meets: no stdout/stderr. After prepare(), printing,
    warnings and logging go to the per-user log file, and matplotlib uses the per-user
    configuration folder (so its font cache survives between launches)."""
    code = textwrap.dedent(
        """
        import sys
        sys.stdout = None
        sys.stderr = None
        from lopside.frozen import prepare
        r = prepare(force=True)
        print("printed after prepare")
        import logging, warnings
        logging.getLogger("lopside.test").info("logged after prepare")
        warnings.warn("warned after prepare")
        import matplotlib
        print("configdir", matplotlib.get_configdir())
        print("result", r)
        """
    )
    env = {k: v for k, v in os.environ.items() if k != "MPLCONFIGDIR"}
    env.update(PYTHONPATH=str(APP), XDG_CACHE_HOME=str(tmp_path))
    proc = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=120
    )
    assert proc.returncode == 0
    assert proc.stdout == "" and proc.stderr == ""  # nothing reached the (absent) console
    cache = tmp_path / "Lopside" / "Lopside"  # Qt's CacheLocation for this app on Linux
    log = (cache / "logs" / "lopside.log").read_text(encoding="utf-8")
    assert "printed after prepare" in log
    assert "logged after prepare" in log
    assert "warned after prepare" in log
    mpl_dir = cache / "matplotlib"
    assert f"configdir {mpl_dir}" in log
    assert mpl_dir.is_dir()


def test_bundle_entry_script_runs_the_cli_after_the_hooks(tmp_path):
    """packaging/lopside_entry.py (the bundle's entry script) runs the same ``lopside``
    command; run unfrozen here, its hooks stay out of the way."""
    entry = REPO / "packaging" / "lopside_entry.py"
    src = entry.read_text(encoding="utf-8")
    # the hooks must run before anything can import matplotlib (through lopside.cli)
    assert src.index("prepare()") < src.index("from lopside.cli import main")
    proc = subprocess.run(
        [sys.executable, str(entry), "--version"],
        capture_output=True,
        text=True,
        cwd=tmp_path,
        env={**os.environ, "PYTHONPATH": str(APP)},
        timeout=60,
    )
    from lopside import __version__

    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.strip() == f"Lopside {__version__}"


def _norm(name: str) -> str:
    # PEP 503 name normalisation: PySide6_Essentials == pyside6-essentials
    import re

    return re.sub(r"[-_.]+", "-", name).lower()


def test_bundle_pins_every_runtime_dependency():
    """packaging/requirements-bundle.txt pins (==) each dependency the wheel declares, so a
    new dependency reaches the bundle with a known version (pip check in the build script
    fails otherwise, but only when someone builds)."""
    tomllib = pytest.importorskip("tomllib", reason="Python 3.11+ reads pyproject.toml")
    import re

    declared = tomllib.loads((REPO / "pyproject.toml").read_text(encoding="utf-8"))["project"][
        "dependencies"
    ]
    names = {_norm(re.split(r"[\s<>=!~;\[]", d, maxsplit=1)[0]) for d in declared}
    import importlib.util

    spec = importlib.util.spec_from_file_location(
        "lopside_windows_readiness_pins", REPO / "packaging" / "windows_readiness.py"
    )
    readiness = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = readiness
    spec.loader.exec_module(readiness)
    # read_pins refuses anything but name==version (with an optional platform marker)
    pins = {_norm(p.name): p.version for p in readiness.read_pins()[0]}
    missing = sorted(names - pins.keys())
    assert missing == [], f"add exact pins to packaging/requirements-bundle.txt: {missing}"
    for tool in ("pyinstaller", "pyinstaller-hooks-contrib", "scipy"):
        assert tool in pins, tool
