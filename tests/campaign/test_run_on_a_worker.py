"""One campaign run as a worker makes it (``execute_run``, no cluster): a controller
started per run over UDP, a controller that dies, a run past its timeout.

The check values come from ``railrig run``'s path (the same scenario run in this process
through ``run_scenario``): the reference controller is deterministic in lockstep, in this
process or in its own over a link, so the frames must agree bit for bit.
"""

from __future__ import annotations

import asyncio
import shlex
import sys
from pathlib import Path

import pytest

from emulator.campaign.spec import load_campaign
from emulator.campaign.worker import ERROR, TIMEOUT, execute_run
from emulator.scenario.runner import run_scenario
from emulator.scenario.spec import load_scenario

CONTROLLER = (f"{shlex.quote(sys.executable)} -m emulator.cli controller "
              "--link udp://{bind}?peer={rig} --profile {trainset} --idle-timeout 20")


def _one_case(where: Path, controller: str, command: str | None = None) -> dict:
    lines = ['[campaign]', 'name = "one"', 'scenarios = ["start.toml"]', 'seeds = [7]',
             f'controller = "{controller}"']
    if command is not None:
        lines.append(f"controller_command = '{command}'")
    path = where / "one.toml"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    (run,) = load_campaign(path).runs
    return dict(run.as_dict(), record="all")


@pytest.mark.long
def test_a_controller_started_for_the_run_over_udp_gives_the_in_process_frames(
        campaign_dir: Path) -> None:
    result = execute_run(_one_case(campaign_dir, "udp://{rig}?peer={bind}", CONTROLLER),
                         timeout_s=300.0)
    assert result["verdict"] in ("pass", "fail"), result["reason"]
    direct = asyncio.run(run_scenario(load_scenario(campaign_dir / "start.toml"), seed=7))
    assert result["verdict"] == ("pass" if direct.passed else "fail")
    assert result["recording_digest"] == direct.recording.frames_digest()
    assert result["recording"]  # record = "all": the bytes came back


def test_a_controller_that_exits_makes_the_run_an_error_with_its_output(
        campaign_dir: Path) -> None:
    dies = f"{shlex.quote(sys.executable)} -c \"print(\\\"no board here\\\"); exit(3)\""
    result = execute_run(_one_case(campaign_dir, "udp://{rig}?peer={bind}", dies),
                         timeout_s=60.0)
    assert result["verdict"] == ERROR
    assert "exited with code 3" in result["reason"] and "no board here" in result["reason"]


def test_a_run_past_its_timeout_is_a_timeout(campaign_dir: Path) -> None:
    result = execute_run(_one_case(campaign_dir, "reference"), timeout_s=0.2)
    assert result["verdict"] == TIMEOUT, result["reason"]
    assert "0.2 s" in result["reason"]


def test_a_run_that_cannot_start_is_an_error_not_a_crash(campaign_dir: Path) -> None:
    case = _one_case(campaign_dir, "reference")
    case["texts"]["scenario"]["text"] = "[scenario]\nname = 3\n"
    result = execute_run(case, timeout_s=60.0)
    assert result["verdict"] == ERROR
    assert "scenario.toml:2: [scenario] name: expected a non-empty string, got 3" in result[
        "reason"]
