"""Analysis settings: one pure dataclass shared by the window, the CLI and the sheet."""

from __future__ import annotations

from dataclasses import asdict, dataclass, fields, replace
from typing import Any


@dataclass(frozen=True, slots=True)
class AnalysisSettings:
    """Options of one analysis. Defaults are documented choices (DEVELOPERS.md).

    Attributes
    ----------
    measure : str or None
        Override the review's measure (None = the review's own).
    tau2_method : str
        Between-study variance estimator for the random-effects model: "REML" (default;
        Veroniki et al. 2016 recommend REML or Paule-Mandel over DerSimonian-Laird), "PM", "DL".
    hksj : bool
        Use the modified Hartung-Knapp-Sidik-Jonkman interval for the random-effects model.
    ci_method : str
        How study CIs were computed in the paper: "z", "t" or "auto" (t when arms < 60).
    funnel_model : str
        Which pooled estimate the funnel's centre line and pseudo-limits use: "fixed" | "random".
    test_alpha : float
        Threshold for the asymmetry tests (0.10 by convention, Egger et al. 1997).
    trimfill_estimator, trimfill_side, trimfill_trim_model, trimfill_fill_model
        Trim-and-fill options (L0 | R0; auto | left | right; FE | RE; RE | FE).
    petpeese_alpha, petpeese_sided
        Level and sidedness of the PET test in the conditional PET-PEESE rule.
    selection_cutpoints : tuple of float
        One-sided p cut-points of the step-function selection model.
    selection_eta : float or None
        One more selection ratio η (≥ 1) for the sensitivity to selection, beside the
        usual 1, 2, 5, 10, 20 and 50 (Mathur & VanderWeele 2020); None = none.
    orwin_trivial : float or None
        Trivial effect for Orwin's fail-safe N, on the analysis scale (None = not run).
    power_reps, power_seed, power_selection
        Monte-Carlo settings for the power of the recommended test.
    """

    measure: str | None = None
    tau2_method: str = "REML"
    hksj: bool = False
    ci_method: str = "z"
    smd_correction: str = "exact"
    funnel_model: str = "fixed"
    test_alpha: float = 0.10
    trimfill_estimator: str = "L0"
    trimfill_side: str = "auto"
    trimfill_trim_model: str = "FE"
    trimfill_fill_model: str = "RE"
    petpeese_alpha: float = 0.10
    petpeese_sided: str = "two"
    selection_cutpoints: tuple[float, ...] = (0.025,)
    selection_eta: float | None = None
    orwin_trivial: float | None = None
    power_reps: int = 10_000
    power_seed: int = 20261201
    power_selection: float = 0.25

    def to_dict(self) -> dict[str, Any]:
        d = asdict(self)
        d["selection_cutpoints"] = list(self.selection_cutpoints)
        return d

    @classmethod
    def from_dict(cls, d: dict[str, Any] | None) -> AnalysisSettings:
        """Build from a (possibly partial or foreign) dict; unknown or ill-typed keys are ignored."""
        base = cls()
        if not d:
            return base
        changes: dict[str, Any] = {}
        for f in fields(cls):
            if f.name not in d:
                continue
            value = d[f.name]
            default = getattr(base, f.name)
            try:
                if f.name == "selection_cutpoints":
                    value = tuple(float(x) for x in value)
                elif f.name == "measure":
                    value = None if value is None else str(value)
                elif f.name in ("orwin_trivial", "selection_eta"):
                    value = None if value is None else float(value)
                    if f.name == "selection_eta" and value is not None and not value >= 1:
                        continue
                elif isinstance(default, bool):
                    if not isinstance(value, bool):
                        continue
                elif isinstance(default, int):
                    value = int(value)
                elif isinstance(default, float):
                    value = float(value)
                elif isinstance(default, str):
                    value = str(value)
            except (TypeError, ValueError):
                continue
            changes[f.name] = value
        return replace(base, **changes)
