"""Pure physics of the traction drive: numbers in, numbers out (numpy and numba only)."""

from .stepper import CommandError, Commands, EnergyAccount, Plant

__all__ = ["CommandError", "Commands", "EnergyAccount", "Plant"]
