"""UDP transport: one telegram per datagram, answering only the configured peer."""

from __future__ import annotations

import asyncio
import ipaddress
import os
import socket
from urllib.parse import SplitResult

from .base import Link, LinkError, host_port


def free_loopback_port() -> int:
    """A UDP port on 127.0.0.1 that nobody holds now (for a rig and a controller on one
    machine; another process may take it before it is bound again)."""
    return free_loopback_ports(1)[0]


def free_loopback_ports(count: int) -> list[int]:
    """``count`` different UDP ports on 127.0.0.1 that nobody holds now: all held at once
    while they are chosen, so that two calls in a row cannot be given the same port (the
    kernel may hand a port just let go out again). Another process may still take one
    before it is bound again."""
    held = [socket.socket(socket.AF_INET, socket.SOCK_DGRAM) for _ in range(count)]
    try:
        for s in held:
            s.bind(("127.0.0.1", 0))
        return [s.getsockname()[1] for s in held]
    finally:
        for s in held:
            s.close()


def _is_loopback(host: str) -> bool:
    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


class _Protocol(asyncio.DatagramProtocol):
    def __init__(self, link: UdpLink) -> None:
        self.link = link

    def datagram_received(self, data: bytes, addr) -> None:
        self.link._on_datagram(data, addr)

    def error_received(self, exc: Exception) -> None:
        self.link.stats.tx_errors += 1


class UdpLink(Link):
    """``udp://BIND_HOST:BIND_PORT?peer=HOST:PORT``; loopback only without allow_remote."""

    def __init__(self, parts: SplitResult, query: dict[str, str], *,
                 allow_remote: bool = False) -> None:
        super().__init__()
        url = parts.geturl()
        self.bind = host_port(parts.netloc, "the bind address", url)
        if "peer" not in query:
            raise LinkError(f"{url}: give the controller's address as ?peer=HOST:PORT")
        self.peer = host_port(query.pop("peer"), "peer", url)
        if query:
            raise LinkError(f"{url}: unknown option {sorted(query)[0]!r}")
        for host, what in ((self.bind[0], "bind"), (self.peer[0], "peer")):
            if not allow_remote and not _is_loopback(host):
                raise LinkError(f"{url}: {what} address {host} is not loopback; pass "
                                "--allow-remote to reach another machine")
        self._transport: asyncio.DatagramTransport | None = None
        self._sock: socket.socket | None = None
        self._peer_addrs: set[tuple[str, int]] = set()

    async def open(self) -> None:
        await super().open()
        loop = asyncio.get_running_loop()
        self._transport, _ = await loop.create_datagram_endpoint(
            lambda: _Protocol(self), local_addr=self.bind)
        sock = self._transport.get_extra_info("socket")
        sock.setsockopt(socket.SOL_SOCKET, socket.SO_RCVBUF, 1 << 20)
        self._sock = socket.socket(fileno=os.dup(sock.fileno()))  # for poll()
        self._sock.setblocking(False)
        infos = await loop.getaddrinfo(*self.peer, type=socket.SOCK_DGRAM)
        self._peer_addrs = {(info[4][0], info[4][1]) for info in infos}
        self._peer_addr = infos[0][4][:2]

    @property
    def local_address(self) -> tuple[str, int]:
        """The bound address (useful with port 0)."""
        assert self._transport is not None
        return self._transport.get_extra_info("sockname")[:2]

    def _on_datagram(self, data: bytes, addr) -> None:
        if (addr[0], addr[1]) not in self._peer_addrs:
            self.stats.foreign_dropped += 1
            return
        self._deliver(data)

    def poll(self) -> None:
        if self._sock is None:
            return
        while True:
            try:
                data, addr = self._sock.recvfrom(65536)
            except (BlockingIOError, InterruptedError):
                return
            except OSError:
                self.stats.tx_errors += 1  # e.g. ICMP port unreachable from a past send
                return
            self._on_datagram(data, addr)

    def send(self, payload: bytes) -> None:
        if self._transport is None:
            self.stats.tx_errors += 1
            return
        try:
            self._transport.sendto(payload, self._peer_addr)
            self.stats.sent += 1
        except OSError:
            self.stats.tx_errors += 1

    def close(self) -> None:
        if self._sock is not None:
            self._sock.close()
            self._sock = None
        if self._transport is not None:
            self._transport.close()
            self._transport = None
