"""Every user-facing message of the intake package, in one place.

Tests assert against these templates, and the wording stays consistent across the paste
reader, the table reader and the row checks. Templates use ``str.format`` fields.
Messages say what is wrong and what to do, in plain clinical English.
"""

from __future__ import annotations

# -- row checks (checks.py) -----------------------------------------------------------
#: Problem messages; each is prefixed with "Row N (label), field: " by :func:`where`.
CHECKS: dict[str, str] = {
    "unread": (
        "could not read '{text}' as a number. Type the number alone (for example 0.82), "
        "or clear the cell."
    ),
    "not_finite": (
        "the value {value} is not a finite number. Enter the number printed in the paper."
    ),
    "unreported_no_size": (
        "this trial is marked as never reported, but its size is missing. Enter its number "
        "of participants (n), or the totals of both arms, or mark it as reported."
    ),
    "unreported_has_results": (
        "this trial is marked as never reported, yet results are entered ({fields}). They "
        "are not used: an unreported trial enters only the missing-trial scenarios. Mark it "
        "as reported if the results were published."
    ),
    "no_route": (
        "there is nothing to analyse for this study. Enter an estimate with its CI, or an SE, "
        "or a P value, or counts, or means/SDs."
    ),
    "no_route_for_measure": (
        "there is nothing to analyse for this study on the {measure_name} scale: {why}. Enter an "
        "estimate with its CI, or an SE, or a P value, or counts, or means/SDs."
    ),
    "limits_reversed": (
        "the lower limit {lower} is above the upper limit {upper}. Check the order of the "
        "limits in the paper."
    ),
    "limits_equal": (
        "the lower and upper limits are both {lower}, so the interval has no width and no SE "
        "can be found from it. Check the limits in the paper."
    ),
    "estimate_outside": (
        "the estimate {estimate} lies outside its interval {lower} to {upper}. Check for a "
        "typo or for columns that were swapped."
    ),
    "ratio_not_positive": (
        "the {what} {value} is not above 0, but {measure_name}s are always above 0. If the "
        "paper printed logarithms, enter the ratios as printed on the natural scale, or check "
        "the measure."
    ),
    "events_over_total": (
        "{arm} events {events} are more than the {arm} total {total}. Check that events and "
        "totals are not swapped."
    ),
    "negative": "the {what} {value} is below 0, which is impossible. Check for a stray minus sign.",
    "sd_zero": (
        "the SD is 0, which would mean every participant had the same value. It is usually a "
        "missing value typed as 0: check the paper."
    ),
    "se_zero": (
        "the SE is 0, which would mean the study has no uncertainty at all. Check the paper: a "
        "missing value may have been typed as 0."
    ),
    "not_whole": (
        "{what} {value} is not a whole number. Numbers of people are whole numbers: check the "
        "column."
    ),
    "level_range": (
        "the CI level {level} is outside 50 to 99.99. Enter the level in percent (95, not 0.95)."
    ),
    "p_range": (
        "the P value {p} is outside 0 to 1 (0 itself cannot be used). Enter P as a proportion "
        "(0.03, not 3); for 'P < 0.001' enter 0.001 and mark it as '<'."
    ),
    "p_bound_approx": (
        "P is given only as '< {p}', so the SE worked out from it is approximate (the bound is "
        "used, which makes the study look less precise). Enter the CI if the paper has one."
    ),
    "p_bound_unusable": (
        "P is given only as '> {p}', which sets no usable bound on the SE. Enter the CI or the "
        "SE if the paper has one."
    ),
    "p_at_null": (
        "the estimate {estimate} is exactly at no effect, so no SE can be worked out from a P "
        "value. Enter the CI or the SE."
    ),
    "p_near_one": (
        "a P value of {p} is so close to 1 that the SE worked out from it is very uncertain. "
        "Enter the CI or the SE if the paper has one."
    ),
    "double_zero": (
        "no events in either arm (0/{int_total} and 0/{ctl_total}): the study carries no "
        "information about a ratio and is left out of {measure_name} analyses. It stays in "
        "the table."
    ),
    "all_events": (
        "every participant had the event in both arms ({int_events}/{int_total} and "
        "{ctl_events}/{ctl_total}): the study carries no information about a ratio and is "
        "left out of {measure_name} analyses. It stays in the table."
    ),
    "partial_ci": ("only the {given} limit is given. Enter both limits, or clear this one."),
    "ci_without_estimate": (
        "the interval is given without its estimate. Enter the estimate as printed."
    ),
    "partial_counts": (
        "some of the counts are missing ({missing}). Enter all four, or clear them."
    ),
    "partial_means": (
        "some of the means, SDs and numbers are missing ({missing}). Enter all six, or clear them."
    ),
    "counts_unused": (
        "counts are entered, but the {measure_name} cannot be worked out from counts; they are "
        "not used."
    ),
    "means_unused": (
        "means and SDs are entered, but the {measure_name} cannot be worked out from them; they "
        "are not used."
    ),
    "ratio_linear_symmetric": (
        "the interval {lower} to {upper} is symmetric around {estimate} on the plain scale, "
        "but intervals for the {measure_name} are symmetric on the log scale. That is a strong "
        "sign of a typo, or of a different measure (a difference rather than a ratio). Check "
        "the numbers and the measure."
    ),
    "ratio_asymmetric": (
        "the interval {lower} to {upper} is not symmetric around {estimate} on the log scale, "
        "even allowing for rounding of the printed decimals; the limits point to an estimate "
        "of about {implied}. Check for a typo. Some papers print exact or profile-likelihood "
        "intervals, which are not symmetric: if so, this warning can be left."
    ),
    "difference_log_symmetric": (
        "the interval {lower} to {upper} is symmetric around {estimate} on the log scale, not "
        "on the plain scale where intervals for the {measure_name} are symmetric. Is the "
        "measure really the {measure_name}, or is it a ratio?"
    ),
    "difference_asymmetric": (
        "the interval {lower} to {upper} is not symmetric around {estimate}, even allowing "
        "for rounding of the printed decimals; the limits point to an estimate of about "
        "{implied}. Check for a typo."
    ),
    "risk_of_bias_unknown": (
        "'{value}' is not one of the risk-of-bias levels (low, some concerns, high). Pick one "
        "of these, or clear it."
    ),
    "duplicate": (
        "this row repeats row {other} exactly. Is the study entered twice? If so, delete one."
    ),
    "no_label": "the study has no label. Give it one (for example 'Smith 2004').",
    "rd_over_one": (
        "a risk difference of {value} is beyond -1 to 1: risk differences are proportions "
        "(5 % is 0.05). If the paper printed percentages, enter them divided by 100."
    ),
    "arm_too_small": (
        "the {arm} arm has {value} participant(s); a mean and SD need at least 2. Check the "
        "number in the paper."
    ),
    "total_zero": (
        "the {arm} total is 0, so the arm has no participants. Check the number in the paper."
    ),
}

# -- pasted text (paste.py) -----------------------------------------------------------
#: Why a line was skipped.
SKIP_REASONS: dict[str, str] = {
    "header": "a header line (column names)",
    "total": "a total line (the pooled result, not a study)",
    "subtotal": "a subtotal line (the pooled result of a subgroup, not a study)",
    "total_events": "a total-events line (sums of the columns, not a study)",
    "heterogeneity": "a heterogeneity line (statistics about the studies, not a study)",
    "test": "a test line (a test of the pooled result, not a study)",
    "caption": "a caption of the plot (not a study)",
    "axis": "the scale printed under a forest plot (not a study)",
    "subgroup_heading": "a subgroup heading",
}

#: Why a line was not understood, and what to do.
NOT_UNDERSTOOD: dict[str, tuple[str, str]] = {
    "too_long": (
        "the line is {length:,} characters long; only the first {limit:,} are ever read, and a "
        "study row is much shorter",
        "Check that the line breaks were kept when copying, or paste fewer rows at a time.",
    ),
    "percent_values": (
        "the estimate and its limits are printed as percentages ({numbers})",
        "For a risk difference choose that measure (RD): 5% is then read as 0.05. For any "
        "other measure, type the numbers without the % sign as the paper means them.",
    ),
    "no_numbers": (
        "there are no numbers on this line",
        "If this is a study, add its numbers (for example 'Smith 2004 0.82 (0.61 to 1.10)'); "
        "if it is a heading or a note, it can be left as it is.",
    ),
    "bad_number": (
        "could not read '{text}' as a number ({why})",
        "Retype the number, for example 0.82 or 0,82.",
    ),
    "mixed_marks": (
        "the line mixes decimal points ({point}) and decimal commas ({comma})",
        "Use one decimal mark on the line, then paste it again.",
    ),
    "nested_brackets": (
        "there are brackets inside brackets",
        "Keep one pair of brackets around the interval, for example 0.82 (0.61 to 1.10).",
    ),
    "bracket_many": (
        "there are {count} numbers inside one pair of brackets ({numbers}); an interval has two",
        "Keep only the two limits inside the brackets, for example 0.82 (0.61 to 1.10).",
    ),
    "two_intervals": (
        "there are {count} intervals on one line",
        "Put each study on its own line with one estimate and its interval.",
    ),
    "interval_without_estimate": (
        "there is an interval ({lower} to {upper}) but no estimate before it",
        "Add the estimate before the interval, for example 0.82 (0.61 to 1.10).",
    ),
    "single_bracket": (
        "the estimate {estimate} is followed by one number in brackets ({value}), which could "
        "be an SE or an SD",
        "If it is a standard error, type 'SE {value}'; if the paper gives an interval, type "
        "both limits.",
    ),
    "se_without_estimate": (
        "an SE is given but there is no estimate before it",
        "Type the estimate first, then 'SE' and its value, for example '-0.35 SE 0.13'.",
    ),
    "p_without_estimate": (
        "a P value is given but there is no estimate to go with it",
        "Type the estimate first, then the P value, for example '0.82 P = 0.21'.",
    ),
    "one_number": (
        "there is only one number ({number}); an estimate needs its interval, SE or P value",
        "Add the interval, for example 'Smith 2004 0.82 (0.61 to 1.10)', or 'SE' and the "
        "standard error.",
    ),
    "two_numbers": (
        "two numbers ({numbers}) could be an estimate and its SE, or something else",
        "If the second is a standard error, type 'SE' before it, for example '-0.35 SE 0.13'.",
    ),
    "no_fit": (
        "the {count} numbers ({numbers}) do not fit any layout we read",
        "Type the row as label, estimate and interval ('Smith 2004 0.82 (0.61 to 1.10)'), or "
        "label and events/total per arm ('Smith 2004 12/140 20/138'), or label and mean, SD, "
        "n per arm ('Smith 2004 5.1 1.2 40 4.6 1.3 41').",
    ),
    "internal": (
        "the reader failed on this line ({error})",
        "Please type this row by hand, and report the line so the reader can be fixed.",
    ),
}

#: Notes in the account of a study line (joined with "; ").
PASTE_NOTES: dict[str, str] = {
    "percent_converted": "percentages read as proportions for the risk difference ({text})",
    "summary_word_study": (
        "read as a study although the label starts with '{word}': a summary line has that "
        "word alone or followed by '(95% CI)'; check that this is a trial"
    ),
    "weight": "weight {weight}% ignored",
    "weight_no_percent": "{value} read as a weight without a % sign (ignored)",
    "event_percent": "percentage {value}% in brackets ignored",
    "decimal_comma": "decimal comma",
    "mid_dot": "mid-dot read as the decimal point",
    "footnote": "footnote mark {marks} removed",
    "footnote_letter": "footnote letter '{letter}' after {number} removed",
    "thousands_space": "spaces between digit groups read as thousands separators",
    "ambiguous_thousands": (
        "'{text}' read as {value} (comma taken as a thousands separator: nothing else on the "
        "line shows the decimal mark)"
    ),
    "space_thousands": (
        "'{text}' read as {value} (otherwise the events would be more than the total, so "
        "the space separates thousands)"
    ),
    "count_thousands": "'{text}' read as {value} (a count, so the comma separates thousands)",
    "ambiguous_decimal": "'{text}' read as {value} (decimal mark as elsewhere on the line)",
    "ambiguous_chosen": "'{text}' read as {value} (decimal {mark}, as chosen)",
    "ambiguous_from_text": (
        "'{text}' read as {value} (nothing on the line shows the decimal mark; most other "
        "lines use decimal {mark}s)"
    ),
    "no_label": "no study label on the line: named '{label}'",
    "label_number": "the number {number} taken as part of the label",
    "n_from_single": "{value} read as the total number of participants (n)",
    "unused_before": "numbers before the estimate not used: {numbers}",
    "unused_after": "numbers after the interval not used: {numbers}",
    "unused_words": "text not read: '{words}'",
    "ignored_symbols": "symbols ignored: {symbols}",
    "not_estimable": "marked as not estimable in the paper",
    "dash_sign_doubt": (
        "the interval was read as {lower} to {upper}; the dash before {number} could be a "
        "range dash instead of a minus sign: check"
    ),
    "dash_flipped": (
        "'{text}' read as a range dash, not a minus sign, so the interval is {lower} to {upper}"
    ),
    "unclosed_bracket": "a bracket was not closed",
    "level_from_header": "{level}% CI level taken from the header on line {line}",
    "subgroup_from_heading": "subgroup '{subgroup}' from the heading on line {line}",
    "measure_mentioned": "the line names the measure '{word}'",
    "counts_not_for_measure": "counts are not used for the {measure_name}",
    "means_not_for_measure": "means and SDs are not used for the {measure_name}",
    "arms_order": "the first arm is taken as the intervention arm",
    "three_numbers": "three numbers read as estimate, lower limit, upper limit",
}

# -- study tables (table.py) ----------------------------------------------------------
TABLE: dict[str, str] = {
    "missing_file": "the file does not exist. Check the name and the folder.",
    "unreadable": "the file could not be opened ({error}). Check that it is not open elsewhere.",
    "unsupported": (
        "files ending in '{suffix}' cannot be read as a study table. Save it as CSV (.csv) or "
        "Excel (.xlsx)."
    ),
    "empty": "the file has no rows. Check that it is the right file.",
    "no_header": (
        "no column names were found. The first row should name the columns (study, estimate, "
        "lower, upper, ...)."
    ),
    "no_known_columns": (
        "none of the column names is one we read ({names}). The first row should name the "
        "columns: {expected}."
    ),
    "duplicate_column": (
        "the column '{name}' appears twice (columns {first} and {second}). Keep one of them."
    ),
    "bad_xlsx": "the file is not a readable Excel workbook ({error}). Save it again as .xlsx.",
    "not_a_file": "this is not a file (a folder or a device). Choose a CSV or Excel file.",
    "too_big": (
        "the file is larger than a study table can be (more than {limit} MB). Check that it "
        "is the right file, or keep only the study rows."
    ),
    "xlsx_too_big": (
        "the workbook unpacks to {size} MB, more than a study table can be ({limit} MB). Save "
        "only the sheet with the studies as a new workbook or as CSV."
    ),
    "too_many_rows": (
        "the table has more than {limit:,} rows, blank ones included. Delete the rows below "
        "the table, or save the studies on their own."
    ),
    "too_many_studies": (
        "the table has more than {limit:,} study rows, more than Lopside handles. Keep only "
        "the studies of one review."
    ),
    "too_many_cells": (
        "the row has {count:,} cells, more than a study table can have ({limit:,}). Check that "
        "this is the right file and the right delimiter."
    ),
    "too_many_cells_total": (
        "the table has more than {limit:,} cells in all. Save only the study columns and rows "
        "as a new file."
    ),
    "csv_error": "the row could not be read as CSV ({error}). Check the quotes on this row.",
    "unread_cell": "could not read '{text}' as {what}; the text is kept. Retype it.",
    "extra_cells": (
        "the row has {count} more cell(s) than there are column names; '{cells}' not read."
    ),
    "formula_no_value": (
        "cell {cell} holds a formula with no saved result (formulas are never run here). Open "
        "the file in a spreadsheet program and save it, or type the value."
    ),
    "error_value": "cell {cell} holds the spreadsheet error {value}; the text is kept. Fix it.",
    # notes (shown with the result, not problems)
    "note_encoding": "the file is not UTF-8; it was read as {encoding}",
    "note_bom": "a UTF-8 byte-order mark at the start was ignored",
    "note_delimiter": "columns separated by {name}",
    "note_decimal": "numbers typed as text use a decimal {mark} (from '{evidence}')",
    "note_decimal_mixed": (
        "the file has both decimal points ('{point}') and decimal commas ('{comma}'); each "
        "cell was read on its own"
    ),
    "note_unknown_columns": "columns not read (not part of the study table): {names}",
    "note_renamed_column": "column '{given}' read as '{name}'",
    "note_formulas": "{count} formula cell(s): their saved results were used (formulas are not run)",
    "note_merged": "merged cells {ref}: the value '{value}' was used for every row of it",
    "note_merged_across": "merged cells {ref} span columns: only the first column was read",
    "note_sheet": "read the sheet '{title}' (the first of {count})",
    "note_blank_rows": "{count} blank row(s) skipped",
    "note_cell": "row {row}, {field}: {note}",
    "note_quote_removed": "row {row}, {field}: the leading quote (added to stop formulas) removed",
    "note_year_suffix": "row {row}, year: '{text}' read as {year}",
    "note_favours_line": "row {row}: the direction of benefit is given: {favours} values favour",
    "comment_row": (
        "a comment line above the column names; only '# favours: lower' or '# favours: "
        "higher' is read there"
    ),
    "note_decimal_option": "numbers no cell settles are read with a decimal {mark}, as asked",
    "note_percent": "row {row}, {field}: '{text}' read as {value} (a risk difference)",
    "percent_cell": (
        "'{text}' is a percentage; the text is kept. For a risk difference choose the measure "
        "RD (5% is then read as 0.05); otherwise type the number without the % sign."
    ),
    "favours_value": "expected 'lower' or 'higher'",
    "favours_mixed": (
        "the direction of benefit differs between rows ({rows}). Give one value, 'lower' or "
        "'higher', for the whole table."
    ),
    "not_used": "not read as a number (the text is kept in its cell)",
    "extra_reason": "{count} cell(s) beyond the last column name",
    "unknown_column_reason": (
        "not a column of the study table ({count} cell(s) with data). Rename the column "
        "(see the list of columns in the README) if it should be read."
    ),
}


#: Why the paste preview assumes a measure (a suggestion the user confirms).
MEASURE_WHY: dict[str, str] = {
    "header": "the header line names it ({name})",
    "counts": (
        "every row gives events and totals per arm: the odds ratio is assumed; the risk "
        "ratio or risk difference are as possible"
    ),
    "means": "every row gives means, SDs and numbers per arm: looks like a mean difference",
    "none": "the rows give no interval to judge the measure by",
    "negative": (
        "no header; values at or below 0, which a ratio can never be: looks like a mean "
        "difference (or a standardised one)"
    ),
    "linear": (
        "no header; {n} of {k} intervals are symmetric on the plain scale, not the log scale: "
        "looks like a mean difference"
    ),
    "log": (
        "no header; {n} of {k} intervals are symmetric on the log scale: looks like a ratio "
        "(odds ratio assumed; risk or hazard ratio as possible)"
    ),
    "positive": "no header; all values above 0: a ratio is assumed (odds ratio)",
}


def check_message(key: str, **fields: object) -> str:
    """Format a row-check message (without the row prefix)."""
    return CHECKS[key].format(**fields)


def where(row_index: int, study: str, field: str, place: str = "") -> str:
    """The prefix naming the place of a problem: ``"Row 3 (Smith 2004), lower: "``.

    Rows are counted from 1 for the user (``row_index`` is 0-based), as the window's
    table numbers them; ``place`` adds where the row is in the file it came from
    (``"Row 3 (Smith 2004; spreadsheet row 5), lower: "``). A negative index means the
    review's own settings; an empty field names the row as a whole.
    """
    if row_index < 0:
        return f"Review settings, {field}: " if field else "Review settings: "
    inner = "; ".join(x for x in (study, place) if x)
    label = f" ({inner})" if inner else ""
    if not field:
        return f"Row {row_index + 1}{label}: "
    return f"Row {row_index + 1}{label}, {field}: "


def paste_note(key: str, **fields: object) -> str:
    return PASTE_NOTES[key].format(**fields)


def not_understood(key: str, **fields: object) -> tuple[str, str]:
    """Reason and advice for a line that was not understood."""
    reason, advice = NOT_UNDERSTOOD[key]
    return reason.format(**fields), advice.format(**fields)


def table_message(key: str, **fields: object) -> str:
    return TABLE[key].format(**fields)
