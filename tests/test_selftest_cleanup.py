"""``lopside --self-test`` leaves nothing behind, whether it passes or fails (issue 22,
item 5: 17 work folders were left in the temp folder after one bundle build), and prints no
Qt warning that IT could take for a fault (item 8)."""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]


def test_a_passing_self_test_removes_its_work_folder(tmp_path):
    temp = tmp_path / "temp"
    temp.mkdir()
    env = {k: v for k, v in os.environ.items() if not k.startswith("PYTHON")}
    env.update(
        PYTHONPATH=str(REPO / "app"),
        TMPDIR=str(temp),
        QT_QPA_PLATFORM="offscreen",
        HOME=str(tmp_path / "home"),
        XDG_CONFIG_HOME=str(tmp_path / "config"),
        XDG_DATA_HOME=str(tmp_path / "data"),
        XDG_CACHE_HOME=str(tmp_path / "cache"),
    )
    proc = subprocess.run(
        [sys.executable, "-m", "lopside", "--self-test"],
        env=env,
        cwd=tmp_path,
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert proc.returncode == 0, proc.stdout + proc.stderr
    assert "Self-test passed." in proc.stdout
    assert str(temp) in proc.stdout  # the work folder really was in this temp folder
    assert list(temp.iterdir()) == []
    assert "propagateSizeHints" not in proc.stderr


def test_a_failing_self_test_removes_its_work_folder_too(qapp, tmp_path, monkeypatch, capsys):
    import lopside.paths
    from lopside.window.selftest import run_self_test

    temp = tmp_path / "temp"
    temp.mkdir()
    monkeypatch.setattr(tempfile, "tempdir", str(temp))
    # the self-test points these at its work folder; monkeypatch puts them back afterwards
    monkeypatch.setenv("LOPSIDE_SETTINGS_DIR", str(tmp_path / "settings"))
    monkeypatch.setenv("LOPSIDE_AUTOSAVE_DIR", str(tmp_path / "autosave"))
    monkeypatch.setenv("QT_QPA_PLATFORM", "offscreen")
    monkeypatch.setattr(lopside.paths, "sample_reviews", lambda: [])

    assert run_self_test() == 1
    out, err = capsys.readouterr()
    assert "FAILED at 'find a sample review'" in err and "no sample reviews" in err
    assert "work folder" in out
    assert list(temp.iterdir()) == []
