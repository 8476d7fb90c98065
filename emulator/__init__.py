"""railrig: a real-time traction-drive plant emulator for testing control firmware."""

__version__ = "0.1.0"
