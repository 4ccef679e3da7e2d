"""Reading scenario files and writing results: everything that touches files or text formats."""

from landrisk.io.config import DEMO_SOURCE, demo_text, load_scenario, load_study, parse_scenario, parse_study
from landrisk.io.uncertain import UncertainInput, UncertainSet

__all__ = [
    "DEMO_SOURCE",
    "UncertainInput",
    "UncertainSet",
    "demo_text",
    "load_scenario",
    "load_study",
    "parse_scenario",
    "parse_study",
]
