#!/usr/bin/env python3
"""The numpy/scipy front-end reference (tests/reference/front_numpy.py) run on a cu8 file.

Reads the capture block by block (like ooksift), converts bytes to complex64
((b - 127.5) / 127.5), then does the reference's stages with its own code where it can:

  pass 1  survey   Blackman-Harris frames of 2048 samples, numpy FFT, average, peak-hold
  pass 2  channel  mix to the carrier, FIR low-pass (front_numpy.design: firwin/Kaiser, 60 dB),
                   polyphase decimation with scipy.signal.upfirdn, magnitude, hysteresis
                   threshold (front_numpy.count_marks)

Two passes over the file, as `ooksift decode` makes for an IQ file. Timing includes reading
and converting the bytes. Prints samples/s and the multiple of real time (wall and CPU).

    python scripts/front_numpy_file.py FILE.cu8 --offset-hz 100000 [--rate 2048000]
        [--unit-us 350] [--block 1048576]
"""

import argparse
import os
import sys
import time

import numpy as np
from scipy import signal

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "tests",
                                "reference"))
import front_numpy as ref  # noqa: E402  (design, count_marks)


def blocks(path, block):
    with open(path, "rb") as f:
        while True:
            b = f.read(2 * block)
            if not b:
                return
            u = np.frombuffer(b, dtype=np.uint8)
            n = len(u) // 2
            yield ((u[: 2 * n].astype(np.float32) - np.float32(127.5))
                   / np.float32(127.5)).view(np.complex64)


def survey(path, block, rate, fft_len=2048):
    win = signal.windows.blackmanharris(fft_len, sym=False).astype(np.float32)
    norm = np.float32(1.0 / win.sum() ** 2)
    s1 = np.zeros(fft_len)
    pk = np.zeros(fft_len, dtype=np.float32)
    frames, total = 0, 0
    pending = np.empty(0, dtype=np.complex64)
    for x in blocks(path, block):
        total += len(x)
        buf = np.concatenate((pending, x))
        nf = len(buf) // fft_len
        if nf:
            fr = buf[: nf * fft_len].reshape(nf, fft_len) * win
            p = np.abs(np.fft.fft(fr, axis=1)) ** 2 * norm
            s1 += p.sum(axis=0)
            np.maximum(pk, p.max(axis=0), out=pk)
            frames += nf
        pending = buf[nf * fft_len:]
    k = int(np.argmax(np.fft.fftshift(pk)))
    return total, (k - fft_len // 2) * rate / fft_len


def channel(path, block, rate, offset, unit_s, hi, lo):
    bw = 3.0 / unit_s + 2e3
    pass_hz, stop_hz = bw / 2.0, bw
    decim = int(rate // max(8.0 / unit_s, pass_hz + stop_hz))
    taps = ref.design(rate, pass_hz, stop_hz)
    block = max(decim, block // decim * decim)
    hist_len = -(-(len(taps) - 1) // decim) * decim
    hist = np.zeros(hist_len, dtype=np.complex64)
    skip = hist_len // decim
    marks, on, outputs, b0 = 0, False, 0, 0
    carry = np.empty(0, dtype=np.complex64)
    for x in blocks(path, block):
        x = np.concatenate((carry, x))
        use = len(x) - len(x) % decim
        xb, carry = x[:use], x[use:]
        n = np.arange(b0, b0 + len(xb))
        lo_osc = np.exp(-2j * np.pi * np.mod(offset / rate * n, 1.0)).astype(np.complex64)
        ext = np.concatenate((hist, xb * lo_osc))
        y = signal.upfirdn(taps, ext, up=1, down=decim)[skip: skip + len(xb) // decim]
        env = np.abs(y)
        m, on = ref.count_marks(env, hi, lo, on)
        marks += m
        outputs += len(env)
        hist = ext[len(ext) - hist_len:]
        b0 += len(xb)
    return b0, marks, outputs, len(taps), decim


def line(name, samples, wall, cpu, rate):
    def fmt(s):
        sps = samples / s
        return f"{s:8.2f} s {sps / 1e6:7.2f} Msamples/s {sps / rate:7.1f}x real time"
    print(f"{name:<28} wall {fmt(wall)} | cpu {fmt(cpu)}", flush=True)


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("path")
    ap.add_argument("--rate", type=float, default=2_048_000.0)
    ap.add_argument("--offset-hz", type=float, default=100_000.0)
    ap.add_argument("--unit-us", type=float, default=350.0)
    ap.add_argument("--block", type=int, default=1 << 20)
    ap.add_argument("--hi", type=float, default=0.035)
    ap.add_argument("--lo", type=float, default=0.015)
    a = ap.parse_args()
    print(f"numpy {np.__version__}, scipy {__import__('scipy').__version__}, block {a.block}")
    w, c = time.perf_counter(), time.process_time()
    n, peak = survey(a.path, a.block, a.rate)
    sw, sc = time.perf_counter() - w, time.process_time() - c
    line("survey", n, sw, sc, a.rate)
    print(f"  strongest peak-hold bin {peak:+.0f} Hz")
    w, c = time.perf_counter(), time.process_time()
    n, marks, outs, taps, decim = channel(a.path, a.block, a.rate, a.offset_hz,
                                          a.unit_us * 1e-6, a.hi, a.lo)
    cw, cc = time.perf_counter() - w, time.process_time() - c
    line("channel (mix+upfirdn+|.|+thr)", n, cw, cc, a.rate)
    print(f"  {taps} taps, decimate by {decim}, {outs} envelope samples, {marks} marks")
    line("total (2 passes)", n, sw + cw, sc + cc, a.rate)


if __name__ == "__main__":
    main()
