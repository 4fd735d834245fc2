#!/usr/bin/env python3
"""Writes the committed corpus of bad captures in tests/data/bad/ (standard library
only). Every file here must make iqaudit fail with a clear error, never panic.
Run from the repository root: python3 tests/data/bad/make_bad_files.py"""
import os
import struct

HERE = os.path.dirname(os.path.abspath(__file__))


def wav(channels, bits=16, fmt_tag=1, data=b"", declared=None, rate=48000):
    block = channels * bits // 8
    fmt = struct.pack("<HHIIHH", fmt_tag, channels, rate, rate * block, block, bits)
    size = len(data) if declared is None else declared
    body = b"WAVE" + b"fmt " + struct.pack("<I", len(fmt)) + fmt + b"data" + struct.pack("<I", size) + data
    return b"RIFF" + struct.pack("<I", len(body)) + body


def put(name, content, mode="wb"):
    with open(os.path.join(HERE, name), mode) as f:
        f.write(content)


good = wav(2, data=bytes(range(16)))
put("truncated-header.wav", good[:30])
put("zero-channels.wav", wav(0, data=b""))
put("one-channel.wav", wav(1, data=bytes(8)))
put("three-channels.wav", wav(3, data=bytes(12)))
put("data-longer-than-file.wav", wav(2, data=bytes(8), declared=4000))
put("odd-data-chunk.wav", wav(2, data=bytes(7)))
put("compressed-format-tag.wav", wav(2, fmt_tag=2, data=bytes(16)))
put("not-riff.wav", b"this is not a wave file at all\n")
put("empty.cf32", b"")
put("no-extension", bytes(16))
put("bad-json.sigmf-data", bytes(16))
put("bad-json.sigmf-meta", b'{"global": {"core:datatype": "cf32_le",', "wb")
put("unknown-datatype.sigmf-data", bytes(16))
put("unknown-datatype.sigmf-meta",
    b'{"global":{"core:datatype":"ri16_le","core:version":"1.2.0"},"captures":[],"annotations":[]}\n')
