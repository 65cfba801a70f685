"""Collect the licence texts of everything the portable bundle carries into one folder.

    python packaging/notices.py --bundle packaging/dist/Lopside --modules <PYZ-00.toc>

(``packaging/build_bundle.py`` runs it with the build environment's interpreter, whose
installed distributions are the ones PyInstaller bundled.) It writes
``<bundle>/THIRD-PARTY-NOTICES/``:

* one folder per bundled Python distribution with the licence files its metadata lists
  (``License-File``, or the LICENSE/COPYING/NOTICE files in its ``.dist-info``); for the
  two whose wheels carry none (PySide6-Essentials and shiboken6, i.e. Qt) the LGPL-3.0 and
  GPL-3.0 texts kept in ``packaging/licenses/`` and a notice saying where Qt's source is
  and how to replace the libraries;
* ``Python/``: the interpreter's own LICENSE.txt;
* ``system-libraries/``: on Linux, the Debian copyright file of each package whose shared
  libraries PyInstaller copied from the build machine (found with ``dpkg -S``);
* ``INDEX.txt``: one line per component: name, version, licence as its metadata states it,
  and the files.

A bundled Python distribution without any licence text stops the build (exit status 1,
naming it): shipping a library without its licence is not compliant. The functions work
on any list of distributions, so the tests run them against the test environment without
building a bundle.
"""

from __future__ import annotations

import argparse
import ast
import importlib.metadata as md
import os
import re
import shutil
import subprocess
import sys
import sysconfig
from collections.abc import Iterable
from dataclasses import dataclass, field
from pathlib import Path

HERE = Path(__file__).resolve().parent
LICENSES = HERE / "licenses"
FOLDER = "THIRD-PARTY-NOTICES"
INDEX = "INDEX.txt"

#: File names that are licence texts when a distribution's metadata names none.
LICENCE_NAME = re.compile(r"^(LICEN[CS]E|COPYING|NOTICE|COPYRIGHT)", re.I)

QT_NOTICE = """\
Qt {qt} and Qt for Python (PySide6 {version}, shiboken6)
==========================================================

This program uses the Qt libraries and their Python bindings PySide6 and shiboken6,
(c) The Qt Company Ltd and other contributors, under the GNU Lesser General Public
License version 3 (LGPL-3.0; its text is in LGPL-3.0.txt, and the GNU General Public
License version 3 it builds on in GPL-3.0.txt). The distributions' metadata states
"{licence}"; this program uses them under the LGPL-3.0.

The Qt and PySide6 libraries are unmodified and sit as separate shared libraries in the
_internal folder (PySide6/ and the Qt6*.dll / libQt6*.so files). You may replace them with
another build of the same version, or a compatible one, for example one you built from
modified source; the program loads whatever is there.

The source code of this exact version is published by The Qt Company and the Qt Project:
Qt at https://download.qt.io/archive/qt/ and https://code.qt.io/, PySide6 and shiboken6 at
https://download.qt.io/official_releases/QtForPython/ and https://code.qt.io/pyside/pyside-setup.
"""

#: Distributions whose wheels carry no licence file: the texts we add for them.
EXTRA_TEXTS = {
    "pyside6-essentials": ("LGPL-3.0.txt", "GPL-3.0.txt"),
    "shiboken6": ("LGPL-3.0.txt", "GPL-3.0.txt"),
}
QT_DISTRIBUTIONS = ("pyside6-essentials", "pyside6", "shiboken6")
#: Our own distribution: not a third party.
OWN = {"lopside"}


class NoticeError(RuntimeError):
    """A bundled component has no licence text; the message names each one."""


@dataclass
class Entry:
    """One line of the index."""

    name: str
    version: str
    licence: str
    kind: str  # "Python distribution", "Python", "system library"
    files: list[str] = field(default_factory=list)
    note: str = ""


def norm(name: str) -> str:
    """PEP 503 normalised name (PySide6_Essentials -> pyside6-essentials)."""
    return re.sub(r"[-_.]+", "-", name).lower()


# --- which distributions are in the bundle ------------------------------------------------


def top_level_names(dist: md.Distribution) -> set[str]:
    """The importable top-level names a distribution installs."""
    text = dist.read_text("top_level.txt")
    names = {n.strip() for n in text.splitlines() if n.strip()} if text else set()
    for f in dist.files or ():
        parts = Path(str(f)).parts
        if not parts or parts[0].endswith((".dist-info", ".data")) or parts[0] == "..":
            continue
        first = parts[0]
        if len(parts) > 1:
            names.add(first)
        elif first.endswith(".py"):
            names.add(first[:-3])
        elif re.search(r"\.(so|pyd)$", first):
            names.add(first.split(".")[0])
    return names


def bundled_distributions(
    modules: Iterable[str], dists: Iterable[md.Distribution] | None = None
) -> list[md.Distribution]:
    """The installed distributions one of whose top-level names is among ``modules``
    (module names as PyInstaller lists them, or ``sys.modules``)."""
    tops = {m.split(".")[0] for m in modules}
    seen: dict[str, md.Distribution] = {}
    for dist in md.distributions() if dists is None else dists:
        name = dist.metadata.get("Name")
        if not name or norm(name) in OWN or norm(name) in seen:
            continue
        if top_level_names(dist) & tops:
            seen[norm(name)] = dist
    return sorted(seen.values(), key=lambda d: norm(d.metadata["Name"]))


def modules_from_toc(toc: Path) -> set[str]:
    """Module names from PyInstaller's PYZ table of contents (``PYZ-00.toc``)."""
    data = ast.literal_eval(toc.read_text(encoding="utf-8"))
    return {entry[0] for entry in data[1]}


# --- licence texts ------------------------------------------------------------------------


def licence_name(dist: md.Distribution) -> str:
    """The licence as the metadata states it: License-Expression, a short License field,
    or the licence classifiers; "see the text" when it names none."""
    meta = dist.metadata
    if meta.get("License-Expression"):
        return meta["License-Expression"].strip()
    lic = (meta.get("License") or "").strip()
    if lic and "\n" not in lic and len(lic) <= 80:
        return lic
    classifiers = [
        c.split("::")[-1].strip()
        for c in meta.get_all("Classifier") or []
        if c.startswith("License ::") and "OSI Approved" != c.split("::")[-1].strip()
    ]
    return " / ".join(classifiers) or "see the text"


def licence_files(dist: md.Distribution) -> list[tuple[str, Path]]:
    """(name in the notices folder, source file) of each licence text of ``dist``."""
    out: dict[str, Path] = {}
    files = [Path(str(f)) for f in dist.files or ()]
    named = dist.metadata.get_all("License-File") or []
    for lf in named:
        for f in files:
            parts = f.parts
            if parts and parts[0].endswith(".dist-info"):
                rel = Path(*parts[1:])
                if rel.as_posix() in (lf, f"licenses/{lf}", f"license_files/{lf}"):
                    out[lf.replace("/", "__")] = Path(str(dist.locate_file(f)))
    if not out:
        for f in files:
            if f.parts and f.parts[0].endswith(".dist-info") and LICENCE_NAME.match(f.name):
                rel = Path(*f.parts[1:]).as_posix()
                out[rel.replace("/", "__")] = Path(str(dist.locate_file(f)))
    return [(name, path) for name, path in sorted(out.items()) if path.is_file()]


def python_licence() -> Path | None:
    """The interpreter's LICENSE.txt (Windows: beside python.exe; elsewhere: in the
    standard library folder)."""
    candidates = [
        Path(sys.base_prefix) / "LICENSE.txt",
        Path(sysconfig.get_paths()["stdlib"]) / "LICENSE.txt",
    ]
    for c in candidates:
        if c.is_file():
            return c
    debian = Path(f"/usr/share/doc/python{sys.version_info[0]}.{sys.version_info[1]}/copyright")
    return debian if debian.is_file() else None


# --- system libraries (Linux) -------------------------------------------------------------


def system_library_files(bundle: Path) -> list[Path]:
    """Shared libraries at the top of ``_internal`` that PyInstaller copied from the build
    machine. Links into a wheel's own folders (``PySide6/Qt/lib``, ``scipy.libs``...) are
    left out: those libraries come with the wheel, and its licence texts cover them."""
    internal = bundle / "_internal"
    pat = re.compile(r"\.so(\.\d+)*$|\.dll$", re.I)
    return sorted(
        p
        for p in internal.iterdir()
        if pat.search(p.name)
        and not p.is_symlink()
        and not p.name.lower().startswith(("libpython", "python3"))
    )


SEARCH_DIRS = ("/lib", "/usr/lib", "/lib64", "/usr/lib64", "/usr/local/lib")


def _origins(name: str) -> list[Path]:
    """Paths under which dpkg may know the library ``name`` of this machine (as found,
    resolved, and with or without the /usr prefix of a merged-/usr system)."""
    out: list[Path] = []
    for d in SEARCH_DIRS:
        root = Path(d)
        if not root.is_dir():
            continue
        for cand in [root / name, *root.glob(f"*-linux-gnu/{name}")]:
            if not cand.exists():
                continue
            for path in (cand, cand.resolve()):
                text = path.as_posix()
                variants = [text, text[4:] if text.startswith("/usr/") else "/usr" + text]
                out += [Path(v) for v in variants if Path(v) not in out]
    return out


def debian_packages(libs: Iterable[Path]) -> tuple[dict[str, list[str]], list[str]]:
    """{Debian package: [library names]} for the libraries ``dpkg -S`` knows, and the
    names of those it does not."""
    packages: dict[str, list[str]] = {}
    unknown: list[str] = []
    dpkg = shutil.which("dpkg")
    for lib in libs:
        pkg = None
        for path in _origins(lib.name) if dpkg else []:
            proc = subprocess.run([dpkg, "-S", str(path)], capture_output=True, text=True)
            if proc.returncode == 0 and ":" in proc.stdout:
                pkg = proc.stdout.split(":", 1)[0].strip()
                break
        if pkg:
            packages.setdefault(pkg, []).append(lib.name)
        else:
            unknown.append(lib.name)
    return packages, unknown


def _debian_version(pkg: str) -> str:
    if not shutil.which("dpkg-query"):
        return "?"
    proc = subprocess.run(
        ["dpkg-query", "-W", "-f", "${Version}", pkg.split(":")[0]],
        capture_output=True,
        text=True,
    )
    return proc.stdout.strip() or "?"


# --- writing ------------------------------------------------------------------------------


def _qt_version() -> str:
    try:
        from PySide6.QtCore import qVersion

        return qVersion()
    except Exception:  # noqa: BLE001 - the notice then names PySide6's version only
        return "6"


def collect(
    dest: Path,
    dists: Iterable[md.Distribution],
    *,
    system_libs: Iterable[Path] = (),
    with_python: bool = True,
) -> list[Entry]:
    """Copy every licence text into ``dest`` (replaced if it exists) and write the index.

    Raises
    ------
    NoticeError
        When a distribution (or the interpreter) has no licence text; the message names
        each, after the others have been collected.
    """
    if dest.exists():
        shutil.rmtree(dest)
    dest.mkdir(parents=True)
    entries: list[Entry] = []
    missing: list[str] = []
    for dist in dists:
        name, version = dist.metadata["Name"], dist.version
        key = norm(name)
        folder = dest / f"{name}-{version}"
        entry = Entry(name, version, licence_name(dist), "Python distribution")
        texts = licence_files(dist)
        extra = EXTRA_TEXTS.get(key, ())
        if not texts and not extra:
            missing.append(f"{name} {version}")
            continue
        folder.mkdir()
        for fname, src in texts:
            shutil.copyfile(src, folder / fname)
            entry.files.append(f"{folder.name}/{fname}")
        for fname in extra:
            shutil.copyfile(LICENSES / fname, folder / fname)
            entry.files.append(f"{folder.name}/{fname}")
        if key in QT_DISTRIBUTIONS:
            notice = folder / "NOTICE-Qt.txt"
            notice.write_text(
                QT_NOTICE.format(qt=_qt_version(), version=version, licence=entry.licence),
                encoding="utf-8",
            )
            entry.files.append(f"{folder.name}/{notice.name}")
            entry.note = "used under LGPL-3.0; replaceable libraries"
        entries.append(entry)
    if with_python:
        lic = python_licence()
        v = ".".join(map(str, sys.version_info[:3]))
        if lic is None:
            missing.append(f"Python {v} (no LICENSE.txt found)")
        else:
            (dest / "Python").mkdir()
            shutil.copyfile(lic, dest / "Python" / "LICENSE.txt")
            entries.append(Entry("Python", v, "PSF-2.0", "Python", ["Python/LICENSE.txt"]))
    libs = list(system_libs)
    if libs:
        entries += _collect_system(dest, libs)
    write_index(dest, entries)
    if missing:
        raise NoticeError(
            "no licence text for: " + "; ".join(missing) + ". Add the text to "
            "packaging/licenses/ and name it in EXTRA_TEXTS (packaging/notices.py), or "
            "leave the distribution out of the bundle."
        )
    return entries


def _collect_system(dest: Path, libs: list[Path]) -> list[Entry]:
    entries: list[Entry] = []
    if os.name == "nt":
        names = ", ".join(p.name for p in libs)
        return [
            Entry(
                "Windows system libraries",
                "-",
                "Microsoft redistribution terms",
                "system library",
                note=f"not collected on Windows: {names}",
            )
        ]
    packages, unknown = debian_packages(libs)
    root = dest / "system-libraries"
    root.mkdir()
    for pkg, names in sorted(packages.items()):
        base = pkg.split(":")[0]
        copyright_file = Path("/usr/share/doc") / base / "copyright"
        entry = Entry(
            base,
            _debian_version(base),
            "see the copyright file",
            "system library",
            note="libraries: " + ", ".join(sorted(names)),
        )
        if copyright_file.is_file():
            shutil.copyfile(copyright_file, root / f"{base}.copyright")
            entry.files.append(f"system-libraries/{base}.copyright")
        else:
            entry.note += "; no copyright file on the build machine"
        entries.append(entry)
    if unknown:
        entries.append(
            Entry(
                "libraries of unknown origin",
                "-",
                "unknown",
                "system library",
                note="not found by dpkg: " + ", ".join(sorted(unknown)),
            )
        )
    return entries


def write_index(dest: Path, entries: list[Entry]) -> Path:
    """``INDEX.txt``: a plain-text table IT can read in any editor."""
    lines = [
        "Third-party components of this Lopside folder and their licences",
        "=================================================================",
        "",
        "Each component's licence texts are in the folder named below. The licence column",
        "repeats what the component's own metadata states.",
        "",
    ]
    for kind in ("Python", "Python distribution", "system library"):
        group = [e for e in entries if e.kind == kind]
        if not group:
            continue
        lines.append(
            {
                "Python": "Python interpreter:",
                "Python distribution": "Python distributions:",
                "system library": "System libraries (Debian packages of the build machine):",
            }[kind]
        )
        for e in group:
            lines.append(f"  {e.name} {e.version}  --  {e.licence}")
            for f in e.files:
                lines.append(f"      {f}")
            if e.note:
                lines.append(f"      ({e.note})")
        lines.append("")
    path = dest / INDEX
    path.write_text("\n".join(lines), encoding="utf-8", newline="\r\n" if os.name == "nt" else "\n")
    return path


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--bundle", required=True, type=Path, help="the built bundle folder")
    ap.add_argument(
        "--modules", required=True, type=Path, help="PyInstaller's PYZ-00.toc of that build"
    )
    args = ap.parse_args(argv)
    # modules in PyInstaller's archive, plus the folders beside it: packages collected as
    # plain files (svglib, so it can be replaced) are not in the archive's list
    internal = args.bundle / "_internal"
    folders = {p.name for p in internal.iterdir() if p.is_dir()} if internal.is_dir() else set()
    dists = bundled_distributions(modules_from_toc(args.modules) | folders)
    libs = system_library_files(args.bundle)
    try:
        entries = collect(args.bundle / FOLDER, dists, system_libs=libs)
    except NoticeError as exc:
        print(f"notices: FAILED: {exc}", file=sys.stderr)
        return 1
    n_py = sum(e.kind == "Python distribution" for e in entries)
    n_sys = sum(e.kind == "system library" for e in entries)
    print(f"notices: {n_py} Python distributions, the interpreter, {n_sys} system packages")
    return 0


if __name__ == "__main__":
    sys.exit(main())
