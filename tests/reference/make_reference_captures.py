#!/usr/bin/env python3
"""Independent reference captures for ooksift, each with its own truth file.

Usage:  python3 tests/reference/make_reference_captures.py OUTDIR

This generator shares no code with ooksift: it builds its timelines, signals and truth
values from its own parameters with numpy and scipy only, so ooksift's decoder can be
checked against something it did not make. Everything is deterministic (fixed seeds,
numpy ``default_rng``); with the pinned versions in ``requirements.txt`` a rerun writes
the same bytes (``.ci/check-reference`` checks that).

Scenario: the invented "Harrowgate Lane" workshop and three of its buttons:

* ``ref-gate-pwm.cu8``        gate button, 24-bit PWM, raw IQ (cu8) at 250 kHz
* ``ref-chime-ppm.wav``       chime button, 32-bit pulse-distance code, a receiver's
                              demodulated envelope as 16-bit mono WAV at 48 kHz
* ``ref-lamp-pwm.sigmf-*``    lamp-left button, 16-bit PWM, SigMF ci16_le at 500 kHz

Each capture gets ``NAME.truth.json``. See ``tests/reference/README.md`` for the
parameters, sample conventions and SNR definitions.

Time bookkeeping is in integer microseconds so the truth values are exact; only the
rendering of samples uses floating point.
"""

from __future__ import annotations

import argparse
import hashlib
import json
import math
import sys
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import scipy
from scipy.io import wavfile

GENERATOR_PATH = "tests/reference/make_reference_captures.py"

# --------------------------------------------------------------------------------------
# key_id: 64-bit FNV-1a of "{line_code}:{bits}", folded to 32 bits (ooksift DESIGN contract)
# --------------------------------------------------------------------------------------
FNV64_OFFSET = 0xCBF29CE484222325
FNV64_PRIME = 0x100000001B3
MASK64 = (1 << 64) - 1


def fnv1a64(data: bytes) -> int:
    """64-bit FNV-1a (offset basis 0xcbf29ce484222325, prime 0x100000001b3)."""
    h = FNV64_OFFSET
    for byte in data:
        h ^= byte
        h = (h * FNV64_PRIME) & MASK64
    return h


def key_id(line_code: str, bits: str) -> str:
    h64 = fnv1a64(f"{line_code}:{bits}".encode("utf-8"))
    h32 = (h64 >> 32) ^ (h64 & 0xFFFFFFFF)
    return f"{line_code}{len(bits)}-{h32:08x}"


def bits_hex(bits: str) -> str:
    """Bits MSB first, left-padded with zeros to whole nibbles, lower-case hex."""
    nibbles = (len(bits) + 3) // 4
    return format(int(bits, 2), f"0{nibbles}x")


# --------------------------------------------------------------------------------------
# Line codes -> frames as (mark_us, space_us) pairs. The last pair's space is the space
# that follows the frame's last mark (sync space, or the gap before the next frame).
# --------------------------------------------------------------------------------------
def pwm_frame(bits: str, unit_us: int) -> list[tuple[int, int]]:
    """Common-practice PWM (facts.md §5.4): 0 = 1T mark + 3T space, 1 = 3T mark + 1T space,
    then a sync of 1T mark + 31T space after the data bits."""
    pairs = [((3, 1) if b == "1" else (1, 3)) for b in bits]
    pairs.append((1, 31))
    return [(m * unit_us, s * unit_us) for m, s in pairs]


def ppm_frame(bits: str, unit_us: int) -> list[tuple[int, int]]:
    """Pulse-distance code (facts.md §5.4, common practice): header 8T mark + 4T space,
    each bit = 1T mark + space (1T = 0, 3T = 1), a 1T stop mark, then 40T of space
    before the next frame."""
    pairs = [(8, 4)]
    pairs += [((1, 3) if b == "1" else (1, 1)) for b in bits]
    pairs.append((1, 40))
    return [(m * unit_us, s * unit_us) for m, s in pairs]


@dataclass
class Press:
    """One press: `frames` copies of the same frame, back to back."""

    frame: list[tuple[int, int]]
    frames: int

    def marks(self, start_us: int) -> list[tuple[int, int]]:
        out = []
        t = start_us
        for _ in range(self.frames):
            for mark_us, space_us in self.frame:
                out.append((t, t + mark_us))
                t += mark_us + space_us
        return out

    # Truth values of the transmitted timeline (nominal, before any channel effect).
    def frame_period_us(self) -> int:
        return sum(m + s for m, s in self.frame)

    def frame_airtime_us(self) -> int:
        return self.frame_period_us() - self.frame[-1][1]

    def frame_on_us(self) -> int:
        return sum(m for m, _ in self.frame)

    def airtime_us(self) -> int:
        return (self.frames - 1) * self.frame_period_us() + self.frame_airtime_us()

    def on_us(self) -> int:
        return self.frames * self.frame_on_us()


def draw_bits(rng: np.random.Generator, n: int) -> str:
    """A random code with both bit values well represented (redrawn until each value
    makes up at least a quarter of the bits), deterministic for a given generator."""
    while True:
        bits = rng.integers(0, 2, size=n)
        ones = int(bits.sum())
        if n // 4 <= ones <= n - n // 4:
            return "".join("1" if b else "0" for b in bits)


def ceil_div(a: int, b: int) -> int:
    return -(-a // b)


# --------------------------------------------------------------------------------------
# Rendering
# --------------------------------------------------------------------------------------
def edges_of(marks_us: list[tuple[int, int]]) -> list[tuple[float, int]]:
    """(time_s, +1 rising / -1 falling) for every mark edge."""
    out = []
    for rise, fall in marks_us:
        out.append((rise / 1e6, +1))
        out.append((fall / 1e6, -1))
    return out


def _ramp_integral(u: np.ndarray, ramp_s: float) -> np.ndarray:
    """Integral from -inf to u of a unit step with a linear ramp of width ramp_s centred
    on 0 (the ramp is 1/2 at u = 0)."""
    if ramp_s <= 0.0:
        return np.maximum(u, 0.0)
    half = ramp_s / 2.0
    mid = (u + half) ** 2 / (2.0 * ramp_s)
    return np.where(u <= -half, 0.0, np.where(u >= half, u, mid))


def iq_envelope(marks_us, n_samples: int, fs: int, ramp_s: float) -> np.ndarray:
    """Transmitted OOK envelope in [0, 1], each edge a linear ramp of width ramp_s centred
    on the nominal edge time, seen by an ideal integrating sampler: sample n is the mean
    of the envelope over [n/fs - 1/(2 fs), n/fs + 1/(2 fs)). A lone edge therefore reads
    1/2 at the sample whose centre is the edge, and the half-level crossing, mark widths
    and mark energy are those of the nominal timeline."""
    env = np.zeros(n_samples)
    step = np.zeros(n_samples + 1)  # differences: +/-1 from the first fully-settled sample
    half_box = 0.5 / fs
    for t_edge, sign in edges_of(marks_us):
        lo = max(0, math.floor((t_edge - ramp_s / 2 - half_box) * fs) - 1)
        hi = min(n_samples, math.ceil((t_edge + ramp_s / 2 + half_box) * fs) + 2)
        n = np.arange(lo, hi)
        t = n / fs
        part = (
            _ramp_integral(t + half_box - t_edge, ramp_s)
            - _ramp_integral(t - half_box - t_edge, ramp_s)
        ) / (2 * half_box)
        env[lo:hi] += sign * part
        step[hi] += sign
    env += np.cumsum(step)[:n_samples]
    return env


def one_pole_envelope(marks_us, n_samples: int, fs: int, tau_s: float) -> np.ndarray:
    """Unit-height rectangular marks through a continuous-time one-pole low-pass
    (time constant tau_s), sampled at t = n/fs. Exact by superposition of the step
    responses 1 - exp(-(t - t_edge)/tau) of every edge; needs no edge on the grid."""
    env = np.zeros(n_samples)
    step = np.zeros(n_samples + 1)
    settle_s = 40.0 * tau_s  # exp(-40) ~ 4e-18: settled to below a double's resolution
    for t_edge, sign in edges_of(marks_us):
        lo = max(0, math.ceil(t_edge * fs))
        hi = min(n_samples, math.ceil((t_edge + settle_s) * fs))
        n = np.arange(lo, hi)
        t = n / fs
        env[lo:hi] += sign * (1.0 - np.exp(-(t - t_edge) / tau_s))
        step[hi] += sign
    env += np.cumsum(step)[:n_samples]
    return env


def carrier(n_samples: int, fs: int, offset_hz: int, phase_rad: float) -> np.ndarray:
    """exp(j(2 pi f n / fs + phase)); the integer product f*n is reduced modulo fs first
    so the argument of the exponential stays small and exact."""
    n = np.arange(n_samples, dtype=np.int64)
    cycles = np.mod(offset_hz * n, fs)  # integer, exact
    return np.exp(1j * (2.0 * np.pi * cycles / fs + phase_rad))


def quantize(values: np.ndarray, offset: float, scale: float, lo: int, hi: int):
    """round(offset + scale * v) (numpy rint: halves to even), clipped to [lo, hi].
    Also returns how many values clipped and the smallest distance (in LSB) of any
    unclipped value from a rounding boundary: a margin far above 1e-9 LSB means a
    last-bit difference in a platform's sin/cos/exp cannot change a byte of output."""
    raw = offset + scale * values
    q = np.rint(raw)
    clipped = int(np.count_nonzero((q < lo) | (q > hi)))
    inside = (q >= lo) & (q <= hi)
    frac = raw[inside] - np.floor(raw[inside])
    margin = float(np.min(np.abs(frac - 0.5))) if frac.size else 1.0
    return np.clip(q, lo, hi), clipped, margin


def awgn_complex(rng: np.random.Generator, n: int, sigma2: float) -> np.ndarray:
    """Complex white Gaussian noise, variance sigma2 per complex sample, sigma2/2 per rail."""
    iq = rng.standard_normal((n, 2)) * math.sqrt(sigma2 / 2.0)
    return iq[:, 0] + 1j * iq[:, 1]


# --------------------------------------------------------------------------------------
# Truth files
# --------------------------------------------------------------------------------------
def generator_label() -> str:
    return f"{GENERATOR_PATH} (numpy {np.__version__}, scipy {scipy.__version__})"


def us_to_ms(us: int) -> float:
    return us / 1000  # exact decimal for integer microseconds


def code_truth(
    line_code: str,
    bits: str,
    unit_us: int,
    carrier_offset_hz,
    presses: int,
    press: Press,
    first_start_us: int,
) -> dict:
    return {
        "key_id": key_id(line_code, bits),
        "line_code": line_code,
        "bits": bits,
        "bit_count": len(bits),
        "hex": bits_hex(bits),
        "unit_us": unit_us,
        "carrier_offset_hz": carrier_offset_hz,
        "presses": presses,
        "frames": presses * press.frames,
        "frames_per_press": press.frames,
        "frame_airtime_ms": us_to_ms(press.frame_airtime_us()),
        "frame_on_time_ms": us_to_ms(press.frame_on_us()),
        "frame_period_ms": us_to_ms(press.frame_period_us()) if press.frames > 1 else None,
        "press_airtime_ms": us_to_ms(press.airtime_us()),
        "press_on_time_ms": us_to_ms(press.on_us()),
        "first_start_s": first_start_us / 1_000_000,
    }


def capture_truth(fmt, datatype, fs, center_hz, n_samples) -> dict:
    return {
        "format": fmt,
        "datatype": datatype,
        "sample_rate_hz": fs,
        "center_frequency_hz": center_hz,
        "samples": n_samples,
        "duration_s": n_samples / fs,
    }


def write_json(path: Path, obj: dict) -> None:
    path.write_text(json.dumps(obj, indent=2) + "\n", encoding="utf-8")


def sig(x: float, digits: int = 9) -> float:
    """Round to a few significant digits for the informational channel block, so a
    last-bit difference in a platform's libm cannot change the truth file's text."""
    return float(f"{x:.{digits}g}")


# --------------------------------------------------------------------------------------
# The three captures
# --------------------------------------------------------------------------------------
def make_iq_pwm(
    *,
    seed: int,
    bit_count: int,
    unit_us: int,
    frames: int,
    fs: int,
    offset_hz: int,
    amplitude: float,
    eu_n0_db: float,
    ramp_us: int,
    lead_us: int,
    tail_us: int,
):
    """One press of a PWM code as complex baseband, scaled to full scale = 1.0."""
    rng = np.random.default_rng(seed)
    bits = draw_bits(rng, bit_count)
    phase = float(rng.uniform(0.0, 2.0 * np.pi))
    press = Press(pwm_frame(bits, unit_us), frames)
    marks = press.marks(lead_us)
    last_fall_us = marks[-1][1]
    n = ceil_div((last_fall_us + tail_us) * fs, 1_000_000)

    env = iq_envelope(marks, n, fs, ramp_us / 1e6)
    x = amplitude * env * carrier(n, fs, offset_hz, phase)
    # Eu/N0 = A^2 * T_unit / N0, N0 = complex noise power per Hz; sigma^2 = N0 * fs.
    n0 = amplitude**2 * (unit_us / 1e6) / 10.0 ** (eu_n0_db / 10.0)
    sigma2 = n0 * fs
    x = x + awgn_complex(rng, n, sigma2)
    channel = {
        "seed": seed,
        "amplitude_fs": amplitude,
        "eu_n0_db": eu_n0_db,
        "eu_n0_definition": "A^2*T_unit/N0; N0 = complex noise power per Hz; "
        "noise variance per complex sample = N0*fs, half on I, half on Q",
        "noise_variance_per_complex_sample": sig(sigma2),
        "carrier_phase_rad": sig(phase, 12),
        "edge_ramp_us": ramp_us,
    }
    return bits, press, marks, n, x, channel


def make_gate(outdir: Path) -> dict:
    fs = 250_000
    unit_us = 350
    offset_hz = 20_000
    lead_us = 40_000
    bits, press, marks, n, x, channel = make_iq_pwm(
        seed=433_001,
        bit_count=24,
        unit_us=unit_us,
        frames=5,
        fs=fs,
        offset_hz=offset_hz,
        amplitude=0.5,
        eu_n0_db=25.0,
        ramp_us=10,
        lead_us=lead_us,
        tail_us=40_000,
    )
    iq = np.empty(2 * n)
    iq[0::2] = x.real  # I first
    iq[1::2] = x.imag
    q, clipped, margin = quantize(iq, 127.5, 127.5, 0, 255)
    (outdir / "ref-gate-pwm.cu8").write_bytes(q.astype(np.uint8).tobytes())
    channel["quantization"] = "cu8: round(127.5 + 127.5*x) (round half to even), clipped to 0..255"
    channel["clipped_values"] = clipped
    truth = {
        "generator": generator_label(),
        "capture": capture_truth("cu8", "cu8", fs, None, n),
        "channel": channel,
        "codes": [code_truth("pwm", bits, unit_us, offset_hz, 1, press, lead_us)],
    }
    write_json(outdir / "ref-gate-pwm.truth.json", truth)
    return {"file": "ref-gate-pwm.cu8", "clipped": clipped, "margin_lsb": margin}


def make_lamp(outdir: Path) -> dict:
    fs = 500_000
    unit_us = 250
    offset_hz = -35_000
    center_hz = 433_920_000
    lead_us = 20_000
    bits, press, marks, n, x, channel = make_iq_pwm(
        seed=433_003,
        bit_count=16,
        unit_us=unit_us,
        frames=8,
        fs=fs,
        offset_hz=offset_hz,
        amplitude=0.25,
        eu_n0_db=22.0,
        ramp_us=10,
        lead_us=lead_us,
        tail_us=20_000,
    )
    iq = np.empty(2 * n)
    iq[0::2] = x.real
    iq[1::2] = x.imag
    q, clipped, margin = quantize(iq, 0.0, 32767.0, -32768, 32767)
    data = q.astype("<i2").tobytes()
    data_path = outdir / "ref-lamp-pwm.sigmf-data"
    data_path.write_bytes(data)
    meta = {
        "global": {
            "core:datatype": "ci16_le",
            "core:sample_rate": fs,
            "core:version": "1.2.5",
            "core:sha512": hashlib.sha512(data).hexdigest(),
            "core:description": "Harrowgate Lane workshop, button lamp-left: one press, "
            "16-bit PWM, 8 frames (synthetic reference capture)",
            "core:recorder": "ooksift tests/reference/make_reference_captures.py",
        },
        "captures": [{"core:sample_start": 0, "core:frequency": center_hz}],
        "annotations": [],
    }
    write_json(outdir / "ref-lamp-pwm.sigmf-meta", meta)
    channel["quantization"] = (
        "ci16_le: round(32767*x) (round half to even), clipped to -32768..32767"
    )
    channel["clipped_values"] = clipped
    truth = {
        "generator": generator_label(),
        "capture": capture_truth("sigmf", "ci16_le", fs, center_hz, n),
        "channel": channel,
        "codes": [code_truth("pwm", bits, unit_us, offset_hz, 1, press, lead_us)],
    }
    write_json(outdir / "ref-lamp-pwm.truth.json", truth)
    return {"file": "ref-lamp-pwm.sigmf-data", "clipped": clipped, "margin_lsb": margin}


def make_chime(outdir: Path) -> dict:
    seed = 433_002
    fs = 48_000
    unit_us = 400
    frames = 3
    presses = 2
    gap_us = 300_000  # last fall of press 1 to first rise of press 2
    lead_us = 45_000
    tail_us = 45_000
    idle, high = 0.05, 0.60  # fractions of full scale; DC-coupled, marks high
    tau_us = 20
    snr_db = 16.0  # 20*log10((high - idle) / sigma), sigma per sample at 48 kHz

    rng = np.random.default_rng(seed)
    bits = draw_bits(rng, 32)
    press = Press(ppm_frame(bits, unit_us), frames)
    marks = press.marks(lead_us)
    second_start_us = marks[-1][1] + gap_us
    marks += press.marks(second_start_us)
    n = ceil_div((marks[-1][1] + tail_us) * fs, 1_000_000)

    env = one_pole_envelope(marks, n, fs, tau_us / 1e6)
    sigma = (high - idle) / 10.0 ** (snr_db / 20.0)
    y = idle + (high - idle) * env + sigma * rng.standard_normal(n)
    q, clipped, margin = quantize(y, 0.0, 32767.0, -32768, 32767)
    wavfile.write(outdir / "ref-chime-ppm.wav", fs, q.astype(np.int16))
    channel = {
        "seed": seed,
        "idle_level_fs": idle,
        "mark_level_fs": high,
        "one_pole_tau_us": tau_us,
        "snr_db": snr_db,
        "snr_definition": "20*log10((mark_level - idle_level) / sigma), sigma = std of the "
        "white Gaussian noise per sample at the WAV rate",
        "noise_sigma_fs": sig(sigma),
        "press_gap_ms": us_to_ms(gap_us),
        "second_press_start_s": second_start_us / 1_000_000,
        "quantization": "ri16_le: round(32767*y) (round half to even), clipped to -32768..32767",
        "clipped_values": clipped,
    }
    truth = {
        "generator": generator_label(),
        "capture": capture_truth("wav", "ri16_le", fs, None, n),
        "channel": channel,
        "codes": [code_truth("ppm", bits, unit_us, None, presses, press, lead_us)],
    }
    write_json(outdir / "ref-chime-ppm.truth.json", truth)
    return {"file": "ref-chime-ppm.wav", "clipped": clipped, "margin_lsb": margin}


def main(argv: list[str]) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("outdir", type=Path, help="folder to write the captures into")
    args = parser.parse_args(argv)
    args.outdir.mkdir(parents=True, exist_ok=True)

    # Printed for cross-checking the key_id rule (DESIGN contract).
    print(f"key_id('pwm', '0101') = {key_id('pwm', '0101')}")
    for make in (make_gate, make_chime, make_lamp):
        info = make(args.outdir)
        print(
            f"{info['file']}: clipped values {info['clipped']}, "
            f"smallest rounding margin {info['margin_lsb']:.3e} LSB"
        )
        if info["margin_lsb"] < 1e-9:
            print(
                f"warning: {info['file']} has a sample within 1e-9 LSB of a rounding "
                "boundary; output may differ by one LSB across platforms",
                file=sys.stderr,
            )
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
