"""Reading scenario files and writing results: everything that touches files or text formats."""

from landrisk.io.config import DEMO_SOURCE, demo_text, load_scenario, parse_scenario

__all__ = ["DEMO_SOURCE", "demo_text", "load_scenario", "parse_scenario"]
