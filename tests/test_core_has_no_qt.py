"""The core imports no Qt (STYLE.md item 1): import it with PySide6 blocked."""

import subprocess
import sys
import textwrap
from pathlib import Path

APP = Path(__file__).resolve().parents[1] / "app"

CORE = [
    "lopside.model.review",
    "lopside.model.project_file",
    "lopside.settings",
    "lopside.analysis",
    "lopside.report",
    "lopside.cli",
    "lopside.cli_common",
    "lopside.intake",
    "lopside.stats.effects",
    "lopside.stats.pooling",
    "lopside.stats.asymmetry",
    "lopside.stats.adjust",
    "lopside.figures",
    "lopside.appraise",
    "lopside.sheet",
    "lopside.summary",
    "lopside.words.numbers",
    "lopside.words.rows",
    "lopside.words.sentences",
    "lopside.assessment",
    "lopside.contradictions",
]


def test_core_imports_without_qt():
    code = textwrap.dedent(
        f"""
        import sys, importlib, importlib.abc
        class Block(importlib.abc.MetaPathFinder):
            def find_spec(self, name, path, target=None):
                if name.split('.')[0] in ('PySide6', 'shiboken6', 'PyQt5', 'PyQt6'):
                    raise ImportError('Qt is blocked in the core: ' + name)
        sys.meta_path.insert(0, Block())
        sys.path.insert(0, {str(APP)!r})
        for m in {CORE!r}:
            importlib.import_module(m)
        import lopside.analysis as a
        from lopside.paths import sample_reviews
        from lopside.cli_common import load_review_file
        review, _ = load_review_file(sample_reviews()[0])
        a.analyse(review)
        from lopside.assessment import assess
        from lopside.report import to_json
        to_json(assess(review))
        assert not any(k.startswith('PySide6') for k in sys.modules)
        print('ok')
        """
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip().endswith("ok")
