"""The tests for small-study effects: every registered test with the recommended one marked,
when a test can be trusted here, what the review itself claimed, and the test's power."""

from __future__ import annotations

from ..stats.results import is_pending
from ..words.numbers import (
    fmt_num,
    fmt_p,
    fmt_share,
    is_finite,
    is_ok,
    missing_word,
    plural,
    why_not,
)
from ..words.rows import _test_result_text, recommended_key
from ..words.sentences import rule_detail
from .section import Section


def tests_section(result) -> Section:
    """All registered tests; the recommended one marked."""
    try:
        from ..stats.asymmetry import REGISTRY
    except ImportError:  # pragma: no cover
        REGISTRY = {}
    rec = result.recommendation
    rkey = recommended_key(result)
    alts = set(rec.alternatives) if is_ok(rec) else set()
    header = ("Test", "Result", "p", "Studies", "Note")
    rows: list[tuple[str, ...]] = []
    emphasis = []
    other_measure = []
    for key, t in result.tests.items():
        spec = REGISTRY.get(key)
        name = getattr(t, "name", None) or (spec.name if spec else key)
        if spec is not None and result.measure not in spec.suits and key != rkey:
            other_measure.append(name)
            continue
        role = ""
        if key == rkey:
            role = "recommended" + (" (exploratory)" if rec.exploratory else "")
            emphasis.append(len(rows))
        elif key in alts:
            role = "also suited"
        if is_ok(t):
            dropped = getattr(t, "dropped", ()) or ()
            if dropped:
                aside = f"{plural(len(dropped), 'study', 'studies')} set aside ({dropped[0][1]})"
                role = f"{role}; {aside}" if role else aside
            rows.append((name, _test_result_text(t), fmt_p(t.pvalue), str(t.k_used), role))
        elif is_pending(t):
            rows.append((name, missing_word(t), "", "", role))
        else:
            note = f"{role}: {why_not(t)}" if role else why_not(t)
            rows.append((name, "not computed", "", "", note))
    notes = []
    if is_ok(rec):
        notes.append(f"Why this test: {rec.reason}.")
        if rec.options:
            opt = dict(rec.options)
            t = result.tests.get(rec.key)
            if opt.get("random") and not (is_ok(t) and "random" in (t.name or "").lower()):
                notes.append(
                    "The random-effects version of the recommended test was asked for, but the "
                    "table shows the version the engine ran."
                )
    else:
        notes.append(f"No test recommended: {why_not(rec)}.")
    if other_measure:
        notes.append(
            "Not shown, as they are meant for other measures: " + ", ".join(other_measure) + "."
        )
    alpha = result.settings.test_alpha
    notes.append(
        f"A p-value below {fmt_num(alpha, 2)} is the usual signal of asymmetry (these tests have "
        "little power; Egger et al. 1997). A larger p-value does not rule asymmetry out."
    )
    return Section(
        "tests",
        "Tests for small-study effects",
        tuple(rows),
        header=header,
        notes=tuple(notes),
        emphasis=tuple(emphasis),
        widths=(1.9, 1.4, 0.6, 0.6, 2.6),
    )


# not a pytest test, despite the name (test modules import it)
tests_section.__test__ = False  # type: ignore[attr-defined]


def applicability_section(result) -> Section:
    """When a test is worth reading (Ioannidis & Trikalinos 2007; Sterne et al. 2011)."""
    word = {True: "yes", False: "NO", None: "cannot tell"}
    rows = tuple(
        (r.title, word.get(r.met, str(r.met)), rule_detail(r, result)) for r in result.applicability
    )
    failed = [i for i, r in enumerate(result.applicability) if r.met is False]
    notes = (
        "Conditions for a meaningful test (Ioannidis & Trikalinos 2007; Sterne et al. 2011). "
        "Where one is not met, read the tests with extra caution.",
    )
    return Section(
        "applicability",
        "Can the tests be trusted here?",
        rows,
        header=("Condition", "Met", "Detail"),
        notes=notes,
        emphasis=tuple(failed),
        widths=(2.2, 0.7, 4.0),
    )


def review_claim_section(result) -> Section | None:
    """What the review said about small-study effects beside Lopside's reading (or None)."""
    from ..appraise.claim import compare_claim

    c = compare_claim(result)
    if c is None:
        return None
    rows = (
        ("The review said", c.said),
        ("Its test for these data", c.applicable),
        ("Power here", c.power),
        ("Lopside's reading", c.agreement),
        ("Verdict", c.verdict),
    )
    return Section(
        "review_claim", "What the review itself said about small-study effects", rows,
        emphasis=(4,),
    )  # fmt: skip


def power_section(result) -> Section:
    """Monte-Carlo power of the recommended test for these SEs, if it was run."""
    pw = result.power
    if pw is None:
        return Section(
            "power",
            "Power of the test for this review",
            (("Power", "not simulated (run with the power option)"),),
        )
    if not is_ok(pw):
        return Section("power", "Power of the test for this review", (("Power", why_not(pw)),))
    rows = []
    t1 = getattr(pw, "type1", None)
    pv = getattr(pw, "power", None)
    if is_finite(t1):
        rows.append(("False alarms with no bias", fmt_share(t1, 1)))
    if is_finite(pv):
        rows.append(("Power with the simulated bias", fmt_share(pv, 0)))
    reading = getattr(pw, "reading", "")
    if reading:
        rows.append(("Reading", reading))
    return Section("power", "Power of the test for this review", tuple(rows))
