#!/usr/bin/env python3
"""The peer: the analysis a practitioner would script with numpy and scipy,
for the same recording gliss analyses, to time against `gliss analyze`.

It does what gliss's default room analysis does, the usual way:
- deconvolution by spectral division of the recording by the sweep, with
  the same frequency-dependent regularisation as gliss (-100 dB re the
  sweep's peak power in band, rising over half an octave outside),
- the impulse response cut around its peak,
- the magnitude response smoothed to 1/6 octave on a 48-per-octave grid,
- the harmonic distortion orders 2..5 (4 orders) from their arrival times
  before the linear response (the exponential sweep's property, Farina),
  each smoothed the same way,
- octave and one-third-octave bands 31.5 Hz-8 kHz / 25 Hz-10 kHz
  (Butterworth band-passes, scipy), the Schroeder backward integral, and
  EDT, T20 and T30 by least-squares lines over 0..-10, -5..-25, -5..-35 dB.

Usage: peer.py RECORDING.wav SWEEP.wav [RATE_CONSTANT_S]
Prints the in-process analysis time (s) on the last line as "peer_s=...".
Only for timing: its numbers are not checked against gliss's here.
"""
import sys
import time

import numpy as np
from scipy import signal
from scipy.fft import irfft, next_fast_len, rfft
from scipy.io import wavfile


def regularisation(f, f1, f2):
    inside = 10 ** (-100 / 10)
    r = np.full_like(f, inside)
    lo = (f < f1) & (f > 0)
    u = np.clip(np.log2(f1 / np.maximum(f[lo], 1e-9)) / 0.5, 0, 1)
    w = 0.5 - 0.5 * np.cos(np.pi * u)
    r[lo] = np.maximum(10 ** ((-100 * (1 - w)) / 10), inside)
    hi = f > f2
    u = np.clip(np.log2(f[hi] / f2) / 0.5, 0, 1)
    r[hi] = inside + (1 - inside) * (0.5 - 0.5 * np.cos(np.pi * u))
    r[f <= 0] = 1.0
    return r


def smooth(freqs, power, grid, fraction=6):
    """Power mean over each grid point's 1/fraction octave (cumulative sums)."""
    c = np.concatenate(([0.0], np.cumsum(power)))
    half = 2 ** (1 / (2 * fraction))
    lo = np.searchsorted(freqs, grid / half)
    hi = np.maximum(np.searchsorted(freqs, grid * half), lo + 1)
    return 10 * np.log10((c[hi] - c[lo]) / (hi - lo) + 1e-300)


def decay_times(h, fs, lo, hi):
    sos = signal.butter(3, [lo, min(hi, 0.49 * fs)], btype="bandpass", fs=fs, output="sos")
    y = signal.sosfilt(sos, h)
    e = y * y
    sch = np.cumsum(e[::-1])[::-1]
    sch_db = 10 * np.log10(sch / sch[0] + 1e-300)
    t = np.arange(len(h)) / fs
    out = []
    for top, bottom, k in [(0, -10, 6), (-5, -25, 3), (-5, -35, 2)]:
        sel = (sch_db <= top) & (sch_db >= bottom)
        if sel.sum() < 10:
            out.append(None)
            continue
        slope, _ = np.polyfit(t[sel], sch_db[sel], 1)
        out.append(-60 / slope)
    return out


def analyse(rec, sweep, fs, rate_constant_s):
    f1, f2 = 20.0, 20_000.0
    n = next_fast_len(max(len(rec), len(sweep)))
    x = rfft(sweep, n)
    y = rfft(rec, n)
    freqs = np.arange(len(x)) * fs / n
    p = np.abs(x) ** 2
    band = (freqs >= f1) & (freqs <= f2)
    eps = p[band].max() * regularisation(freqs, f1, f2)
    hc = irfft(y * np.conj(x) / (p + eps), n)
    peak = int(np.argmax(np.abs(hc)))
    grid = f1 * 2 ** (np.arange(int(48 * np.log2(f2 / f1)) + 1) / 48)
    # the linear response: 0.1 s before the peak to 3 s after
    lin = np.roll(hc, -(peak - int(0.1 * fs)))[: int(3.1 * fs)]
    m = next_fast_len(len(lin))
    lf = np.arange(m // 2 + 1) * fs / m
    response = smooth(lf, np.abs(rfft(lin, m)) ** 2, grid)
    # harmonic orders 2..5 arrive L·ln(k) before the linear response
    orders = []
    for k in range(2, 6):
        at = peak - int(round(rate_constant_s * np.log(k) * fs))
        w = int(0.5 * rate_constant_s * np.log((k + 1) / k) * fs)
        seg = np.roll(hc, -(at - w // 4))[:w] * signal.windows.tukey(w, 0.2)
        mk = next_fast_len(w)
        kf = np.arange(mk // 2 + 1) * fs / mk
        orders.append(smooth(kf, np.abs(rfft(seg, mk)) ** 2, grid / k))
    # octave and one-third-octave bands from the impulse response
    h = lin[int(0.1 * fs) - 48 :]
    octaves = [31.5 * 2 ** i for i in range(9)]
    thirds = [25 * 2 ** (i / 3) for i in range(27)]
    bands = []
    for centres, b in [(octaves, 1), (thirds, 3)]:
        for fc in centres:
            g = 2 ** (1 / (2 * b))
            bands.append((fc, decay_times(h, fs, fc / g, fc * g)))
    return response, orders, bands


def main():
    fs, rec = wavfile.read(sys.argv[1])
    fs2, sweep = wavfile.read(sys.argv[2])
    assert fs == fs2
    rate_constant_s = float(sys.argv[3]) if len(sys.argv) > 3 else 0.7
    rec = rec.astype(np.float64)
    if rec.ndim > 1:
        rec = rec[:, 0]
    sweep = sweep.astype(np.float64)
    t0 = time.perf_counter()
    response, orders, bands = analyse(rec, sweep, fs, rate_constant_s)
    elapsed = time.perf_counter() - t0
    t30 = [round(b[1][2], 3) if b[1][2] else None for b in bands[:9]]
    print("octave T30 (s):", t30)
    print(f"peer_s={elapsed:.4f}")


if __name__ == "__main__":
    main()
