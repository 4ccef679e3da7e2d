"""landrisk: how likely is a landing to overrun the runway, and why.

An analysis aid, not an operational or certified performance source: the aircraft flight manual, the
operator's approved data, local regulations and licensed practice govern.
"""

import re

__version__ = "0.1.0"

CAUTION = (
    "Caution: an analysis aid, not an operational or certified performance source. The aircraft flight "
    "manual, the operator's approved data, local regulations and licensed practice govern."
)

#: The notice on every report and figure of a scenario whose description says its data are invented.
INVENTED_NOTE = ("Invented data: the scenario's description says its data are invented; the results "
                 "illustrate the method and describe no real aircraft, runway or operation.")

_INVENTED = re.compile(r"\binvented\b", re.IGNORECASE)


def invented(description: str | None) -> bool:
    """Whether a scenario's description says its data are invented (the word "invented")."""
    return bool(description) and _INVENTED.search(str(description)) is not None


__all__ = ["CAUTION", "INVENTED_NOTE", "__version__", "invented"]
