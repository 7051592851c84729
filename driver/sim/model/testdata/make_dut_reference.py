#!/usr/bin/env python3
"""Reference DUT responses for the model tests, computed with SciPy.

Run from this directory:  python3 make_dut_reference.py > dut_reference.csv

Each case is an analog transfer function built from scipy.signal.butter
(analog=True) and explicit first/second-order polynomials, evaluated with
scipy.signal.freqs at s = j2πf. Columns: case, freq_hz, mag_db, phase_deg.
"""
import numpy as np
from scipy import signal

TWO_PI = 2 * np.pi


def series(*tfs):
    b, a = np.array([1.0]), np.array([1.0])
    for bb, aa in tfs:
        b = np.polymul(b, bb)
        a = np.polymul(a, aa)
    return b, a


def hp1(fc):
    w = TWO_PI * fc
    return [1.0, 0.0], [1.0, w]


def lp2(fc, q):
    w = TWO_PI * fc
    return [w * w], [1.0, w / q, w * w]


def hp2(fc, q):
    w = TWO_PI * fc
    return [1.0, 0.0, 0.0], [1.0, w / q, w * w]


def butter(n, fc, kind):
    return signal.butter(n, TWO_PI * fc, btype=kind, analog=True)


def gain(db):
    return [10 ** (db / 20)], [1.0]


CASES = {
    # The demo line driver: +20 dB, first-order high-pass at 8 Hz,
    # second-order Butterworth low-pass at 95 kHz.
    "demo": series(gain(20), hp1(8), butter(2, 95e3, "low")),
    "butter5_hp_1k": series(butter(5, 1e3, "high")),
    "butter3_lp_20k": series(butter(3, 20e3, "low")),
    "lp2_q2_10k": series(lp2(10e3, 2.0)),
    "hp2_q0.5_100": series(hp2(100, 0.5)),
}

FREQS = [0.5, 2, 8, 20, 100, 1e3, 5e3, 1e4, 2e4, 5e4, 9.5e4, 2e5, 1e6, 2e6]

print("case,freq_hz,mag_db,phase_deg")
for name, (b, a) in CASES.items():
    w, h = signal.freqs(b, a, worN=TWO_PI * np.array(FREQS))
    for f, hv in zip(FREQS, h):
        print(f"{name},{f:.10g},{20*np.log10(abs(hv)):.12g},{np.degrees(np.angle(hv)):.12g}")
