"""Colour-vision-deficiency check of the funnel's marker colours (a script and a helper).

Simulates protanopia, deuteranopia and tritanopia with the linear-RGB matrices of
Machado, Oliveira & Fernandes (2009, IEEE TVCG 15:1291), severity 1.0 (values from
memory; each row sums to 1, which the tests check), and reports the CIELAB distance
(ΔE*ab, CIE 1976) between every pair of marker classes under normal vision and each
simulation. Used by tests/test_palette_cvd.py and documented in resources/palette.md.

    PYTHONPATH=app python tools/palette_cvd.py
"""

from __future__ import annotations

import itertools

import numpy as np

SIMULATIONS: dict[str, np.ndarray] = {
    "normal": np.eye(3),
    "protanopia": np.array(
        [
            [0.152286, 1.052583, -0.204868],
            [0.114503, 0.786281, 0.099216],
            [-0.003882, -0.048116, 1.051998],
        ]
    ),
    "deuteranopia": np.array(
        [
            [0.367322, 0.860646, -0.227968],
            [0.280085, 0.672501, 0.047413],
            [-0.011820, 0.042940, 0.968881],
        ]
    ),
    "tritanopia": np.array(
        [
            [1.255528, -0.076749, -0.178779],
            [-0.078411, 0.930809, 0.147602],
            [0.004733, 0.691367, 0.303900],
        ]
    ),
}


def _linear(hex_colour: str) -> np.ndarray:
    c = np.array([int(hex_colour[i : i + 2], 16) / 255.0 for i in (1, 3, 5)])
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def _lab(linear_rgb: np.ndarray) -> np.ndarray:
    m = np.array(
        [
            [0.4124564, 0.3575761, 0.1804375],
            [0.2126729, 0.7151522, 0.0721750],
            [0.0193339, 0.1191920, 0.9503041],
        ]
    )
    xyz = m @ np.clip(linear_rgb, 0.0, 1.0) / np.array([0.95047, 1.0, 1.08883])
    f = np.where(xyz > (6 / 29) ** 3, np.cbrt(xyz), xyz / (3 * (6 / 29) ** 2) + 4 / 29)
    return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])


def simulated_lab(hex_colour: str, vision: str) -> np.ndarray:
    return _lab(SIMULATIONS[vision] @ _linear(hex_colour))


def delta_e(a: str, b: str, vision: str) -> float:
    return float(np.linalg.norm(simulated_lab(a, vision) - simulated_lab(b, vision)))


def marker_classes() -> dict[str, tuple[str, str]]:
    """Every marker class of the funnel: name -> (colour, marker)."""
    from lopside.figures import style

    out = {"study": (style.INK, style.STUDY_MARKER)}
    out["imputed by trim and fill"] = (style.TRIMFILL, style.FILLED_MARKER)
    out["excluded"] = (style.EXCLUDED, style.EXCLUDED_MARKER)
    for level, (colour, marker) in style.RISK_OF_BIAS_STYLE.items():
        out[f"risk of bias: {level or 'not stated'}"] = (colour, marker)
    return out


def table() -> list[tuple[str, str, dict[str, float]]]:
    classes = marker_classes()
    rows = []
    for (a, (ca, _)), (b, (cb, _)) in itertools.combinations(classes.items(), 2):
        rows.append((a, b, {v: delta_e(ca, cb, v) for v in SIMULATIONS}))
    return rows


def main() -> None:
    print(f"{'pair':<62}" + "".join(f"{v[:6]:>8}" for v in SIMULATIONS))
    for a, b, d in table():
        print(f"{a + ' / ' + b:<62}" + "".join(f"{d[v]:8.1f}" for v in SIMULATIONS))


if __name__ == "__main__":
    main()
