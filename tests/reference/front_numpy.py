#!/usr/bin/env python3
"""Throughput reference for the IQ front end, written the way a numpy/scipy user would.

Same synthetic capture as examples/front_throughput.rs (seeded noise of power 0.01, a DC
offset, and every 2 s a press of 5 frames of a 24-bit PWM code, unit 350 us, carrier amplitude
0.05 at -187.3 kHz; the random numbers differ, the structure does not) and the same stages:

  survey   Blackman-Harris frames of 2048 samples, numpy FFT, average, mean square, peak-hold
  channel  mix (complex exponential), FIR low-pass designed with scipy.signal.firwin (Kaiser
           window, pass edge 5.3 kHz, stop edge 10.6 kHz, 60 dB), decimate, magnitude,
           threshold with hysteresis; two ways:
             lfilter  direct-form FIR at the full rate, then keep every D-th sample
             upfirdn  polyphase FIR computing only the kept samples

Each stage runs block by block (65536 samples) with its state carried, like the Rust side.
Prints samples/s and the multiple of real time, from wall time and from process CPU time (the
latter is steadier on a shared machine). Needs numpy and scipy (pip install numpy
scipy); not part of the Rust test suite.

    python3 tests/reference/front_numpy.py [--seconds 60] [--lfilter-seconds 4]
"""

import argparse
import os
import time

import numpy as np
from scipy import signal

RATE_HZ = 2_048_000.0
OFFSET_HZ = -187_300.0
UNIT_S = 350e-6
AMP = 0.05
CODE = 0b1011_0010_1110_0001_0110_1001


def synthesise(seconds, seed=0x9E3779B9):
    n = int(seconds * RATE_HZ)
    unit = int(UNIT_S * RATE_HZ)
    frame = []
    for b in range(23, -1, -1):
        marks = 3 if (CODE >> b) & 1 else 1
        frame += [u < marks for u in range(4)]
    frame += [False] * 30
    frame = np.array(frame)
    press_period = int(2.0 * RATE_HZ)
    start = press_period // 8
    press_len = 5 * len(frame) * unit
    rng = np.random.default_rng(seed)
    x = np.empty(n, dtype=np.complex64)
    chunk = 1 << 22
    sigma = np.sqrt(0.01 / 2.0)
    for c0 in range(0, n, chunk):
        c1 = min(n, c0 + chunk)
        idx = np.arange(c0, c1)
        v = (rng.standard_normal(c1 - c0, dtype=np.float32)
             + 1j * rng.standard_normal(c1 - c0, dtype=np.float32)) * np.float32(sigma)
        v = v.astype(np.complex64) + np.complex64(0.015 - 0.01j)
        t = idx % press_period
        inside = (t >= start) & (t < start + press_len)
        key = np.zeros(c1 - c0, dtype=bool)
        key[inside] = frame[((t[inside] - start) // unit) % len(frame)]
        ph = np.mod(OFFSET_HZ / RATE_HZ * idx, 1.0)
        v[key] += (AMP * np.exp(2j * np.pi * ph[key])).astype(np.complex64)
        x[c0:c1] = v
    return x


def design(rate, pass_hz, stop_hz, atten_db=60.0):
    numtaps, beta = signal.kaiserord(atten_db, (stop_hz - pass_hz) / (rate / 2.0))
    numtaps |= 1
    taps = signal.firwin(numtaps, (pass_hz + stop_hz) / 2.0, window=("kaiser", beta), fs=rate)
    return taps


def count_marks(env, hi, lo, on):
    """Hysteresis on a block: returns (marks started, state at the end)."""
    marks = 0
    # Vectorised: states change only where the envelope leaves the band [lo, hi).
    decided = np.where(env >= hi, 1, np.where(env < lo, 0, -1))
    idx = np.nonzero(decided >= 0)[0]
    if idx.size == 0:
        return 0, on
    states = decided[idx]
    prev = np.concatenate(([1 if on else 0], states[:-1]))
    marks = int(np.count_nonzero((states == 1) & (prev == 0)))
    return marks, bool(states[-1])


def run_survey(x, block, fft_len=2048):
    win = signal.windows.blackmanharris(fft_len, sym=False).astype(np.float32)
    norm = np.float32(1.0 / win.sum() ** 2)
    s1 = np.zeros(fft_len)
    s2 = np.zeros(fft_len)
    pk = np.zeros(fft_len, dtype=np.float32)
    frames = 0
    pending = np.empty(0, dtype=np.complex64)
    t0 = time.perf_counter()
    for b0 in range(0, len(x), block):
        buf = np.concatenate((pending, x[b0:b0 + block]))
        nf = len(buf) // fft_len
        if nf:
            fr = buf[: nf * fft_len].reshape(nf, fft_len) * win
            p = np.abs(np.fft.fft(fr, axis=1)) ** 2 * norm
            s1 += p.sum(axis=0)
            s2 += (p.astype(np.float64) ** 2).sum(axis=0)
            np.maximum(pk, p.max(axis=0), out=pk)
            frames += nf
        pending = buf[nf * fft_len:]
    avg = s1 / max(frames, 1)
    floor = np.median(avg)
    elapsed = time.perf_counter() - t0
    k = int(np.argmax(np.fft.fftshift(pk)))
    return elapsed, (k - fft_len // 2) * RATE_HZ / fft_len, 10 * np.log10(floor)


def run_lfilter(x, block, taps, decim, hi, lo):
    zi = np.zeros(len(taps) - 1, dtype=np.complex128)
    phase0 = 0  # global index of the next sample
    keep_from = decim - 1  # keep global indices (q+1)*decim - 1, like the Rust side
    marks, on, outputs = 0, False, 0
    t0 = time.perf_counter()
    for b0 in range(0, len(x), block):
        xb = x[b0:b0 + block]
        n = np.arange(phase0, phase0 + len(xb))
        lo_osc = np.exp(-2j * np.pi * np.mod(OFFSET_HZ / RATE_HZ * n, 1.0)).astype(np.complex64)
        y, zi = signal.lfilter(taps, 1.0, xb * lo_osc, zi=zi)
        first = (keep_from - phase0) % decim
        env = np.abs(y[first::decim])
        m, on = count_marks(env, hi, lo, on)
        marks += m
        outputs += len(env)
        phase0 += len(xb)
    return time.perf_counter() - t0, marks, outputs


def run_upfirdn(x, block, taps, decim, hi, lo):
    block = max(decim, block // decim * decim)
    hist_len = -(-(len(taps) - 1) // decim) * decim
    hist = np.zeros(hist_len, dtype=np.complex64)
    skip = hist_len // decim
    marks, on, outputs = 0, False, 0
    t0 = time.perf_counter()
    for b0 in range(0, len(x) - len(x) % decim, block):
        xb = x[b0:b0 + block]
        n = np.arange(b0, b0 + len(xb))
        lo_osc = np.exp(-2j * np.pi * np.mod(OFFSET_HZ / RATE_HZ * n, 1.0)).astype(np.complex64)
        ext = np.concatenate((hist, xb * lo_osc))
        y = signal.upfirdn(taps, ext, up=1, down=decim)[skip: skip + len(xb) // decim]
        env = np.abs(y)
        m, on = count_marks(env, hi, lo, on)
        marks += m
        outputs += len(env)
        hist = ext[len(ext) - hist_len:]
    return time.perf_counter() - t0, marks, outputs


def line(name, samples, secs, cpu):
    def fmt(s):
        sps = samples / s
        return f"{s:8.3f} s {sps / 1e6:8.1f} Msamples/s {sps / RATE_HZ:7.1f}x real time"
    print(f"{name:<36} wall {fmt(secs)}   | cpu {fmt(cpu)}")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seconds", type=float, default=60.0)
    ap.add_argument("--lfilter-seconds", type=float, default=4.0,
                    help="the full-rate lfilter path is slow; time it on this much data")
    ap.add_argument("--block", type=int, default=65536)
    a = ap.parse_args()

    t = time.perf_counter()
    x = synthesise(a.seconds)
    print(f"synthesised {len(x)} samples ({a.seconds} s at {RATE_HZ:.0f} Hz) in "
          f"{time.perf_counter() - t:.2f} s; block {a.block}; numpy {np.__version__}, "
          f"scipy {__import__('scipy').__version__}; OPENBLAS_CORETYPE="
          f"{os.environ.get('OPENBLAS_CORETYPE', '(unset)')}")

    c = time.process_time()
    secs, peak_off, floor_db = run_survey(x, a.block)
    line("survey (numpy FFT, avg/peak-hold)", len(x), secs, time.process_time() - c)
    print(f"  strongest peak-hold bin at {peak_off:+.0f} Hz, floor {floor_db:.1f} dB/bin")

    # Channel: the same specification as ChannelPlan::bandwidth_for_mark(350 us, 2 kHz).
    bw = 3.0 / UNIT_S + 2e3
    pass_hz, stop_hz = bw / 2.0, bw
    min_out = 8.0 / UNIT_S
    decim = int(RATE_HZ // max(min_out, pass_hz + stop_hz))
    taps = design(RATE_HZ, pass_hz, stop_hz)
    print(f"  channel: bw {bw:.0f} Hz, firwin {len(taps)} taps at the full rate, decimate by "
          f"{decim} -> {RATE_HZ / decim:.0f} Hz")
    hi, lo = 0.035, 0.015
    presses = int(a.seconds // 2)

    c = time.process_time()
    secs, marks, outs = run_upfirdn(x, a.block, taps, decim, hi, lo)
    line("channel: mix + upfirdn + |.| + thr", len(x), secs, time.process_time() - c)
    print(f"  {outs} envelope samples, {marks} marks (truth: {presses * 5 * 24})")

    nl = min(len(x), int(a.lfilter_seconds * RATE_HZ))
    c = time.process_time()
    secs, marks, outs = run_lfilter(x[:nl], a.block, taps, decim, hi, lo)
    line(f"channel: mix + lfilter ({nl / RATE_HZ:.0f} s) + |.|", nl, secs, time.process_time() - c)
    print(f"  {outs} envelope samples, {marks} marks")


if __name__ == "__main__":
    main()
