"""Scenarios: track, driver, fault schedule and checks in a file, run headless.

``load_scenario`` reads a file (spec.py), ``run_scenario`` runs it on a rig with a
controller and judges its checks on the recording (runner.py); the driver (driver.py),
the track (track.py) and the checks language (checks.py) are its parts.
"""

from .checks import CheckResult, CheckSpec
from .driver import DriverProgram, demo_program
from .runner import RunError, RunResult, judge, run_scenario
from .spec import Scenario, ScenarioError, load_scenario

__all__ = ["CheckResult", "CheckSpec", "DriverProgram", "RunError", "RunResult", "Scenario",
           "ScenarioError", "demo_program", "judge", "load_scenario", "run_scenario"]
