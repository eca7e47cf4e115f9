#!/usr/bin/env python3
"""Writes the malformed-capture corpus beside this script (Python 3 standard library only).

    python3 tests/malformed/make_malformed.py

Every file is small and named after what it breaks. The expected outcome of each (exit status
and message) is the table in tests/malformed.rs, which also checks that this folder holds
exactly the files the table names. The output is deterministic (fixed seed), so re-running the
script reproduces the committed files byte for byte.

WAV layout: the canonical RIFF/WAVE layout (a "fmt " chunk of 16 bytes for PCM and IEEE float,
40 bytes for WAVE_FORMAT_EXTENSIBLE, then a "data" chunk), common practice.
"""

import json
import math
import os
import random
import struct

HERE = os.path.dirname(os.path.abspath(__file__))
RNG = random.Random(20240808)

# Format tags and the sub-format GUID of WAVE_FORMAT_EXTENSIBLE PCM (common practice).
PCM = 0x0001
ADPCM = 0x0002
IEEE_FLOAT = 0x0003
EXTENSIBLE = 0xFFFE
GUID_PCM = bytes.fromhex("0100000000001000800000aa00389b71")

written = []


def put(name, data):
    with open(os.path.join(HERE, name), "wb") as f:
        f.write(data)
    written.append(name)


def fmt_chunk(tag, channels, rate, bits, block_align=None, byte_rate=None, extra=b""):
    if block_align is None:
        block_align = channels * ((bits + 7) // 8)
    if byte_rate is None:
        byte_rate = rate * block_align
    body = struct.pack("<HHIIHH", tag, channels, rate, byte_rate, block_align, bits) + extra
    return b"fmt " + struct.pack("<I", len(body)) + body


def chunk(kind, body, declared=None):
    n = len(body) if declared is None else declared
    return kind + struct.pack("<I", n) + body


def riff(*chunks, form=b"WAVE"):
    body = form + b"".join(chunks)
    return b"RIFF" + struct.pack("<I", len(body)) + body


def wav(channels, rate, bits, data, tag=PCM, declared=None, **kw):
    return riff(fmt_chunk(tag, channels, rate, bits, **kw), chunk(b"data", data, declared))


def i16(values):
    return b"".join(struct.pack("<h", max(-32768, min(32767, v))) for v in values)


def f32(values):
    return b"".join(struct.pack("<f", v) for v in values)


def f64(values):
    return b"".join(struct.pack("<d", v) for v in values)


def quiet_f32(n):
    """Small finite noise around zero, as floats."""
    return [RNG.uniform(-0.01, 0.01) for _ in range(n)]


def with_bad_value(values, index, bad):
    values = list(values)
    values[index] = bad
    return values


SUBNORMAL = 1e-40  # below f32's smallest normal 1.18e-38 (IEEE 754 binary32), common practice
F32_MAX = 3.4028234663852886e38  # IEEE 754 binary32 largest finite, common practice

# --- raw captures (extension = SigMF datatype; the test passes --rate) -------------------------

put("zero-length.cu8", b"")
put("one-byte.cu8", b"\x80")
put("odd-byte-count.cu8", bytes([127, 128] * 500) + b"\x80")
put("odd-byte-count.ci16_le", i16([0, 0] * 500) + b"\x00\x00")
put("odd-byte-count.cf32_le", f32(quiet_f32(1000)) + b"\x00\x00\x00")
put("seven-bytes-short-of-a-sample.cf64_be", b"\x00" * (16 * 100 + 9))
put("one-sample.cu8", b"\x80\x80")
# Idle, then the carrier at full scale to the end: one mark that never closes.
put("carrier-on-to-the-end.ru8", bytes([0] * 5000 + [255] * 45000))
put("no-rate-given.cu8", bytes([128] * 2000))
put("zero-rate.cu8", bytes([128] * 2000))
put("negative-rate.cu8", bytes([128] * 2000))
put("nan-rate.cu8", bytes([128] * 2000))
put("rate-below-one-hz.ru8", bytes([0] * 2000))
put("rate-above-1-thz.ru8", bytes([0] * 2000))
put("unknown-extension.bin", bytes([128] * 2000))
put("datatype-cu8_le-given.bin", bytes([128] * 2000))
put("nan-in-cf32_le.cf32_le", f32(with_bad_value(quiet_f32(2000), 1001, math.nan)))
put("inf-in-cf32_le.cf32_le", f32(with_bad_value(quiet_f32(2000), 3, math.inf)))
put("nan-in-rf32_le.rf32_le", f32(with_bad_value(quiet_f32(2000), 0, math.nan)))
put("minus-inf-in-rf32_le.rf32_le", f32(with_bad_value(quiet_f32(2000), 1999, -math.inf)))
put("subnormal-cf32_le.cf32_le", f32([SUBNORMAL * RNG.choice([-1, 1]) for _ in range(20000)]))
put("subnormal-rf32_le.rf32_le", f32([SUBNORMAL * RNG.random() for _ in range(20000)]))
put("f32-max-everywhere.cf32_le", f32([F32_MAX, -F32_MAX] * 10000))
put("f64-beyond-f32-range.cf64_le", f64([1e300, -1e300] * 1000))
put("all-zero.ci16_le", b"\x00" * 40000)
put("all-zero-bytes.cu8", b"\x00" * 40000)
put("all-clipped-high.cu8", b"\xff" * 40000)
put("all-clipped-alternating.ci16_le", i16([32767, -32768] * 10000))
put("pure-noise.cu8", bytes(RNG.getrandbits(8) for _ in range(100000)))
put("pure-noise.ri16_le", i16([int(RNG.gauss(0, 3000)) for _ in range(50000)]))
# On/off every 2 samples: regular, but far faster than any mark the edge stage accepts.
put("chatter-every-sample.ru8", bytes(([255, 255, 0, 0]) * 25000))

# --- WAV -------------------------------------------------------------------------------------

good16 = i16([int(RNG.gauss(0, 300)) for _ in range(4000)])

put("wav-zero-length.wav", b"")
put("wav-riff-tag-only.wav", b"RIFF")
put("wav-truncated-header.wav", wav(1, 48000, 16, good16)[:30])
put("wav-riff-without-wave.wav", riff(fmt_chunk(PCM, 1, 48000, 16), chunk(b"data", good16), form=b"AVI "))
put("wav-data-size-past-end.wav", wav(1, 48000, 16, good16, declared=len(good16) * 4))
put("wav-data-size-4-gib.wav", wav(1, 48000, 16, good16, declared=0xFFFFFFFE))
put("wav-zero-channels.wav", wav(0, 48000, 16, good16, block_align=2, byte_rate=96000))
put("wav-three-channels.wav", wav(3, 48000, 16, i16([0] * 3000)))
put("wav-zero-sample-rate.wav", wav(1, 0, 16, good16))
put("wav-float-64-bit.wav", wav(1, 48000, 64, f64([0.0] * 1000), tag=IEEE_FLOAT))
put("wav-12-bit-pcm.wav", wav(1, 48000, 12, good16, block_align=2))
ext12 = struct.pack("<HHI", 22, 12, 0x4) + GUID_PCM
put("wav-12-bit-extensible.wav", wav(1, 48000, 16, good16, tag=EXTENSIBLE, extra=ext12))
put("wav-no-data-chunk.wav", riff(fmt_chunk(PCM, 1, 48000, 16)))
put("wav-data-before-fmt.wav", riff(chunk(b"data", good16), fmt_chunk(PCM, 1, 48000, 16)))
put("wav-empty-data-chunk.wav", wav(1, 48000, 16, b""))
put("wav-adpcm.wav", wav(1, 48000, 8, b"\x00" * 1000, tag=ADPCM))
put("wav-data-not-whole-samples.wav", wav(1, 48000, 16, good16 + b"\x01"))
put("wav-stereo-odd-value-count.wav", wav(2, 48000, 16, i16([0, 0, 0])))
put("wav-fmt-chunk-too-small.wav", riff(chunk(b"fmt ", b"\x01\x00\x01\x00" + b"\x00" * 6), chunk(b"data", good16)))
put("wav-inconsistent-byte-rate.wav", wav(1, 48000, 16, good16, byte_rate=12345))
put("wav-unknown-chunk-past-end.wav", riff(fmt_chunk(PCM, 1, 48000, 16), chunk(b"LIST", b"x" * 10, declared=0x7FFFFFFF)))
put("wav-nan-float.wav", wav(1, 48000, 32, f32(with_bad_value(quiet_f32(4000), 2000, math.nan)), tag=IEEE_FLOAT))
put("wav-inf-float.wav", wav(2, 48000, 32, f32(with_bad_value(quiet_f32(4000), 7, math.inf)), tag=IEEE_FLOAT))
put("wav-subnormal-float.wav", wav(1, 48000, 32, f32([SUBNORMAL] * 20000), tag=IEEE_FLOAT))
put("wav-all-zero.wav", wav(1, 48000, 16, i16([0] * 20000)))
put("wav-all-clipped.wav", wav(1, 48000, 16, i16([32767] * 20000)))
put("wav-pure-noise.wav", wav(1, 48000, 16, i16([int(RNG.gauss(0, 8000)) for _ in range(48000)])))
put("wav-iq-pure-noise.wav", wav(2, 250000, 8, bytes(RNG.getrandbits(8) for _ in range(100000))))

# --- SigMF (the test opens NAME.sigmf-meta) ---------------------------------------------------


def sigmf(name, meta, data=None):
    text = meta if isinstance(meta, (bytes, str)) else json.dumps(meta, indent=2)
    if isinstance(text, str):
        text = text.encode()
    put(name + ".sigmf-meta", text)
    if data is not None:
        put(name + ".sigmf-data", data)


def meta(global_=None, captures=None, drop=()):
    g = {"core:datatype": "cu8", "core:version": "1.2.0", "core:sample_rate": 1000000.0}
    g.update(global_ or {})
    for k in drop:
        g.pop(k, None)
    return {"global": g, "captures": captures if captures is not None else [{"core:sample_start": 0}], "annotations": []}


idle = bytes([128] * 4000)
sigmf("sigmf-missing-datatype", meta(drop=["core:datatype"]), idle)
sigmf("sigmf-datatype-cu8_le", meta({"core:datatype": "cu8_le"}), idle)
sigmf("sigmf-datatype-not-a-string", meta({"core:datatype": 8}), idle)
sigmf("sigmf-missing-version", meta(drop=["core:version"]), idle)
sigmf("sigmf-version-not-a-string", meta({"core:version": 1.2}), idle)
sigmf("sigmf-negative-sample-rate", meta({"core:sample_rate": -1000000.0}), idle)
sigmf("sigmf-zero-sample-rate", meta({"core:sample_rate": 0}), idle)
sigmf("sigmf-absurd-sample-rate", meta({"core:sample_rate": 1e300}), idle)
sigmf("sigmf-sample-rate-as-string", meta({"core:sample_rate": "1e6"}), idle)
sigmf("sigmf-sample-rate-out-of-double-range", json.dumps(meta()).replace("1000000.0", "1e400"), idle)
sigmf("sigmf-no-sample-rate", meta(drop=["core:sample_rate"]), idle)
sigmf("sigmf-missing-data-file", meta())
sigmf("sigmf-data-shorter-than-one-sample", meta({"core:datatype": "cf32_le"}), b"\x00" * 5)
sigmf("sigmf-empty-data-file", meta(), b"")
sigmf("sigmf-header-bytes-past-end", meta(captures=[{"core:sample_start": 0, "core:header_bytes": 4001}]), idle)
sigmf("sigmf-header-bytes-negative", meta(captures=[{"core:sample_start": 0, "core:header_bytes": -8}]), idle)
sigmf("sigmf-sample-start-past-end", meta(captures=[{"core:sample_start": 2000}]), idle)
sigmf("sigmf-frequency-not-a-number", meta(captures=[{"core:sample_start": 0, "core:frequency": "433.92 MHz"}]), idle)
sigmf("sigmf-invalid-json", b'{"global": {"core:datatype": "cu8",', idle)
sigmf("sigmf-empty-meta", b"", idle)
sigmf("sigmf-meta-is-an-array", b"[]", idle)
sigmf("sigmf-meta-not-utf8", b'{"global": {"core:datatype": "\xff\xfe"}}', idle)
sigmf("sigmf-deeply-nested-json", b'{"global": ' + b"[" * 20000 + b"]" * 20000 + b"}", idle)
sigmf("sigmf-num-channels-2", meta({"core:num_channels": 2}), idle)
sigmf("sigmf-nan-in-cf32_le", meta({"core:datatype": "cf32_le"}), f32(with_bad_value(quiet_f32(2000), 500, math.nan)))
sigmf("sigmf-pure-noise", meta({"core:datatype": "ci8"}), bytes(RNG.getrandbits(8) for _ in range(100000)))

names = sorted(written)
print(f"wrote {len(names)} files in {HERE}")
