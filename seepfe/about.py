"""What seepfe is and the caution it carries on every result (imported by every stage that writes text)."""

__all__ = ["__version__", "CAUTION"]

__version__ = "0.1.0"

CAUTION = ("These results support, and never replace, the judgement of a licensed engineer; "
           "local codes and agency criteria govern.")
