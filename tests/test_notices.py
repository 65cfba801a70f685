"""The bundle's THIRD-PARTY-NOTICES collector (packaging/notices.py), run against this
test environment instead of a built bundle (issue 22, item 2)."""

from __future__ import annotations

import importlib.metadata as md
import importlib.util
import json
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]


def _load():
    spec = importlib.util.spec_from_file_location(
        "lopside_notices", REPO / "packaging" / "notices.py"
    )
    mod = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = mod  # dataclasses look their module up there
    spec.loader.exec_module(mod)
    return mod


notices = _load()


@pytest.fixture(scope="module")
def app_modules() -> set[str]:
    """Top-level modules loaded by the CLI, the sheet, the figures and the window: what
    PyInstaller's import scan finds from the same entry points."""
    code = (
        "import sys, json\n"
        "import lopside.cli, lopside.analysis, lopside.sheet, lopside.figures.funnel\n"
        "import lopside.intake.table, lopside.window.main_window\n"
        "from lopside.analysis import analyse\n"
        "import svglib.svglib, matplotlib.backends.backend_agg, scipy.stats, openpyxl\n"
        "print(json.dumps(sorted({m.split('.')[0] for m in sys.modules})))\n"
    )
    proc = subprocess.run(
        [sys.executable, "-c", code],
        capture_output=True,
        text=True,
        timeout=300,
        env={
            "PYTHONPATH": str(REPO / "app"),
            "QT_QPA_PLATFORM": "offscreen",
            "PATH": "/usr/bin:/bin",
        },
    )
    assert proc.returncode == 0, proc.stderr
    return set(json.loads(proc.stdout))


def test_every_distribution_the_app_loads_gets_its_licence_text(tmp_path, app_modules):
    dists = notices.bundled_distributions(app_modules)
    names = {notices.norm(d.metadata["Name"]) for d in dists}
    # the libraries the bundle is known to carry (packaging/requirements-bundle.txt)
    for must in (
        "pyside6-essentials",
        "shiboken6",
        "numpy",
        "scipy",
        "matplotlib",
        "reportlab",
        "openpyxl",
        "svglib",
        "lxml",
        "pillow",
    ):
        assert must in names, must
    assert "pytest" not in names and "lopside" not in names
    entries = notices.collect(tmp_path / "N", dists)
    by_name = {notices.norm(e.name): e for e in entries}
    for d in dists:
        e = by_name[notices.norm(d.metadata["Name"])]
        assert e.files, e.name
        for f in e.files:
            assert (tmp_path / "N" / f).stat().st_size > 100, f
    index = (tmp_path / "N" / "INDEX.txt").read_text(encoding="utf-8")
    for d in dists:
        assert f"{d.metadata['Name']} {d.version}  --  " in index
    qt = by_name["pyside6-essentials"]
    folder = tmp_path / "N" / f"{qt.name}-{qt.version}"
    assert "GNU LESSER GENERAL PUBLIC LICENSE" in (folder / "LGPL-3.0.txt").read_text()
    assert "GNU GENERAL PUBLIC LICENSE" in (folder / "GPL-3.0.txt").read_text()
    assert "replace" in (folder / "NOTICE-Qt.txt").read_text()
    # the interpreter's own licence
    assert (
        "python" in by_name
        and "PYTHON SOFTWARE FOUNDATION"
        in (tmp_path / "N" / "Python" / "LICENSE.txt")
        .read_text(encoding="utf-8", errors="replace")
        .upper()
    )
    # a licence as the metadata states it, not from memory
    assert by_name["svglib"].licence == md.distribution("svglib").metadata["License-Expression"]


def _fake_dist(root: Path, name: str, files: dict[str, str]) -> md.Distribution:
    info = root / f"{name}-1.0.dist-info"
    info.mkdir(parents=True)
    (info / "METADATA").write_text(f"Metadata-Version: 2.1\nName: {name}\nVersion: 1.0\n")
    record = [f"{info.name}/METADATA,,"]
    for rel, text in files.items():
        p = root / rel
        p.parent.mkdir(parents=True, exist_ok=True)
        p.write_text(text)
        record.append(f"{rel},,")
    (info / "RECORD").write_text("\n".join(record) + "\n")
    return md.PathDistribution(info)


def test_a_bundled_distribution_without_a_licence_text_fails_the_build(tmp_path):
    good = _fake_dist(
        tmp_path / "site",
        "goodlib",
        {
            "goodlib/__init__.py": "",
            "goodlib-1.0.dist-info/LICENSE": "MIT licence text " * 20,
        },
    )
    bare = _fake_dist(tmp_path / "site", "barelib", {"barelib/__init__.py": ""})
    assert notices.top_level_names(bare) == {"barelib"}
    picked = notices.bundled_distributions({"barelib.core", "goodlib", "os"}, [good, bare])
    assert [d.metadata["Name"] for d in picked] == ["barelib", "goodlib"]
    with pytest.raises(notices.NoticeError, match="barelib 1.0"):
        notices.collect(tmp_path / "N", picked, with_python=False)
    # the others were still collected, and the index was written
    assert (tmp_path / "N" / "goodlib-1.0" / "LICENSE").is_file()
    assert "goodlib 1.0" in (tmp_path / "N" / "INDEX.txt").read_text()


@pytest.mark.skipif(not shutil.which("dpkg"), reason="needs dpkg (Debian/Ubuntu)")
def test_system_libraries_get_their_debian_copyright_file(tmp_path):
    internal = tmp_path / "bundle" / "_internal"
    internal.mkdir(parents=True)
    # a library PyInstaller copies from the build machine for Qt's X11 plugin
    (internal / "libxcb.so.1").write_bytes(b"")
    (internal / "libnot-a-real-library.so.3").write_bytes(b"")
    libs = notices.system_library_files(tmp_path / "bundle")
    assert [p.name for p in libs] == ["libnot-a-real-library.so.3", "libxcb.so.1"]
    entries = notices.collect(tmp_path / "N", [], system_libs=libs, with_python=False)
    xcb = next(e for e in entries if e.name == "libxcb1")
    assert xcb.files == ["system-libraries/libxcb1.copyright"]
    assert (tmp_path / "N" / xcb.files[0]).read_text().strip()
    unknown = next(e for e in entries if e.licence == "unknown")
    assert "libnot-a-real-library.so.3" in unknown.note


def test_the_build_step_reads_pyinstallers_module_list(tmp_path):
    """notices.py as build_bundle.py runs it: a bundle folder and PyInstaller's PYZ toc."""
    bundle = tmp_path / "Lopside"
    (bundle / "_internal").mkdir(parents=True)
    # a package collected as plain .py files is a folder, not in the archive's list
    (bundle / "_internal" / "svglib").mkdir()
    toc = tmp_path / "PYZ-00.toc"
    toc.write_text(
        repr(("PYZ-00.pyz", [("numpy", "/x", "PYMODULE"), ("numpy.linalg", "/y", "PYMODULE")])),
        encoding="utf-8",
    )
    assert notices.main(["--bundle", str(bundle), "--modules", str(toc)]) == 0
    index = (bundle / "THIRD-PARTY-NOTICES" / "INDEX.txt").read_text(encoding="utf-8")
    assert f"numpy {md.version('numpy')}  --  " in index
    assert f"svglib {md.version('svglib')}  --  LGPL-3.0" in index
    assert "scipy" not in index  # not in this module list, so not in this bundle
