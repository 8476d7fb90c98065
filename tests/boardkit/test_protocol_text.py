"""The protocol as written for board developers agrees with the code: the README's
rules block (header, flags both ways, rejections, period rules, lockstep pacing) is what
the code writes, and the generated header's every index, scale and range, read back
from the text a board compiles, is the rig's map."""

from __future__ import annotations

import re
from pathlib import Path

from emulator.link.telegram import HEADER_LEN, REJECT_KINDS
from emulator.protocol.header import CONTROLLER_FLAGS, HEADER, REJECTS
from emulator.protocol.reference_text import BEGIN, END, protocol_rules_markdown
from emulator.protocol.signal_map import FLAG_NAMES, PROTOCOL_VERSION, build_signal_map
from tests.boardkit.conftest import PROFILES

README = Path(__file__).parents[2] / "README.md"


def test_readme_protocol_rules_are_the_ones_the_code_writes() -> None:
    # the block between the markers is railrig protocol --readme's output, verbatim
    text = README.read_text(encoding="utf-8")
    assert text.count(BEGIN) == 1 and text.count(END) == 1, "the README's markers are gone"
    block = text[text.index(BEGIN):text.index(END) + len(END)] + "\n"
    assert block == protocol_rules_markdown(), (
        "README and code disagree: paste `railrig protocol --readme` between the markers")
    assert re.findall(r"`protocol_version` is (\d+)", text) == [str(PROTOCOL_VERSION)]
    rows = re.findall(r"^\| (\d+) \((\d+)\) \|", block, flags=re.MULTILINE)
    assert {int(value) for _, value in rows} == (set(FLAG_NAMES)
                                                 | {f.value for f in CONTROLLER_FLAGS})
    assert all(int(value) == 1 << int(bit) for bit, value in rows)


def test_every_rejection_the_rig_counts_is_written() -> None:
    # the codec's kinds and the rig's own ("period": tests/link/test_protocol_rules.py),
    # each with its reason in REJECTS; the link layer's header length is the protocol's
    assert set(REJECT_KINDS) | {"period"} == set(REJECTS)
    assert len(HEADER) == HEADER_LEN


def test_the_codec_and_the_map_agree_on_the_header(kit_dir) -> None:
    codec_h = (kit_dir / "railrig_codec.h").read_text(encoding="utf-8")
    assert f"#define RR_TELEGRAM_HEADER_LEN {len(HEADER)}" in codec_h


def test_header_is_the_map(kit_dir) -> None:
    from emulator.boardkit.generate import c_name
    from emulator.profiles.reader import load_trainset

    sm = build_signal_map(load_trainset(PROFILES / "tern-25kv.toml"))
    header = (kit_dir / "railrig_map.h").read_text(encoding="utf-8")
    defines = dict(re.findall(r"^#define (\w+) (.+?)(?: /\*.*)?$", header, flags=re.MULTILINE))
    assert int(defines["RR_PROTOCOL_VERSION"]) == sm.version
    assert int(defines["RR_MAP_DIGEST"].rstrip("u"), 16) == sm.digest()
    for prefix, signals in (("Y", sm.measurements), ("U", sm.commands)):
        for i, s in enumerate(signals):
            name = f"RR_{prefix}_{c_name(s.name)}"
            assert int(defines[name]) == i, name
            assert float(defines[name + "_SCALE"]) == s.scale, name
            line = next(x for x in header.splitlines() if x.startswith(f"#define {name} "))
            assert f"{s.lo:g} .. {s.hi:g}" in line and s.unit in line, line


def test_kit_of_a_dc_fed_trainset_builds(tmp_path) -> None:
    # no line side: the header has no switchgear, the example's DC-fed branch compiles
    import dataclasses
    import subprocess

    from emulator.boardkit.generate import write_kit
    from emulator.profiles.reader import load_trainset
    from tests.boardkit.conftest import c_compiler

    c_compiler()
    params = dataclasses.replace(load_trainset(PROFILES / "tern-25kv.toml"), transformer=None,
                                 line_converter=None, line_converters=())
    write_kit(params, tmp_path)
    assert "#define RR_HAS_LINE_SIDE 0" in (tmp_path / "railrig_map.h").read_text()
    done = subprocess.run(["make", "-C", str(tmp_path)], capture_output=True, text=True)
    assert done.returncode == 0, done.stdout + done.stderr


def test_each_shipped_trainset_has_its_own_digest() -> None:
    # the same signal layout at 25 kV 50 Hz and 15 kV 16.7 Hz: a board built for one
    # must not take the other's measurements (its PLL, its voltage scaling)
    from emulator.profiles.reader import load_trainset

    digests = {p.name: build_signal_map(load_trainset(p)).digest()
               for p in sorted(PROFILES.glob("*.toml"))}
    assert len(digests) >= 2 and len(set(digests.values())) == len(digests), digests
