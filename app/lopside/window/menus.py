"""The main window's menus: File, Edit, Outcome, View, Help, built from its actions.

A mixin of :class:`lopside.window.main_window.MainWindow` (``self`` is the window).
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtGui import QAction, QKeySequence


class MenuActions:
    """Methods of the main window (see the module docstring)."""

    def _action(self, text: str, slot, shortcut=None, tip: str = "") -> QAction:
        a = QAction(text, self)
        if shortcut is not None:
            a.setShortcut(QKeySequence(shortcut))
        if tip:
            a.setStatusTip(tip)
            a.setToolTip(tip)
        a.triggered.connect(lambda _checked=False: slot())
        return a

    def _build_menus(self) -> None:
        mb = self.menuBar()
        f = mb.addMenu("&File")
        self.act_new = self._action("&New review", self.new_review, QKeySequence.New)
        self.act_open = self._action(
            "&Open\u2026",
            self.open_dialog,
            QKeySequence.Open,
            "Open a project, CSV/XLSX study table or pasted .txt",
        )
        f.addAction(self.act_new)
        f.addAction(self.act_open)
        self.samples_menu = f.addMenu("Open a s&ample review (invented)")
        self.samples_menu.aboutToShow.connect(self._fill_samples)
        self.recent_menu = f.addMenu("Open &recent")
        self.recent_menu.aboutToShow.connect(self._fill_recent)
        f.addSeparator()
        self.act_save = self._action("&Save", self.save, QKeySequence.Save)
        self.act_save_as = self._action("Sa&ve as\u2026", self.save_as, QKeySequence.SaveAs)
        f.addAction(self.act_save)
        f.addAction(self.act_save_as)
        f.addSeparator()
        self.act_sheet = self._action(
            "&Export appraisal sheet (PDF)\u2026", self.export_sheet, "Ctrl+Shift+E"
        )
        self.act_figure = self._action(
            "Export the &figure shown\u2026", self.export_figure, "Ctrl+Shift+F"
        )
        self.act_copy_funnel = self._action(
            "&Copy the funnel plot as an image", self.copy_funnel, "Ctrl+Shift+C"
        )
        self.act_print = self._action(
            "&Print the funnel plot\u2026", self.print_funnel, QKeySequence.Print
        )
        self.act_panel = self._action(
            "Export the panel s&ummary of all outcomes\u2026", self.export_panel
        )
        self.act_slide = self._action("Export a &journal-club slide\u2026", self.export_slide)
        for a in (
            self.act_sheet,
            self.act_figure,
            self.act_copy_funnel,
            self.act_print,
            self.act_panel,
            self.act_slide,
        ):
            f.addAction(a)
        f.addSeparator()
        f.addAction(self._action("&Quit", self.close, QKeySequence.Quit))

        e = mb.addMenu("&Edit")
        self.act_undo = self.stack.createUndoAction(self, "&Undo")
        self.act_undo.setShortcut(QKeySequence.Undo)
        self.act_redo = self.stack.createRedoAction(self, "&Redo")
        self.act_redo.setShortcut(QKeySequence.Redo)
        e.addAction(self.act_undo)
        e.addAction(self.act_redo)
        e.addSeparator()
        s = self.studies
        e.addAction(
            self._action("&Paste rows from a paper\u2026", self.open_paste_dialog, "Ctrl+Shift+V")
        )
        e.addAction(self._action("&Add a row", s.add_row, "Ctrl+Shift+N"))
        e.addAction(self._action("Dupli&cate rows", s.duplicate_rows, "Ctrl+D"))
        e.addAction(self._action("&Delete rows", s.delete_rows, "Ctrl+Shift+Del"))
        e.addAction(self._action("Mo&ve row up", lambda: s.move_current(-1), "Ctrl+Shift+Up"))
        e.addAction(self._action("Move row do&wn", lambda: s.move_current(1), "Ctrl+Shift+Down"))
        e.addAction(self._action("&Leave out / bring back", s.toggle_exclude, "Ctrl+E"))

        mb.addMenu(self.outcomes.menu)

        v = mb.addMenu("&View")
        v.addAction(self._action("The &study table", lambda: self._show_left(0), "Ctrl+Shift+T"))
        v.addAction(self._action("The review &details", lambda: self._show_left(1), "Ctrl+Shift+R"))
        v.addSeparator()
        for i in range(self.views.count()):
            v.addAction(
                self._action(self.views.tabText(i), lambda i=i: self._show_view(i), f"Ctrl+{i + 1}")
            )

        h = mb.addMenu("&Help")
        h.addAction(self._action("&Methods guide", self.show_guide, QKeySequence.HelpContents))
        h.addAction(self._action("&About Lopside", self.show_about))

    def _fill_samples(self) -> None:
        from ..paths import sample_reviews

        self.samples_menu.clear()
        try:
            samples = sample_reviews()
        except OSError:
            samples = []
        if not samples:
            a = self.samples_menu.addAction("(no sample reviews installed)")
            a.setEnabled(False)
        for p in samples:
            self.samples_menu.addAction(p.name, lambda p=p: self.open_sample(p))

    def _fill_recent(self) -> None:
        self.recent_menu.clear()
        items = self.prefs.recent_files()
        if not items:
            a = self.recent_menu.addAction("(none yet)")
            a.setEnabled(False)
        for i, p in enumerate(items):
            self.recent_menu.addAction(f"&{i + 1} {Path(p).name}", lambda p=p: self.open_path(p))
