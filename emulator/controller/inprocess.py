"""Run a controller in the rig's process, still through telegrams (lockstep and afap).

The controller's end of a ``loop://`` channel answers each measurement at once, inside
the rig's send: no scheduling between the two, so a lockstep run goes as fast as the
rig and the controller compute, and is deterministic.
"""

from __future__ import annotations

from emulator.link import open_link
from emulator.link.loop import LoopLink


async def attach_reference(channel: str, rig, profile, period_s: float | None = None,
                           motor_control: str | None = None, tune=None):
    """The reference controller for ``profile``, answering ``rig`` through
    ``loop://channel``; returned so callers may inspect or alter it. ``motor_control``
    ("scalar" or "vector") overrides the profile's choice; ``tune(controller)`` is called
    before it answers (the link calls the ``answer`` the controller has then)."""
    import dataclasses

    from emulator.controller.compiled_tcu import CompiledController
    from emulator.controller.config import config_from_profile

    cfg = config_from_profile(profile, period_s)
    if motor_control is not None:
        cfg = dataclasses.replace(cfg, motor_control=motor_control)
    tcu = CompiledController(cfg, rig.signal_map.as_dict())
    if tune is not None:
        tune(tcu)
    await attach(channel, tcu.answer)
    return tcu


async def attach(channel: str, answer) -> LoopLink:
    """Open the controller's end of ``loop://channel``; answer(payload) -> payload."""
    end = open_link(f"loop://{channel}")
    await end.open()

    def deliver(payload: bytes) -> None:
        end.stats.received += 1
        end.send(answer(payload))

    end._deliver = deliver
    return end
