"""`lopside check --json` prints the keys of the contract (DESIGN.md section 3) with
numbers that agree with independent computations; bad input exits 2 with a message."""

from __future__ import annotations

import json
import math
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from statsmodels.stats.meta_analysis import combine_effects

from lopside.paths import sample_reviews

ROOT = Path(__file__).resolve().parents[1]
ENV = {**os.environ, "PYTHONPATH": str(ROOT / "app")}


def run(*args, **kw):
    return subprocess.run(
        [sys.executable, "-m", "lopside", *args],
        capture_output=True,
        text=True,
        env=ENV,
        cwd=kw.get("cwd", ROOT),
        timeout=300,
    )


POOLED_KEYS = {"estimate", "se", "ci_low", "ci_high", "p"}
RANDOM_KEYS = POOLED_KEYS | {"tau2", "method", "pi_low", "pi_high"}


@pytest.fixture(scope="module")
def outputs():
    from lopside.model.project_file import load_workbook

    out = {}
    for path in sample_reviews():
        # a workbook of several outcomes: each outcome by name (--outcome)
        names = load_workbook(path).names if path.suffix == ".lopside" else ("",)
        for name in names if len(names) > 1 else ("",):
            args = ["check", str(path), "--json"] + (["--outcome", name] if name else [])
            r = run(*args)
            assert r.returncode == 0, r.stderr
            out[f"{path.name} {name}".strip()] = json.loads(r.stdout)
    return out


def test_every_sample_prints_the_contract_keys(outputs):
    assert len(outputs) >= 5
    for name, d in outputs.items():
        for key in (
            "measure",
            "k",
            "studies",
            "pooled",
            "heterogeneity",
            "tests",
            "trim_fill",
            "applicability",
        ):
            assert key in d, (name, key)
        assert d["k"] == sum(s["included"] for s in d["studies"])
        assert {"study", "y", "se", "included"} <= set(d["studies"][0])
        assert POOLED_KEYS <= set(d["pooled"]["fixed"])
        assert RANDOM_KEYS <= set(d["pooled"]["random"])
        assert set(d["pooled"]["random_by_method"]) == {"DL", "REML", "PM"}
        for m in d["pooled"]["random_by_method"].values():
            assert RANDOM_KEYS <= set(m)
        assert {"q", "df", "p", "i2", "tau2"} <= set(d["heterogeneity"])
        assert {"intercept", "se", "t", "df", "p"} <= set(d["tests"]["egger"])
        assert {"tau", "z", "p"} <= set(d["tests"]["begg"])
        assert "harbord" in d["tests"] and "peters" in d["tests"]
        assert {"k0", "side", "estimate", "ci_low", "ci_high"} <= set(d["trim_fill"])
        assert all({"rule", "met", "detail"} <= set(r) for r in d["applicability"])


def test_numbers_agree_with_statsmodels(outputs):
    # statsmodels.stats.meta_analysis.combine_effects: FE and DL random effects
    for d in outputs.values():
        y = np.array([s["y"] for s in d["studies"] if s["included"]])
        se = np.array([s["se"] for s in d["studies"] if s["included"]])
        ref = combine_effects(y, se**2, method_re="chi2")
        assert d["pooled"]["fixed"]["estimate"] == pytest.approx(ref.mean_effect_fe, rel=1e-9)
        dl = d["pooled"]["random_by_method"]["DL"]
        assert dl["tau2"] == pytest.approx(max(ref.tau2, 0), abs=1e-10)
        if ref.tau2 > 0:
            assert dl["estimate"] == pytest.approx(ref.mean_effect_re, rel=1e-9)
        assert d["heterogeneity"]["q"] == pytest.approx(ref.q, rel=1e-9)


def test_ratio_effects_are_on_the_log_scale(outputs):
    d = outputs["delirium_vantoprine.lopside"]
    assert d["measure"] == "OR" and d["scale"] == "natural log"
    # log OR of the first study from its counts (Cochrane Handbook 5.1 section 7.7.7.3: logs)
    s = d["studies"][0]
    assert s["y"] == pytest.approx(math.log((204 * (910 - 234)) / ((910 - 204) * 234)), rel=1e-12)


def test_csv_and_project_give_the_same_numbers(outputs):
    a = outputs["delirium_vantoprine.lopside"]
    b = outputs["delirium_vantoprine.csv"]
    assert a["pooled"]["random"]["estimate"] == pytest.approx(b["pooled"]["random"]["estimate"])
    assert a["tests"]["egger"]["p"] == pytest.approx(b["tests"]["egger"]["p"])


@pytest.mark.parametrize(
    "args, fragment",
    [
        (["check", "no_such_file.lopside"], "no such file"),
        (["check", "README.md"], "Lopside opens"),
        (
            ["check", "sample_reviews/relapse_orvelimab.lopside", "--measure", "XX"],
            "invalid choice",
        ),
    ],
)
def test_bad_input_exits_2_with_a_message(args, fragment):
    r = run(*args)
    assert r.returncode == 2
    assert fragment in r.stderr
    assert "Traceback" not in r.stderr


def test_text_summary_runs_and_carries_the_caution():
    r = run("check", "sample_reviews/wound_dressings_small.lopside")
    assert r.returncode == 0, r.stderr
    assert "not proof of publication bias" in r.stdout.replace("\n", " ")
