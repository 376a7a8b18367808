"""The research-only caution shown wherever cavitas shows or writes results."""

RESEARCH_ONLY = (
    "For research use only. Not for diagnosis or any clinical decision: cavitas results "
    "have not been validated for medical use."
)
