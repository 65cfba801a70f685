"""Words and numbers for people: how every figure and small phrase is written.

``numbers``: formats (effects, CIs, p-values, shares) and small predicates (is_ok, why_not).
``rows``: row builders shared by tables and readings (adjustment_rows).
``sentences``: sentences that quote a number, each built in one place.

The floor of the wording layers: imports only the model and the statistics' result types.
"""
