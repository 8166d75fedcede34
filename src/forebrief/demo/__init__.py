"""The invented demo scenario: generate it (pure) and write it as example input files.

Entirely made up: an invented jurisdiction, regions, holiday, illness wave and modelling teams.
Regenerate the shipped folder with ``python -m forebrief.demo example_inputs``.
"""

from __future__ import annotations

from forebrief.demo.files import regenerate_example_inputs, scenario_files, write_scenario
from forebrief.demo.scenario import DEFAULT_SEED, Scenario, generate_scenario

__all__ = [
    "DEFAULT_SEED",
    "Scenario",
    "generate_scenario",
    "regenerate_example_inputs",
    "scenario_files",
    "write_scenario",
]
