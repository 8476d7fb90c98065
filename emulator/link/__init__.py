"""The controller link: telegrams and bytes, never physics."""

from .base import Link, LinkError, LinkStats
from .registry import open_link

__all__ = ["Link", "LinkError", "LinkStats", "open_link"]
