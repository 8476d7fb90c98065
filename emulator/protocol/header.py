"""The telegram header and the rules around it: fields, flags both ways, what the rig
rejects, how ``period_us`` is read in each timing mode, and how lockstep is paced.

One definition for the rig, the reference controller, the board kit's generated header
and the README's protocol section (emulator/protocol/reference_text.py writes that
section from this module; tests/boardkit/test_protocol_text.py fails when they differ).
"""

from __future__ import annotations

from typing import NamedTuple

#: version 3: the map digest in the header, flags for framing errors and repeats, a
#: board's repeat request, fractional flags and periods that do not fit rejected
PROTOCOL_VERSION = 3


class HeaderField(NamedTuple):
    """One header element: integers on the wire (msgpack int, any width up to int64)."""

    name: str
    rig_to_controller: str
    controller_to_rig: str
    width: str  # integer width and wrap, for a board's variables


HEADER_FIELDS = (
    HeaderField("protocol_version", "the rig's protocol version",
                "the same version; any other is rejected", "small integer"),
    HeaderField("sequence", "the frame number k of this measurement",
                "the sequence of the measurement this command answers",
                "from 0, never wraps in a run (int64); a 32-bit board echoes it as it came"),
    HeaderField("time_us", "plant time t_k in microseconds",
                "free for the controller's use (not read)",
                "from 0, never wraps in a run (int64); a 32-bit board's low 32 bits wrap "
                "after 71.6 minutes"),
    HeaderField("period_us", "the length of this frame in microseconds",
                "0, or the period this command is meant for (see the period rules)",
                "100 .. 10 000"),
    HeaderField("flags", "the rig's status bits (rig flags below)",
                "the controller's request bits (controller flags below)", "unsigned"),
    HeaderField("map_digest", "the 32-bit digest of the rig's signal map",
                "0 (not checked), or the digest of the map the controller was built for; "
                "any other value is rejected", "unsigned 32 bit"),
)
HEADER = tuple(f.name for f in HEADER_FIELDS)
H_VERSION, H_SEQUENCE, H_TIME_US, H_PERIOD_US, H_FLAGS, H_MAP_DIGEST = range(len(HEADER))


class FlagBit(NamedTuple):
    """One bit of a header's flags."""

    value: int
    short: str  # a C-friendly name (the board kit's RR_FLAG_<SHORT>)
    meaning: str


# rig -> controller
FLAG_WATCHDOG = 1 << 0
FLAG_COMMAND_HELD = 1 << 1
FLAG_BAD_TELEGRAM = 1 << 2
FLAG_SEQUENCE = 1 << 3
FLAG_OVERRUN = 1 << 4
FLAG_FRAMING = 1 << 5
FLAG_REPEAT = 1 << 6

RIG_FLAGS = (
    FlagBit(FLAG_WATCHDOG, "watchdog", "watchdog: the rig blocked the gates (no valid "
            "command for longer than the watchdog allows)"),
    FlagBit(FLAG_COMMAND_HELD, "command_held",
            "no valid command for the last frame: the previous one was held"),
    FlagBit(FLAG_BAD_TELEGRAM, "bad_telegram",
            "a telegram was rejected since the last measurement"),
    FlagBit(FLAG_SEQUENCE, "sequence",
            "a sequence error (duplicate, late, unexpected) since the last measurement"),
    FlagBit(FLAG_OVERRUN, "overrun", "the rig overran (real time): its frame started "
            "more than one period late, or it left you less than your period to answer "
            "(the held frame is the rig's, not yours)"),
    FlagBit(FLAG_FRAMING, "framing", "a serial frame from you failed COBS or the CRC "
            "since the last measurement (dropped, counted)"),
    FlagBit(FLAG_REPEAT, "repeat", "this measurement was sent before: answer it again "
            "with your last command for it (lockstep: after a bad or missing telegram, "
            "or at your request)"),
)

# controller -> rig
CFLAG_REPEAT_REQUEST = 1 << 0

CONTROLLER_FLAGS = (
    FlagBit(CFLAG_REPEAT_REQUEST, "repeat_request",
            "lockstep: send the current measurement again (a board that lost one, or got "
            "a damaged frame); the telegram's sequence is not read and its values are not "
            "applied (they must be valid all the same: your last command will do), and it "
            "paces no frame. Real time: counted, nothing else (the next measurement is a "
            "period away). Other bits: reserved, send 0"),
)

#: why the rig refuses a command telegram (counted per kind; flag bit 2 set)
REJECTS = {
    "malformed": "not a msgpack array",
    "version": "another protocol version",
    "map": "a map digest that is neither 0 nor the rig's",
    "length": "not the header plus one value per command",
    "type": "a header field that is not an integer; a value that is not a number "
            "(booleans, strings, nil)",
    "non_finite": "NaN or infinity",
    "range": "a value outside its physical range; a negative period_us or flags",
    "fractional": "a flag, enum or count that is not a whole number",
    "period": "a period_us the mode does not allow (see the period rules)",
}

#: how period_us from the controller is read, per timing mode
PERIOD_RULES = {
    "lockstep": "0 steps the rig's period; 100 .. 10 000 steps that many microseconds "
                "(for controllers whose period varies)",
    "realtime": "0 or the rig's own period; the rig's clock paces, any other value is "
                "rejected (a board computing with another period is told, not ignored)",
    "afap": "as real time",
}

#: how lockstep paces, sentence by sentence (the README prints them in order)
LOCKSTEP_PACING = (
    "A valid command telegram answering the current measurement paces one frame: the "
    "plant advances and the next measurement goes out at once.",
    "A duplicate, late or unexpected sequence paces nothing (flag bit 3 on the next "
    "measurement).",
    "A rejected telegram, or a serial frame that fails COBS or the CRC, paces nothing: "
    "the rig sends the current measurement again at once with the repeat flag (bit 6), "
    "so one corrupted telegram costs one round trip. A fourth rejected telegram in a "
    "row for the same measurement runs the frame on the held command instead (flag bit "
    "1; the watchdog counts it): a board that keeps answering with a bad telegram meets "
    "the watchdog, not a frozen plant.",
    "A repeat request (controller flag bit 0) gets the current measurement again at "
    "once, also flagged as a repeat. After 64 immediate repeats in a row for damaged "
    "frames or requests, the silence timer paces them.",
    "After silence the rig sends the current measurement again: once the measured round "
    "trips allow, after their retransmission timeout (SRTT + 4 RTTVAR, RFC 6298), at "
    "least 2 periods and at most `railrig serve --lockstep-repeat-ms` (default 20 "
    "periods, also the wait before 8 round trips are measured); then at doubling "
    "intervals up to 1 s until a frame runs on a round trip without a repeat. Either "
    "side may start first, and a measurement lost on the way (or whose 0x00 delimiter "
    "was lost) is said again without a request.",
    "A repeated measurement carries the same sequence: answer it with the same command "
    "(do not run your control a second time for it). A second answer to a measurement "
    "the rig said again (of its last eight repeats) is counted as an answer to a "
    "repeat, not flagged as a sequence error, even when it arrives after a later "
    "repeat.",
)
