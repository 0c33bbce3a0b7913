"""The caution carried by every report, slide deck, table and results file: kept in one place."""

CAUTION = (
    "Research use only. Not for clinical decisions: the subtypes, scores and statistics "
    "produced here have not been validated for diagnosis, prognosis or treatment. Defer to "
    "licensed clinicians and follow local regulations."
)
