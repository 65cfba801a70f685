"""User-facing words of the window, in one place (tests assert them; wording stays consistent)."""

from __future__ import annotations

APP_NAME = "Lopside"
ORG_NAME = "Lopside"
ORG_DOMAIN = "lopside.invalid"

NOT_AVAILABLE = (
    "This view is not available in this build: the part that computes it ({part}) "
    "is missing. The rest of the window works without it."
)
NO_ANALYSIS = "Enter at least two studies with an effect and its standard error to see this."
ANALYSIS_FAILED = "The analysis could not be run: {error}"
ANALYSIS_PROGRESS = "Analysing\u2026 {stage} ({n} of {of})"
#: after the pooled result while only the core stage is shown
CORE_STAGE_SUFFIX = " \u00b7 updating sensitivity analyses\u2026"
STALE_POWER = "The review has changed since the power was simulated: run it again."
POWER_NOT_RUN = "Not simulated yet for this review: press Simulate power."
POWER_CANCELLED = "Power simulation cancelled."
POWER_EXPLAIN = (
    "How often would the recommended test detect funnel asymmetry in a review with these "
    "studies' standard errors? The simulation repeats the review many times with a known "
    "amount of selective publication."
)

UNSAVED_TITLE = "Unsaved changes"
UNSAVED_TEXT = "“{name}” has changes that are not saved. Save them before closing?"
RECOVER_TITLE = "Recover unsaved work"
RECOVERED = "Recovered the autosaved work on “{name}”. Save it to keep it."
RECOVERED_CHANGED = (
    "Its autosave had been changed outside Lopside since it was written: check it before "
    "relying on it."
)
OPEN_FAILED = "Could not open {name}. {error}"
OPEN_FAILED_TITLE = "Could not open the file"
SAVE_FAILED = "Could not save {name}. {error}"
SAVE_FAILED_TITLE = "Could not save"
ANALYSIS_FAILED_TITLE = "The analysis could not be run"
SAVED = "Saved {name}."
AUTOSAVE_FAILED = "Autosave failed: {error}. Save the review to keep your changes."
ANALYSING = "Analysing\u2026"
ASK_MEASURE = (
    "The rows in {name} give effect estimates but do not say which measure they are. "
    "Which measure did the paper use?"
)

CELL_UNREAD = "“{text}” could not be read as {what}. It is kept here; type {hint}."
CELL_UNREAD_HINT = {
    "year": "a four-digit year",
    "exclude": "yes or no",
    "reported": "no (a trial that never reported results) or leave it blank",
    "p": "a P value such as 0.03 or <0.001",
}
#: added to a row check's message when that problem also keeps the study out
LEFT_OUT = "The study is left out of the analysis until this is fixed."
DETAIL_UNREAD = "“{text}” is not a number; the published result is not used until it is one."

PASTE_TITLE = "Paste rows from a paper"
PASTE_HELP = (
    "Paste the rows of the review's forest-plot table (one study per line), as copied from the "
    "PDF or web page. Lopside shows how it read each line before anything is added."
)
PASTE_NOTHING = "No study rows read yet."
PASTE_COUNT = "{n_study} studies read · {n_skip} lines skipped · {n_nu} not understood"

SHEET_DONE = "The appraisal sheet was written to {path}."
SHEET_FAILED = "The appraisal sheet could not be written: {error}"
#: several files dropped on the window: the first readable one is opened
DROPPED_OTHERS = (
    "Opened {name}. Not opened: {others} (one review at a time; to add a file's rows as "
    "another outcome, use Outcome > Add outcomes from a file)."
)
#: a figure export (file, clipboard, printer) with no analysis to draw
NOTHING_TO_EXPORT = "Nothing to export yet: {why}"
#: an export waits for the full analysis (it never prints what is still being updated)
EXPORT_WAITS = "Finishing the analysis before the export\u2026"
COPIED_FUNNEL = "Funnel plot copied to the clipboard."
EXPORTED_FIGURE = "Figure written to {path}."
#: a figure export that failed (it said "the appraisal sheet could not be written")
FIGURE_FAILED = "The figure could not be written: {error}"

ABOUT_TEXT = (
    "<h3>Lopside {version}</h3>"
    "<p>Appraise small-study effects and publication bias in a published meta-analysis, "
    "offline.</p><p><b>Caution.</b> {caution}</p>"
    "<p>The sample reviews shipped with Lopside are invented for demonstration.</p>"
)

ETA_LABEL = "Your own selection ratio η:"
ETA_TIP = (
    "How many times more likely a result significant in favour of the effect is to be "
    "published than any other (at least 1). The corrected estimate for it is added to the "
    "table below, beside η = 1, 2, 5, 10, 20 and 50."
)
ETA_BAD = "“{text}” is not a selection ratio: type a number of at least 1 (or clear the field)."
CURVE_FAILED = "The selection curve could not be drawn: {error}"
CLAIM_P_BAD = (
    "“{text}” is not a P value: type a number from 0 to 1; it is not used until it is one."
)
CLAIM_K_BAD = (
    "“{text}” is not a number of studies: type a whole number; it is not used until it is one."
)
CLAIM_UNREAD = "“{text}” is not a number; it is kept here and not used until it is one."
ASK_DECIMAL = (
    "<p>Nothing in <b>{name}</b> shows whether a comma in these numbers is a decimal mark or "
    "separates thousands. Which does the paper use?</p>"
)

NOT_READ_TIP = (
    "This part of the input was not read, so it is not in the table. Add the study by hand "
    "(or fix the line and paste it again)."
)

PASTE_MEASURE_WHY = "Assumed because {why}. Change it if the paper says otherwise."
PASTE_MEASURE_OTHER = "The rows look like a {guess} ({why}); check the measure."
PASTE_MEASURE_REVIEW = "The review's measure; change it if the pasted rows use another."
PASTE_MEASURE_CHANGES = "Adding the rows sets the review's measure to {name}."
PASTE_DECIMAL = (
    "Nothing in the pasted text shows whether the comma in '{text}' is a decimal mark or "
    "separates thousands. Which does the paper use?"
)

PDF_TITLE = "Rows from {name}"
PDF_HELP = (
    "Pages are listed with the most study rows first. Every line found on the page is boxed: "
    "rows read as studies are numbered. Untick a line to leave it out, or drag a rectangle on "
    "the page to keep only the lines inside it. Select several pages (Ctrl or Shift) for a "
    "table that runs on. The chosen lines then go to the paste preview, which shows how each "
    "was read before anything is added."
)
PDF_PAGES = "Pages"
PDF_LINES = "Lines found (untick to leave out)"
PDF_CLEAR_REGION = "Keep the whole page"
PDF_USE = "Preview these rows"
PDF_PAGE_ROWS = "Page {n}: {rows} study rows"
PDF_PAGE_NONE = "Page {n}: no study rows"
PDF_PAGE_PROBLEM = "Page {n}: {problem}"
PDF_CANCELLED = "Reading stopped after {n} pages; pages after those are not listed."
PDF_EMPTY_LINE = "an empty line"
PDF_STATUS = (
    "{rows} study rows on page(s) {pages}; {other} other line(s) will be listed as not used."
)
PDF_FAILED = "The PDF could not be read ({error})."
PDF_READING = "Reading the PDF's pages…"
PDF_FROM = "{rows} rows from page(s) {pages} of {name} were added."

#: The Causes view while only the core stage of the analysis is ready (the reading needs
#: the sensitivity analyses, so it waits for the full stage rather than show a partial one).
READING_UPDATING = (
    "Updating the reading: the selection model and the other sensitivity analyses are "
    "still running."
)

# ---------------------------------------------------------------- never silent, never lost

ERROR_TITLE = "Something went wrong"
ERROR_TEXT = (
    "Lopside met an unexpected error: {summary}\n\nYour review is still open (unsaved "
    "work is autosaved). The report below was also written to {log}. Copy it and send it with a "
    "few words on what you were doing."
)
ERROR_NO_LOG = "no log file (the log folder could not be written)"
VIEW_FAILED = (
    "This view could not be shown ({error}). The error report was written to {log}. "
    "The other views and your review are not affected."
)
SAVE_FAILED_TITLE = "Not saved"
SAVE_FAILED_TEXT = (
    "“{name}” could not be saved: {error}\n\nYour work is still open (and autosaved). "
    "Save it somewhere else?"
)
SAVE_ELSEWHERE = "Save &elsewhere\u2026"
READ_ONLY_SAMPLE = "a sample review (invented): save it under a name of your own"
READ_ONLY_CHANGED = "changed outside Lopside: read-only until you save it"
READ_ONLY_TITLE = "{name} (read-only)"
SAMPLE_FOLDER_REFUSED = (
    "The sample reviews are part of Lopside and are not saved over; choose a folder of your own."
)
CHANGED_OUTSIDE_TITLE = "Changed outside Lopside"
CHANGED_OUTSIDE_TEXT = (
    "{name} was changed outside Lopside since it was last saved: its content no longer "
    "matches the checksum Lopside wrote into it (edited by hand, a sync tool, or a damaged "
    "disk).\n\nOpen it anyway? It opens read-only: Save asks for a name, so the file on "
    "disk stays as it is until you choose."
)
EXPORT_IS_INPUT = "{name} is the review being appraised; choose another name for the export."
EXPORT_LOCKED_TITLE = "File in use"
EXPORT_LOCKED_TEXT = "{error}\n\nWrite the sheet to {suggestion} instead?"
RECOVER_FAILED = (
    "Could not recover “{name}”: {error}. The autosave is kept at {path}; it is offered "
    "again at the next start."
)
RECOVER_INTRO = (
    "Lopside did not close normally last time. The unsaved work below was autosaved. Tick "
    "what to restore (each opens in its own window); nothing is deleted unless you choose "
    "Discard."
)
RECOVER_DISCARD_CONFIRM = "Discard the ticked autosaves for good? This cannot be undone."

# outcomes of a workbook (window/outcomes.py, window/panel_view.py)
OUTCOME_TIP = (
    "The outcome every view shows. A review has several outcomes (mortality, a symptom "
    "score, adverse events...), each with its own studies, measure and rating "
    "(Ctrl+PgUp / Ctrl+PgDown to step through them)."
)
OUTCOME_NEW_TITLE = "New outcome"
OUTCOME_RENAME_TITLE = "Rename the outcome"
OUTCOME_NAME_LABEL = "Name of the outcome (e.g. All-cause mortality at 1 year):"
OUTCOME_ADDED = "Added the outcome “{name}”: type or paste its studies."
OUTCOME_DELETED = "Deleted the outcome “{name}” (Undo brings it back)."
OUTCOME_NO_STUDIES = "“{name}” has no studies to copy."
OUTCOME_COPIED = (
    "Copied {n} studies from “{name}”: their names, years, risk of bias and subgroups. "
    "Type this outcome's numbers for each."
)
PANEL_EXPLAIN = (
    "Every outcome of this review side by side, as a guideline panel rates them. Click a "
    "row to open that outcome. Lopside informs the appraisal; the panel's own methods and "
    "clinical judgement decide."
)
PANEL_UPDATING = "Analysing {n} outcomes\u2026"
PANEL_FAILED = "The panel summary could not be made: {error}"
PANEL_EXPORTED = "Wrote the panel summary to {path}."
SLIDE_EXPORTED = "Wrote the slide to {path}."
OUTCOME_FROM_FILE = "Added {n} outcome(s) from {name}; choose them above the study table."
OUTCOME_FROM_FILE_STEP = "add outcomes from {name}"
OUTCOME_FROM_PDF = (
    "A PDF's rows are picked page by page: add a new outcome (Outcome > New outcome) and "
    "paste the rows copied from the PDF (Edit > Paste rows from a paper), or open the PDF "
    "itself with File > Open."
)
PANEL_EXPORT_FAILED = "The panel summary could not be written: {error}"
SLIDE_FAILED = "The slide could not be written: {error}"
