"""Who can reach the monitor: the socket's mode, its folder, the TCP endpoint's token."""

from __future__ import annotations

import asyncio
import os
import stat

import msgpack
import pytest

from emulator.link import open_link
from emulator.monitor.endpoint import Monitor, MonitorError
from emulator.rig.frame_loop import Rig
from tui.client import RigClient, RigConnectionError, private_dir, token_file


@pytest.fixture
def idle_rig(params):
    """A rig that is built but not running: the monitor serves clients all the same."""
    return Rig(params, open_link("loop://access-test"))


@pytest.fixture
def runtime(tmp_path, monkeypatch):
    where = tmp_path / "run"
    where.mkdir(mode=0o700)
    monkeypatch.setenv("XDG_RUNTIME_DIR", str(where))
    return where


async def test_the_socket_is_born_private(idle_rig, tmp_path, monkeypatch) -> None:
    # its mode is looked at when the server is handed the socket, before it listens
    seen = []
    real = asyncio.start_unix_server

    async def spy(*args, **kw):
        seen.append(stat.S_IMODE(os.stat(tmp_path / "m.sock").st_mode))
        return await real(*args, **kw)

    monkeypatch.setattr(asyncio, "start_unix_server", spy)
    before = os.umask(0o022)
    try:
        monitor = Monitor(idle_rig, str(tmp_path / "m.sock"))
        await monitor.start()
        assert os.umask(0o022) == 0o022  # the process's umask is given back
        monitor.close()
    finally:
        os.umask(before)
    assert seen == [0o600]


async def test_a_folder_others_may_write_into_is_refused(idle_rig, tmp_path) -> None:
    shared = tmp_path / "shared"
    shared.mkdir()
    shared.chmod(0o777)  # as /tmp is, without the sticky bit's protection of names
    with pytest.raises(MonitorError, match="writable by others"):
        await Monitor(idle_rig, str(shared / "m.sock")).start()
    assert not (shared / "m.sock").exists()


@pytest.mark.skipif(os.geteuid() != 0, reason="needs root to give a folder to another user")
def test_a_folder_of_another_user_is_refused(tmp_path) -> None:
    theirs = tmp_path / "theirs"
    theirs.mkdir(mode=0o700)
    os.chown(theirs, 4242, -1)
    with pytest.raises(PermissionError, match="belongs to user 4242"):
        private_dir(theirs)


def test_a_link_in_place_of_the_folder_is_refused(tmp_path) -> None:
    (tmp_path / "real").mkdir(mode=0o700)
    (tmp_path / "link").symlink_to(tmp_path / "real")
    with pytest.raises(PermissionError, match="not a folder"):
        private_dir(tmp_path / "link")


async def _raw(port: int, first: bytes | None) -> list[dict]:
    reader, writer = await asyncio.open_connection("127.0.0.1", port)
    if first is not None:
        writer.write(first)
    unpacker = msgpack.Unpacker(strict_map_key=False)
    seen = []
    while data := await asyncio.wait_for(reader.read(65536), 15):
        unpacker.feed(data)
        seen.extend(unpacker)
        if any(m.get("kind") == "hello" for m in seen):
            break
    writer.close()
    return seen


@pytest.mark.parametrize("first", [
    None,  # says nothing: closed after the time allowed
    msgpack.packb({"op": "pause"}),  # a command before the token
    msgpack.packb({"op": "auth", "token": "0" * 32}),  # a wrong token
    msgpack.packb({"op": "auth", "token": 12345}),
    b"\xc1\xc1\xc1",
])
async def test_tcp_without_the_token_gets_one_error_and_is_closed(idle_rig, runtime,
                                                                   monkeypatch, first) -> None:
    monkeypatch.setattr("emulator.monitor.endpoint.AUTH_TIMEOUT_S", 0.5)
    monitor = Monitor(idle_rig, "127.0.0.1:0")
    await monitor.start()
    try:
        port = monitor.where[1]
        seen = await _raw(port, first)
        assert [m["kind"] for m in seen] == ["error"]
        assert "token" in seen[0]["text"]
        assert monitor.counts["refused"] == 1 and monitor.clients == []
        assert not monitor.commands and monitor.counts["commands"] == 0  # nothing queued
    finally:
        monitor.close()


async def test_the_token_file_is_private_and_the_client_reads_it(idle_rig, runtime) -> None:
    monitor = Monitor(idle_rig, "127.0.0.1:0")
    await monitor.start()
    port = monitor.where[1]
    path = token_file(port)
    try:
        assert path.parent == runtime
        assert stat.S_IMODE(path.stat().st_mode) == 0o600
        seen = await _raw(port, msgpack.packb({"op": "auth", "token": monitor.token}))
        assert seen[0]["kind"] == "hello"
        client = RigClient(f"127.0.0.1:{port}")  # as railrig dash: the token from the file
        hello = await client.connect()
        assert hello["kind"] == "hello"
        client.close()
        with pytest.raises(RigConnectionError, match="refused"):
            await RigClient(f"127.0.0.1:{port}", token="f" * 32).connect()
    finally:
        monitor.close()
    assert not path.exists()  # the rig takes its token with it


async def test_a_client_without_a_token_file_is_told_what_to_do(runtime) -> None:
    with pytest.raises(RigConnectionError, match="--token"):
        await RigClient("127.0.0.1:9").connect()
