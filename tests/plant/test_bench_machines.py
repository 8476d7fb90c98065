"""The plant benchmark's ratio against solve_ivp is only a ratio if both sides solve the
same problem. Our plant set up by the benchmark (held voltages, free shafts, linear
magnetising inductance, no core loss, friction or windage) must land where SciPy's
DOP853 at rtol 1e-12 lands, to the accuracy our step has when the matrices are refreshed
at each of many small sub-steps."""

from __future__ import annotations

import dataclasses

import numpy as np

from emulator.bench.plant import _Machines
from emulator.profiles.reader import PROFILES_DIR, load_trainset


def _apart(substep_s: float) -> tuple[float, float, _Machines, np.ndarray]:
    """(flux, speed) relative distances of our frame from DOP853 at rtol 1e-12, with the
    matrices refreshed at each sub-step of the given length; the problem and reference."""
    params = dataclasses.replace(load_trainset(PROFILES_DIR / "trainsets" / "tern-25kv.toml"),
                                 substep_s=substep_s)
    problem = _Machines(params)
    plant = problem.plant()
    plant.refresh_each_substep = True
    plant.advance(None)
    ref = problem.reference()
    return (*problem.apart(problem.state(plant), ref), problem, ref)


def test_the_benchmark_plant_solves_solve_ivps_problem() -> None:
    # machine.py's step is exact for a frozen speed; refreshed each sub-step, the speed's
    # change within it leaves a second-order error. So if both sides solve the same
    # problem, our distance from the reference falls by 4 when the sub-step halves (the
    # order of accuracy observed as in any convergence study: a ratio of 2^p); a term one
    # side leaves out (friction, windage) would instead hold the distance at its own
    # size, and the ratio would fall towards 1
    flux_20, speed_20, _, _ = _apart(20e-6)
    flux_10, speed_10, problem, ref = _apart(10e-6)
    assert 3.5 < flux_20 / flux_10 < 4.5, (flux_20, flux_10)
    assert 3.5 < speed_20 / speed_10 < 4.5, (speed_20, speed_10)
    assert np.abs(ref[4 * problem.n:] - problem.omega0).min() > 1e-3  # the shafts did move
