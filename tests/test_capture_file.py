"""The capture file's header and end: what is not a vkit capture is refused unread, what was cut short is named.

Both formats are the ones the harness templates write (vkit/sim/templates/harness.v.j2, harness.vhd.j2):
binary, a 16-byte header "VKCB", version, family, data width, then 12-byte records for 8-bit data;
text, a header line ``# vkit capture VERSION FAMILY`` then ``CLOCK KIND ARG`` lines, ``E`` last.
"""

from __future__ import annotations

import struct

import pytest

from vkit.core.errors import ConfigError
from vkit.sim.fast.capture_file import parse_capture_text, truncation
from vkit.sim.fast.wire import CAPTURE_MAGIC, CAPTURE_VERSION, capture_record_bytes


def _binary(events: list[tuple[int, str, int]]) -> bytes:
    head = struct.pack("<4I", CAPTURE_MAGIC, CAPTURE_VERSION, 0, 8)
    return head + b"".join(struct.pack("<3I", clock, ord(kind), value) for clock, kind, value in events)


def test_binary_records_are_12_bytes_for_8_bit_data():
    assert capture_record_bytes(8) == 12  # the size _binary writes


def test_complete_files_are_not_truncated(tmp_path):
    b = tmp_path / "c.bin"
    b.write_bytes(_binary([(3, "P", 7), (4, "L", 0), (9, "E", 0)]))
    t = tmp_path / "c.txt"
    t.write_text(f"# vkit capture {CAPTURE_VERSION} video\n3 P 07\n4 L -\n9 E -\n")
    assert truncation(b) is None and truncation(t) is None


@pytest.mark.parametrize(("content", "why"), [
    (_binary([(3, "P", 7), (4, "L", 0)]), "it stops at clock 4 without the end-of-run event"),
    (_binary([(3, "P", 7), (9, "E", 0)])[:-5], "its last record is cut after 7 of 12 bytes"),
    (_binary([]), "it holds the header and no event"),
    (_binary([])[:10], "it holds 10 bytes, fewer than the 16-byte header"),
    (b"# vkit capture 1 video\n3 P 07\n4 L -\n", "it stops at '4 L -' without the end-of-run line"),
    (b"# vkit capture 1 video\n3 P 07\n4 L", "its last line is cut mid-line"),
])
def test_truncated_files_say_where_they_stop(tmp_path, content, why):
    p = tmp_path / "cap"
    p.write_bytes(content)
    assert truncation(p) == why


def test_random_bytes_are_not_a_capture(tmp_path):
    p = tmp_path / "junk.bin"
    p.write_bytes(bytes((i * 31 + 5) % 256 for i in range(300)))
    with pytest.raises(ConfigError, match=r"is not a vkit capture file \(it starts with neither the binary header VKCB"):
        truncation(p)


def test_text_header_names_a_version_this_vkit_reads():
    with pytest.raises(ConfigError, match=r"^capture text: format version 9, this vkit reads 1; rebuild the harness"):
        parse_capture_text("# vkit capture 9 video\n1 E -\n")
    assert len(parse_capture_text(f"# vkit capture {CAPTURE_VERSION} video\n1 P 0a\n2 E -\n")) == 1
