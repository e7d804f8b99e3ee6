"""sleepfuse: sleep parameters from PSG, actigraphy and diary, by one set of definitions.

For research use only; sleepfuse does not diagnose.
"""

__version__ = "0.1.0"

RESEARCH_CAUTION = (
    "sleepfuse is for research. It does not diagnose, and its numbers are not a "
    "clinical sleep report: sleep staging and scoring for patient care follow the "
    "current scoring manual, local rules and licensed practice."
)
