"""What can be proven about Windows without a Windows PC (issue 22, item 8): the code scan,
the pins, the exes' version resources and icon, the build's hidden-import rule.

The pip download of every pin for win_amd64 needs the package index, so it runs in
.ci/run (``python packaging/windows_readiness.py --download``), not here.
"""

from __future__ import annotations

import ast
import importlib.util
import struct
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]


def _load(name: str, path: Path):
    spec = importlib.util.spec_from_file_location(name, path)
    mod = importlib.util.module_from_spec(spec)
    sys.modules[name] = mod
    spec.loader.exec_module(mod)
    return mod


readiness = _load("lopside_windows_readiness", REPO / "packaging" / "windows_readiness.py")
winres = _load("lopside_winres", REPO / "packaging" / "winres.py")
make_icon = _load("lopside_make_icon", REPO / "tools" / "make_icon.py")


def test_the_app_has_no_windows_hostile_code():
    findings = readiness.scan()
    assert [str(f) for f in findings] == []


HOSTILE = """
import os, signal, fcntl
from pathlib import Path

def run(p: Path):
    pid = os.fork()
    signal.signal(signal.SIGHUP, None)
    signal.alarm(3)
    log = "/tmp/lopside.log"
    f = open(p, "w")
    text = p.read_text()
    p.write_text("x")
    if p.suffix == ".csv":
        pass
    ok = open(p, "rb"), open(p, "w", encoding="utf-8"), p.read_text(encoding="utf-8")
    waived = "/tmp/x"  # windows-ok: only in a POSIX-only test helper
    return p.suffix.lower() == ".csv"
"""


def test_the_scan_finds_each_kind_of_windows_hostile_code():
    found = readiness.scan_source(HOSTILE, "intake/example.py")
    rules = sorted((f.line, f.rule) for f in found)
    assert rules == [
        (2, "posix-module"),
        (6, "posix-call"),
        (7, "posix-signal"),
        (8, "posix-signal"),
        (9, "posix-path"),
        (10, "encoding"),
        (11, "encoding"),
        (12, "encoding"),
        (13, "path-case"),
    ]


def test_the_scan_finds_console_output_in_the_window_only():
    code = "import sys\nprint('x')\nsys.stdout.write('y')\n"
    assert [f.rule for f in readiness.scan_source(code, "window/panel.py")] == [
        "console-output",
        "console-output",
    ]
    assert readiness.scan_source(code, "cli.py") == []


def test_every_pin_is_exact_and_the_build_tools_are_pinned():
    pins, python = readiness.read_pins()
    assert python == "3.11"
    by_name = {p.name.lower(): p for p in pins}
    for tool in ("pip", "setuptools", "pyinstaller", "pyinstaller-hooks-contrib", "scipy"):
        assert tool in by_name, tool
    # PyInstaller's Windows-only dependencies, marked so Linux builds skip them
    for tool in ("pefile", "pywin32-ctypes"):
        assert "win32" in by_name[tool].marker and by_name[tool].for_windows()
    assert "pandas" not in by_name  # not a dependency any more
    assert all(p.for_windows() for p in pins)  # nothing is Linux-only


def test_read_pins_refuses_a_loose_pin(tmp_path):
    f = tmp_path / "req.txt"
    f.write_text("# bundle-python: 3.11\nnumpy>=2\n", encoding="utf-8")
    with pytest.raises(ValueError, match="not an exact pin"):
        readiness.read_pins(f)
    f.write_text("numpy==2.0\n", encoding="utf-8")
    with pytest.raises(ValueError, match="bundle-python"):
        readiness.read_pins(f)


def _strings(resource: str) -> dict[str, str]:
    tree = ast.parse(resource, mode="eval")
    out = {}
    for node in ast.walk(tree):
        if isinstance(node, ast.Call) and getattr(node.func, "id", "") == "StringStruct":
            key, value = (a.value for a in node.args)
            out[key] = value
    return out


def test_each_exe_has_its_own_version_resource():
    gui = _strings(winres.version_resource("Lopside", "0.1.0"))
    cli = _strings(winres.version_resource("lopside-cli", "0.1.0"))
    assert gui["OriginalFilename"] == "Lopside.exe" and gui["InternalName"] == "Lopside"
    assert cli["OriginalFilename"] == "lopside-cli.exe" and cli["InternalName"] == "lopside-cli"
    assert gui["FileDescription"] != cli["FileDescription"]
    assert gui["FileVersion"] == cli["ProductVersion"] == "0.1.0"
    assert winres.version_tuple("1.2.3rc1") == (1, 2, 3, 0)
    assert winres.version_tuple("2.0") == (2, 0, 0, 0)


def test_the_spec_gives_each_exe_its_resource_and_our_icon():
    spec = (REPO / "packaging" / "lopside.spec").read_text(encoding="utf-8")
    assert 'version=_version_file("Lopside")' in spec
    assert 'version=_version_file("lopside-cli")' in spec
    assert '"lopside.ico"' in spec


def test_the_committed_icon_is_the_one_our_script_draws(tmp_path):
    png, ico = make_icon.write_icons(tmp_path)
    assert (REPO / "resources" / "lopside.png").read_bytes() == png.read_bytes()
    assert (REPO / "resources" / "lopside.ico").read_bytes() == ico.read_bytes()


def test_the_icon_files_are_valid():
    data = (REPO / "resources" / "lopside.ico").read_bytes()
    reserved, kind, count = struct.unpack_from("<HHH", data, 0)
    assert (reserved, kind) == (0, 1) and count == len(make_icon.ICO_SIZES)
    sizes = []
    for i in range(count):
        w, h, _, _, planes, bpp, size, offset = struct.unpack_from("<BBBBHHII", data, 6 + 16 * i)
        blob = data[offset : offset + size]
        assert blob.startswith(b"\x89PNG\r\n\x1a\n") and (planes, bpp) == (1, 32)
        pw, ph = struct.unpack_from(">II", blob, 16)  # the PNG's own IHDR
        assert (pw, ph) == ((w or 256), (h or 256))
        sizes.append(pw)
    assert sizes == sorted(make_icon.ICO_SIZES) and {16, 32, 48, 256} <= set(sizes)


def test_qt_reads_both_icon_files(qapp):
    from PySide6.QtGui import QImage, QImageReader

    png = QImage(str(REPO / "resources" / "lopside.png"))
    assert not png.isNull() and (png.width(), png.height()) == (256, 256)
    # the corner is transparent (a rounded tile), the middle is not
    assert png.pixelColor(0, 0).alpha() == 0 and png.pixelColor(128, 200).alpha() == 255
    if b"ico" in [bytes(f) for f in QImageReader.supportedImageFormats()]:
        assert not QImage(str(REPO / "resources" / "lopside.ico")).isNull()


def test_a_missing_hidden_import_fails_the_build_unless_known_and_truly_absent():
    build = _load("lopside_build_bundle", REPO / "packaging" / "build_bundle.py")
    log = (
        '123 WARNING: Hidden import "scipy.special._cdflib" not found!\n'
        "456 WARNING: Hidden import 'lopside.sheet.layout' not found!\n"
    )
    assert build.missing_hidden_imports(log, exists=lambda name: False) == ["lopside.sheet.layout"]
    # a module listed as known-absent that exists after all fails again
    assert build.missing_hidden_imports(log, exists=lambda name: True) == [
        "scipy.special._cdflib",
        "lopside.sheet.layout",
    ]
    assert build.missing_hidden_imports("nothing to see\n", exists=lambda n: False) == []
