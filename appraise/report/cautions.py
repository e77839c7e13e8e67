"""The cautions every worksheet carries: a short form for the first page and the
full text for the end. Written for this project; one place, so the CLI, the HTML,
the PDF and the desktop app print the same words.
"""

from __future__ import annotations

SHORT_CAUTION = (
    "This is a statistical estimate computed from the sales supplied. It is not an "
    "appraisal. Only a licensed or certified appraiser can form an opinion of value, and "
    "that opinion, the applicable professional standards and local law govern. Read the "
    "cautions at the end of this worksheet before relying on any figure in it."
)

FULL_CAUTIONS: tuple[tuple[str, str], ...] = (
    (
        "A statistical estimate, not an appraisal",
        "The figures in this worksheet are a statistical estimate from the data supplied. "
        "They are not an appraisal and not an appraisal report. They become part of an "
        "opinion of value only if a licensed or certified appraiser reviews them, adopts "
        "them and takes responsibility for them. The appraiser's opinion, the applicable "
        "professional standards and local law govern.",
    ),
    (
        "Only as good as the sales used",
        "The estimate depends entirely on the sales that were supplied and on how they "
        "were recorded. Nobody inspected the property for this worksheet: its condition, "
        "renovations, view, defects and anything else not in the data are not reflected.",
    ),
    (
        "What the intervals mean",
        "The intervals describe statistical uncertainty under the assumptions of the "
        "model (a correct functional form, independent errors, sales representative of "
        "the market). They do not cover every risk: market shifts, errors in the data, "
        "a subject unlike the sales, or a model that does not fit can all put the price "
        "outside them. Give particular weight to any warning about few sales, a subject "
        "outside the range of the data, old sales or a poor fit.",
    ),
    (
        "Fair lending and fair housing",
        "Characteristics of protected classes, and variables that stand in for them, "
        "must be left out of the model. Fair-lending and fair-housing law applies to any "
        "use of this estimate.",
    ),
    (
        "Not for credit decisions on its own",
        "Do not use this estimate in a credit decision unless it has been validated in the "
        "way the quality-control rules for automated valuation models require.",
    ),
)

ONE_LINE_CAUTION = (
    "Statistical estimate from the sales supplied, not an appraisal; a licensed "
    "appraiser's opinion, professional standards and local law govern."
)
"""For page footers and command-line output."""

STATUS_CAUTION = "Statistical estimate — not an appraisal"
"""The window's status bar: always shown, the full cautions one click away."""

CERTIFICATION_STATEMENT = (
    "To be completed by the appraiser who adopts, changes or rejects this estimate. "
    "Until it is completed and signed, this worksheet is not an opinion of value."
)

CERTIFICATION_FIELDS: tuple[str, ...] = (
    "Appraiser's name",
    "Licence or certification number and state/province",
    "Opinion of value adopted",
    "Reasons for any difference from the estimate",
    "Date of inspection (if any)",
    "Signature",
    "Date signed",
)

FAIR_LENDING_CAUTION = (
    "Characteristics of protected classes (race, colour, ethnicity or national origin, "
    "religion, sex, familial status, disability, the age of the occupants) and variables "
    "that stand in for them must be left out of the model; fair-lending and fair-housing "
    "law applies to any use of this estimate."
)
"""Printed by the model assistant beside the columns its fair-lending guard skipped."""

SUGGESTION_CAUTION = (
    "The proposed model is chosen by measured out-of-sample error, not by judgement: check "
    "that every term makes sense for this market before relying on it. The hold-out figure "
    "is the honest estimate; the search's own figure flatters the model it picked."
)
"""Printed with every model the assistant proposes."""
