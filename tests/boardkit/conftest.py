"""Builds the board kit once per session: the kit for the demo trainset (with its
Makefile) and the codec's test harness (with the sanitizers where the compiler has them).
"""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import pytest

from emulator.boardkit.generate import write_kit
from emulator.profiles.reader import load_trainset

HERE = Path(__file__).parent
PROFILES = HERE.parents[1] / "profiles" / "trainsets"
STRICT = ["-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic"]
SANITIZE = ["-fsanitize=address,undefined", "-fno-sanitize-recover=all", "-g"]


def c_compiler() -> str:
    cc = shutil.which("cc") or shutil.which("gcc") or shutil.which("clang")
    if cc is None:
        pytest.skip("no C compiler on this machine (the kit's C tests need cc, gcc or clang)")
    return cc


@pytest.fixture(scope="session")
def kit_dir(tmp_path_factory) -> Path:
    """The demo trainset's kit, generated, with example_controller built by its Makefile."""
    c_compiler()
    out = tmp_path_factory.mktemp("kit")
    write_kit(load_trainset(PROFILES / "tern-25kv.toml"), out)
    done = subprocess.run(["make", "-C", str(out)], capture_output=True, text=True)
    assert done.returncode == 0, done.stdout + done.stderr
    return out


class Harness:
    """The codec harness (tests/boardkit/codec_harness.c) as a long-lived process."""

    def __init__(self, argv: list[str], sanitized: bool) -> None:
        self.sanitized = sanitized
        self.proc = subprocess.Popen(argv, stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                                     stderr=subprocess.PIPE, text=True, bufsize=1)

    def ask(self, *words: str) -> tuple[bool, str]:
        assert self.proc.stdin is not None and self.proc.stdout is not None
        self.proc.stdin.write(" ".join(words) + "\n")
        self.proc.stdin.flush()
        reply = self.proc.stdout.readline()
        if not reply:
            err = self.proc.stderr.read() if self.proc.stderr else ""
            raise AssertionError(f"the harness died on {' '.join(words)[:200]}: {err[-2000:]}")
        status, _, rest = reply.strip().partition(" ")
        return status == "ok", rest

    def close(self) -> str:
        """Stop the harness; returns what it wrote to stderr (the sanitizers' reports)."""
        assert self.proc.stdin is not None
        self.proc.stdin.close()
        self.proc.wait(timeout=30)
        return self.proc.stderr.read() if self.proc.stderr else ""


@pytest.fixture(scope="session")
def host_harness(kit_dir: Path, tmp_path_factory):
    """The harness built by the host's compiler, with the sanitizers where it has them."""
    cc = c_compiler()
    exe = tmp_path_factory.mktemp("harness") / "codec_harness"
    sources = [str(HERE / "codec_harness.c"), str(kit_dir / "railrig_codec.c"),
               str(kit_dir / "railrig_fec.c"),
               f"-I{kit_dir}", "-o", str(exe)]
    sanitized = subprocess.run([cc, *STRICT, *SANITIZE, *sources],
                               capture_output=True).returncode == 0
    if not sanitized:  # a compiler without the sanitizers' runtime: plain, and said so
        print("codec harness built without -fsanitize (not available here)")
        done = subprocess.run([cc, *STRICT, "-O1", *sources], capture_output=True, text=True)
        assert done.returncode == 0, done.stderr
    h = Harness([str(exe)], sanitized)
    yield h
    err = h.close()
    assert h.proc.returncode == 0, err
    assert "runtime error" not in err and "AddressSanitizer" not in err, err


#: Debian's cross compiler for 32-bit ARM (hard float) and qemu's user-mode emulator
ARM_CC, QEMU_ARM = "arm-linux-gnueabihf-gcc", "qemu-arm"


@pytest.fixture(scope="session")
def arm32_harness(kit_dir: Path, tmp_path_factory):
    """The harness cross-built for 32-bit ARM (a board's word size: 32-bit size_t and
    long) and run under qemu-user; skipped, with the reason, where the tools are not
    installed (Debian: gcc-arm-linux-gnueabihf, libc6-dev-armhf-cross, qemu-user)."""
    missing = [tool for tool in (ARM_CC, QEMU_ARM) if shutil.which(tool) is None]
    if missing:
        pytest.skip(f"32-bit ARM build not tried: {', '.join(missing)} not installed "
                    "(Debian: apt-get install gcc-arm-linux-gnueabihf libc6-dev-armhf-cross "
                    "qemu-user)")
    exe = tmp_path_factory.mktemp("harness-arm") / "codec_harness"
    done = subprocess.run([ARM_CC, *STRICT, "-O1", "-static", str(HERE / "codec_harness.c"),
                           str(kit_dir / "railrig_codec.c"), str(kit_dir / "railrig_fec.c"),
                           f"-I{kit_dir}", "-o", str(exe)],
                          capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
    h = Harness([QEMU_ARM, str(exe)], sanitized=False)
    yield h
    err = h.close()
    assert h.proc.returncode == 0, err


@pytest.fixture(scope="session", params=["host", "arm32"])
def harness(request):
    """Each codec test runs on the host's build and on the 32-bit ARM build."""
    return request.getfixturevalue(f"{request.param}_harness")
