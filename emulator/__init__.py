"""railrig: a real-time traction-drive plant emulator for testing control firmware."""

from emulator.kernel_cache import refresh_kernel_cache

__version__ = "0.1.0"

refresh_kernel_cache()
