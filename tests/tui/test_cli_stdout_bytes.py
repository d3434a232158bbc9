"""A table's lines given to stdout as bytes (``common.write_out_bytes``).

[D] The bytes reach stdout as the text they encode would: after the text written
before them, whole when the byte stream takes a part at a time (an unbuffered
stdout), and through the text layer when stdout does not write UTF-8.
"""

from __future__ import annotations

import io
import sys

from chaintriage.tui.cli import common


class _Trickle(io.RawIOBase):
    """A byte stream that takes at most three bytes per write."""

    def __init__(self) -> None:
        self.got = bytearray()

    def writable(self) -> bool:
        return True

    def write(self, b) -> int:
        part = bytes(b[:3])
        self.got += part
        return len(part)


def test_bytes_follow_the_text_written_before(monkeypatch):
    raw = io.BytesIO()
    out = io.TextIOWrapper(raw, encoding="utf-8", newline="")
    monkeypatch.setattr(sys, "stdout", out)
    common.write_out("heading\n")
    common.write_out_bytes("caf\u00e9,1\n".encode("utf-8"))
    common.write_out("end\n")
    out.flush()
    assert raw.getvalue().decode("utf-8") == "heading\ncaf\u00e9,1\nend\n"


def test_an_unbuffered_stdout_gets_every_byte(monkeypatch):
    trickle = _Trickle()
    out = io.TextIOWrapper(trickle, encoding="utf-8", newline="", write_through=True)
    monkeypatch.setattr(sys, "stdout", out)
    data = b"".join(b"%d,x\n" % i for i in range(1000))
    common.write_out_bytes(memoryview(data))
    assert bytes(trickle.got) == data


def test_another_encoding_gets_text(monkeypatch):
    raw = io.BytesIO()
    out = io.TextIOWrapper(raw, encoding="latin-1", newline="")
    monkeypatch.setattr(sys, "stdout", out)
    common.write_out_bytes("caf\u00e9\n".encode("utf-8"))
    out.flush()
    assert raw.getvalue() == "caf\u00e9\n".encode("latin-1")


def test_a_stdout_without_bytes_gets_text(monkeypatch):
    out = io.StringIO()
    monkeypatch.setattr(sys, "stdout", out)
    common.write_out_bytes(bytearray(b"a,b\n"))
    assert out.getvalue() == "a,b\n"
