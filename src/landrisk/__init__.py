"""landrisk: how likely is a landing to overrun the runway, and why.

An analysis aid, not an operational or certified performance source: the aircraft flight manual, the
operator's approved data, local regulations and licensed practice govern.
"""

__version__ = "0.1.0"

CAUTION = (
    "Caution: an analysis aid, not an operational or certified performance source. The aircraft flight "
    "manual, the operator's approved data, local regulations and licensed practice govern."
)

__all__ = ["CAUTION", "__version__"]
