"""Windows version resources of the two executables (read by lopside.spec).

A named, versioned executable is less suspicious to antivirus heuristics than one with
PyInstaller's defaults, and each exe must say what it is: before this, both said
``Lopside.exe``. :func:`version_resource` returns the text PyInstaller's ``version=``
option reads (a ``VSVersionInfo(...)`` expression), so it can be checked without Windows.
"""

from __future__ import annotations

import re

COMPANY = "Lopside team"
PRODUCT = "Lopside"
#: exe name (without .exe) -> file description shown in Explorer and Task Manager
EXECUTABLES = {
    "Lopside": "Lopside - offline appraisal of small-study effects (window)",
    "lopside-cli": "Lopside command line - check, sheet, plot, self-test",
}


def version_tuple(version: str) -> tuple[int, int, int, int]:
    """'0.1.0' -> (0, 1, 0, 0); a suffix such as 'rc1' or '.dev3' is dropped."""
    parts = [int(x) for x in re.findall(r"\d+", version.split("+")[0])[:3]]
    return tuple((parts + [0, 0, 0, 0])[:4])  # type: ignore[return-value]


def version_resource(exe: str, version: str) -> str:
    """The version resource of ``exe`` ('Lopside' or 'lopside-cli') for PyInstaller."""
    v = version_tuple(version)
    description = EXECUTABLES[exe]
    return f"""VSVersionInfo(
  ffi=FixedFileInfo(filevers={v}, prodvers={v}, mask=0x3f, flags=0x0, OS=0x40004,
                    fileType=0x1, subtype=0x0, date=(0, 0)),
  kids=[
    StringFileInfo([StringTable('040904B0', [
      StringStruct('CompanyName', {COMPANY!r}),
      StringStruct('FileDescription', {description!r}),
      StringStruct('FileVersion', {version!r}),
      StringStruct('InternalName', {exe!r}),
      StringStruct('OriginalFilename', {exe + ".exe"!r}),
      StringStruct('ProductName', {PRODUCT!r}),
      StringStruct('ProductVersion', {version!r})])]),
    VarFileInfo([VarStruct('Translation', [1033, 1200])])
  ]
)
"""
