"""Transports chosen by URL through a registry (one class per scheme)."""

from __future__ import annotations

from collections.abc import Callable
from urllib.parse import parse_qs, urlsplit

from .base import Link, LinkError

_SCHEMES: dict[str, Callable[..., Link]] = {}


def register(scheme: str) -> Callable[[type[Link]], type[Link]]:
    """Class decorator: make a transport available under a URL scheme."""

    def wrap(cls: type[Link]) -> type[Link]:
        _SCHEMES[scheme] = cls
        return cls

    return wrap


def schemes() -> list[str]:
    """The URL schemes known."""
    return sorted(_SCHEMES)


def open_link(url: str, *, allow_remote: bool = False) -> Link:
    """A transport for a URL: ``udp://HOST:PORT?peer=HOST:PORT``,
    ``serial:///dev/ttyX?baud=N``, ``loop://NAME``. Call ``await link.open()`` next."""
    from . import loop, serial_link, udp  # noqa: F401  (register the schemes)

    parts = urlsplit(url)
    cls = _SCHEMES.get(parts.scheme)
    if cls is None:
        raise LinkError(f"{url}: unknown link scheme {parts.scheme!r}; use one of "
                        f"{', '.join(s + '://' for s in schemes())}")
    query = {k: v[-1] for k, v in parse_qs(parts.query, keep_blank_values=True).items()}
    link = cls(parts, query, allow_remote=allow_remote)
    link.url = url
    return link


def host_port(text: str, what: str, url: str) -> tuple[str, int]:
    """Split HOST:PORT, with a message naming the URL on error."""
    host, sep, port = text.rpartition(":")
    if not sep or not host or not port.isdigit() or not 0 <= int(port) <= 65535:
        raise LinkError(f"{url}: {what} must be HOST:PORT, got {text!r}")
    return host.strip("[]"), int(port)
