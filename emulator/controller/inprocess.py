"""Run a controller in the rig's process, still through telegrams (lockstep and afap).

The controller's end of a ``loop://`` channel answers each measurement at once, inside
the rig's send: no scheduling between the two, so a lockstep run goes as fast as the
rig and the controller compute, and is deterministic.
"""

from __future__ import annotations

from emulator.link import open_link
from emulator.link.loop import LoopLink


async def attach(channel: str, answer) -> LoopLink:
    """Open the controller's end of ``loop://channel``; answer(payload) -> payload."""
    end = open_link(f"loop://{channel}")
    await end.open()

    def deliver(payload: bytes) -> None:
        end.stats.received += 1
        end.send(answer(payload))

    end._deliver = deliver
    return end
