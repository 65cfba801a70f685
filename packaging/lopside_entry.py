"""Entry script of the portable bundle: the frozen app's hooks, then the ``lopside`` command.

PyInstaller needs a script, not an entry point. The hooks must run before anything
imports matplotlib (MPLCONFIGDIR) and before anything prints (a windowed Windows build has
no stdout), so they come first and ``lopside.cli`` is imported only afterwards.
"""

import sys

from lopside.frozen import prepare

prepare()

from lopside.cli import main  # noqa: E402  (must follow prepare())

sys.exit(main())
