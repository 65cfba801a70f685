"""The PySide6 window: views over :class:`lopside.session.Session`.

Design invariant: the window arranges and forwards. Every number it shows is read from the
:class:`lopside.analysis.AnalysisResult` that the session returns, and every change to the
review is an edit value pushed through the session (via the Qt undo stack). No statistics
are computed here.
"""
