"""The rig loads a command vector into the plant in one compiled call
(CommandMapper.load, emulator/rig/command_mapping._load_vector). The reference is the plant's
own command intake: the vector mapped into a Commands object (CommandMapper.commands)
and taken by Plant._apply. Both must leave the plant's inputs the same to the last bit,
and refuse the same vectors with the same error, having loaded as much as the other."""

from __future__ import annotations

import numpy as np
import pytest

from emulator.plant import CommandError, Plant
from emulator.plant.layout import IS_HW_TRIP
from emulator.protocol.signal_map import build_signal_map
from emulator.rig.command_mapping import CommandMapper

INPUTS = ("iu", "lu", "ss", "ku", "ist")


def _vector(rng: np.random.Generator, signal_map, spoil: bool) -> tuple[np.ndarray, str]:
    """Commands within their ranges, flags of 0 or 1; spoiled: one value NaN, infinite
    or out of its range (its name returned, else "")."""
    values = np.array([rng.choice([s.lo, s.hi]) if s.kind != "analog"
                       else rng.uniform(s.lo, s.hi) for s in signal_map.commands])
    for i, s in enumerate(signal_map.commands):
        if s.name.endswith(("duty_a", "duty_b", "duty_c", "chopper_duty")):
            values[i] = rng.uniform(0.0, 1.0)
        elif s.name.endswith(".modulation"):
            values[i] = rng.uniform(-1.0, 1.0)
    if spoil:
        spoilable = [i for i, s in enumerate(signal_map.commands)
                     if s.name.endswith(("duty_a", "duty_b", "duty_c", "chopper_duty",
                                         ".modulation"))]
        i = rng.choice(spoilable)
        values[i] = rng.choice([np.nan, np.inf, -1.5, 1.5])
        return values, signal_map.commands[i].name
    return values, ""


def _refusal(load, values: np.ndarray, gates_allowed: bool) -> str | None:
    """The CommandError's message, or None when load took the vector."""
    try:
        load(values, gates_allowed)
    except CommandError as exc:
        return str(exc)
    return None


def _state(plant: Plant) -> list[bytes]:
    return [getattr(plant, name).tobytes() for name in INPUTS]


@pytest.mark.parametrize("ideal_dc_links", [False, True])
def test_load_gives_the_plants_own_intake_of_the_mapped_commands(params,
                                                                 ideal_dc_links) -> None:
    signal_map = build_signal_map(params)
    loaded, taken = (Plant(params, ideal_dc_links=ideal_dc_links) for _ in range(2))
    fast, reference = CommandMapper(loaded, signal_map), CommandMapper(taken, signal_map)
    rng = np.random.default_rng(11)
    refused = 0
    for trial in range(400):
        tripped = rng.random(loaded.n_inverters) < 0.5  # latched trips for resets to clear
        for plant in (loaded, taken):
            plant.ist[:, IS_HW_TRIP] = tripped
        values, spoiled = _vector(rng, signal_map, spoil=trial % 4 == 3)
        gates_allowed = bool(rng.random() < 0.7)
        # what must be refused: an inverter's duty always; with a line side its
        # modulation, and a chopper's duty unless the watchdog has zeroed it
        must_refuse = spoiled.endswith(("duty_a", "duty_b", "duty_c")) or (
            not ideal_dc_links and (spoiled.endswith(".modulation") or (
                spoiled.endswith("chopper_duty") and gates_allowed)))
        outcome = [_refusal(fast.load, values, gates_allowed),
                   _refusal(lambda v, g: taken._apply(reference.commands(v, g)), values,
                            gates_allowed)]
        assert outcome[0] == outcome[1], (trial, outcome)
        assert (outcome[0] is not None) == must_refuse, (trial, spoiled, outcome)
        refused += must_refuse
        assert _state(loaded) == _state(taken), trial
    assert refused >= 40  # (the refusals were met, not only the plain loads)
