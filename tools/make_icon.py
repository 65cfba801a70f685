"""Draw Lopside's icon and write it as ``resources/lopside.png`` and ``resources/lopside.ico``.

    python tools/make_icon.py [--out FOLDER]

Our own design, drawn from a few shapes in code (no image library, nothing copied): a
teal tile with a light funnel (the funnel plot's triangle, apex at the top) whose study
dots sit mostly on one side, i.e. a lopsided funnel. Colours are the figure palette's
(resources/palette.md). Every size is drawn from the shapes themselves, 4x4 supersampled,
so the 16-pixel icon is not a blurred copy of the large one. The .ico holds PNG-coded
images of 16 to 256 pixels (Windows Vista and later read these); the .png is 256 pixels
for the window and for Linux. The output is the same bytes at every run, so a test can
check that the committed files are the ones this script makes.
"""

from __future__ import annotations

import argparse
import struct
import zlib
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]
ICO_SIZES = (16, 24, 32, 48, 64, 128, 256)
PNG_SIZE = 256
SUPERSAMPLE = 4

TILE = "#2E7F75"  # BAND_EDGE
FUNNEL = "#CFE9E4"  # BAND_RAMP[1]
INNER = "#9ED2CA"  # BAND_RAMP[2]
LINE = "#1D4F49"  # BAND_TEXT
DOT = "#1F2933"  # INK

#: Shapes in a unit square (x right, y down).
APEX = (0.5, 0.16)
BASE_Y = 0.84
BASE_HALF = 0.36
#: Study dots (x, y, radius): crowded on the right, one lone dot on the left.
DOTS = (
    (0.56, 0.32, 0.045),
    (0.63, 0.47, 0.05),
    (0.71, 0.62, 0.055),
    (0.58, 0.58, 0.05),
    (0.78, 0.75, 0.055),
    (0.45, 0.40, 0.045),
)


def _rgb(hex_colour: str) -> np.ndarray:
    h = hex_colour.lstrip("#")
    return np.array([int(h[i : i + 2], 16) for i in (0, 2, 4)], dtype=float)


def _in_triangle(x, y, a, b, c):
    def side(p, q):
        return (x - q[0]) * (p[1] - q[1]) - (p[0] - q[0]) * (y - q[1])

    d1, d2, d3 = side(a, b), side(b, c), side(c, a)
    neg = (d1 < 0) | (d2 < 0) | (d3 < 0)
    pos = (d1 > 0) | (d2 > 0) | (d3 > 0)
    return ~(neg & pos)


def _near_segment(x, y, p, q, half_width):
    px, py = p
    dx, dy = q[0] - px, q[1] - py
    t = np.clip(((x - px) * dx + (y - py) * dy) / (dx * dx + dy * dy), 0, 1)
    return np.hypot(x - (px + t * dx), y - (py + t * dy)) <= half_width


def draw(size: int) -> np.ndarray:
    """The icon at ``size`` x ``size`` pixels as an RGBA uint8 array."""
    n = size * SUPERSAMPLE
    c = (np.arange(n) + 0.5) / n
    x, y = np.meshgrid(c, c)
    rgb = np.zeros((n, n, 3))
    alpha = np.zeros((n, n))

    # rounded tile
    r, m = 0.2, 0.02
    qx = np.clip(x, m + r, 1 - m - r)
    qy = np.clip(y, m + r, 1 - m - r)
    tile = np.hypot(x - qx, y - qy) <= r
    rgb[tile] = _rgb(TILE)
    alpha[tile] = 1.0

    left, right = (0.5 - BASE_HALF, BASE_Y), (0.5 + BASE_HALF, BASE_Y)
    rgb[_in_triangle(x, y, APEX, left, right) & tile] = _rgb(FUNNEL)
    inner_l = (0.5 - BASE_HALF * 0.55, BASE_Y)
    inner_r = (0.5 + BASE_HALF * 0.55, BASE_Y)
    rgb[_in_triangle(x, y, APEX, inner_l, inner_r) & tile] = _rgb(INNER)
    # the centre line, at least about one pixel wide at every size
    half = max(0.012, 0.5 / size)
    rgb[_near_segment(x, y, APEX, (0.5, BASE_Y), half)] = _rgb(LINE)
    for dx, dy, dr in DOTS:
        rgb[np.hypot(x - dx, y - dy) <= max(dr, 1.1 / size)] = _rgb(DOT)

    # average each SUPERSAMPLE x SUPERSAMPLE block (premultiplied, then un-premultiplied)
    s = SUPERSAMPLE
    pre = (rgb * alpha[..., None]).reshape(size, s, size, s, 3).mean(axis=(1, 3))
    a = alpha.reshape(size, s, size, s).mean(axis=(1, 3))
    out = np.zeros((size, size, 4))
    nz = a > 0
    out[nz, :3] = pre[nz] / a[nz, None]
    out[..., 3] = a * 255
    return np.round(out).clip(0, 255).astype(np.uint8)


def png_bytes(rgba: np.ndarray) -> bytes:
    """A PNG file (8-bit RGBA, no filtering, fixed compression) of ``rgba``."""
    h, w, _ = rgba.shape

    def chunk(kind: bytes, data: bytes) -> bytes:
        return (
            struct.pack(">I", len(data))
            + kind
            + data
            + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF)
        )

    raw = b"".join(b"\x00" + rgba[row].tobytes() for row in range(h))
    return (
        b"\x89PNG\r\n\x1a\n"
        + chunk(b"IHDR", struct.pack(">IIBBBBB", w, h, 8, 6, 0, 0, 0))
        + chunk(b"IDAT", zlib.compress(raw, 9))
        + chunk(b"IEND", b"")
    )


def ico_bytes(images: dict[int, bytes]) -> bytes:
    """An .ico file whose entries are the given PNG images (size -> PNG bytes)."""
    sizes = sorted(images)
    header = struct.pack("<HHH", 0, 1, len(sizes))
    offset = len(header) + 16 * len(sizes)
    entries, blobs = b"", b""
    for size in sizes:
        data = images[size]
        dim = 0 if size >= 256 else size  # 0 means 256 in an icon directory
        entries += struct.pack("<BBBBHHII", dim, dim, 0, 0, 1, 32, len(data), offset)
        blobs += data
        offset += len(data)
    return header + entries + blobs


def write_icons(out: Path) -> tuple[Path, Path]:
    out.mkdir(parents=True, exist_ok=True)
    png = out / "lopside.png"
    ico = out / "lopside.ico"
    png.write_bytes(png_bytes(draw(PNG_SIZE)))
    ico.write_bytes(ico_bytes({s: png_bytes(draw(s)) for s in ICO_SIZES}))
    return png, ico


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", type=Path, default=REPO / "resources", help="folder to write to")
    args = ap.parse_args(argv)
    for p in write_icons(args.out):
        print(f"wrote {p} ({p.stat().st_size} bytes)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
