#!/usr/bin/python3
"""Reference tables for the rolloff response analysis, computed with SciPy.

Each analog filter is evaluated with scipy.signal.freqs at 10 points per
decade and written to <name>.csv (frequency_hz, gain_db).  Its exact corners
for several reference definitions and levels are found with
scipy.optimize.brentq on the exact |H(j2πf)| and written to corners.json.

Regenerate from the repository root with:

    /usr/bin/python3 testdata/scipy/make_tables.py
"""
import json
import math
import os

import numpy as np
import scipy
from scipy import optimize, signal

HERE = os.path.dirname(os.path.abspath(__file__))
W = 2 * math.pi

# name: (description, (b, a), sweep start Hz, sweep stop Hz, reference frequency Hz)
FILTERS = {
    "cheby1_lp4": (
        "Chebyshev type I low-pass, order 4, 1 dB ripple, ripple edge 1234 Hz",
        signal.cheby1(4, 1.0, W * 1234.0, btype="low", analog=True),
        10.0, 1e5, 10.0),
    "bessel_lp4": (
        "Bessel low-pass, order 4, norm='mag' (-3 dB at 2870 Hz)",
        signal.bessel(4, W * 2870.0, btype="low", analog=True, norm="mag"),
        10.0, 1e5, 10.0),
    "butter_bp2": (
        "Butterworth band-pass, order 2 (4 poles), edges 47 Hz and 15.8 kHz",
        signal.butter(2, [W * 47.0, W * 15800.0], btype="bandpass", analog=True),
        1.0, 1e6, 1000.0),
    "butter_hp3": (
        "Butterworth high-pass, order 3, -3 dB at 21.5 Hz",
        signal.butter(3, W * 21.5, btype="highpass", analog=True),
        1.0, 1e5, 1000.0),
    "butter_lp3": (
        "Butterworth low-pass, order 3, -3 dB at 61.3 kHz",
        signal.butter(3, W * 61300.0, btype="low", analog=True),
        10.0, 1e6, 1000.0),
}

LEVELS = [-1.0, 10 * math.log10(0.5), -6.0]


def gain_db(ba, f_hz):
    b, a = ba
    _, h = signal.freqs(b, a, worN=W * np.atleast_1d(np.asarray(f_hz, dtype=float)))
    return 20 * np.log10(np.abs(h))


def grid(start_hz, stop_hz):
    k0 = round(10 * math.log10(start_hz))
    k1 = round(10 * math.log10(stop_hz))
    return [10 ** (k / 10) for k in range(k0, k1 + 1)]


def corners(ba, start_hz, stop_hz, ref_hz, ref_db, level_db):
    """Crossings of ref_db+level_db bounding the passband that contains ref_hz."""
    target = ref_db + level_db
    fine = np.logspace(math.log10(start_hz), math.log10(stop_hz), 20001)
    g = gain_db(ba, fine) - target
    low = high = None
    i0 = int(np.argmin(np.abs(np.log(fine / ref_hz))))
    # walk down from the reference
    for i in range(i0, 0, -1):
        if g[i - 1] < 0 <= g[i]:
            low = optimize.brentq(lambda f: gain_db(ba, f)[0] - target, fine[i - 1], fine[i], xtol=1e-12, rtol=1e-15)
            break
    for i in range(i0, len(fine) - 1):
        if g[i] >= 0 > g[i + 1]:
            high = optimize.brentq(lambda f: gain_db(ba, f)[0] - target, fine[i], fine[i + 1], xtol=1e-12, rtol=1e-15)
            break
    return low, high


def main():
    out = {"scipy_version": scipy.__version__, "filters": {}}
    for name, (desc, ba, f0, f1, ref_hz) in FILTERS.items():
        fs = grid(f0, f1)
        g = gain_db(ba, fs)
        with open(os.path.join(HERE, name + ".csv"), "w") as fh:
            fh.write("frequency_hz,gain_db\n")
            for f, v in zip(fs, g):
                fh.write("%r,%r\n" % (float(f), float(v)))
        fine = np.logspace(math.log10(f0), math.log10(f1), 200001)
        gf = gain_db(ba, fine)
        imax = int(np.argmax(gf))
        # refine the maximum
        res = optimize.minimize_scalar(lambda lf: -gain_db(ba, 10 ** lf)[0],
                                       bracket=(math.log10(fine[max(imax - 1, 0)]), math.log10(fine[imax]),
                                                math.log10(fine[min(imax + 1, len(fine) - 1)])) if 0 < imax < len(fine) - 1 else None,
                                       bounds=None if 0 < imax < len(fine) - 1 else (math.log10(f0), math.log10(f1)),
                                       method="brent" if 0 < imax < len(fine) - 1 else "bounded")
        max_hz = 10 ** res.x
        max_db = float(-res.fun)
        ref_db = float(gain_db(ba, ref_hz)[0])
        entry = {"description": desc, "sweep_hz": [fs[0], fs[-1]], "points": len(fs),
                 "ref_hz": ref_hz, "ref_gain_db": ref_db,
                 "max_hz": max_hz, "max_gain_db": max_db, "corners": []}
        for mode, rhz, rdb in (("frequency", ref_hz, ref_db), ("max", max_hz, max_db)):
            for lv in LEVELS:
                lo, hi = corners(ba, f0, f1, rhz, rdb, lv)
                entry["corners"].append({"ref_mode": mode, "level_db": lv, "low_hz": lo, "high_hz": hi})
        out["filters"][name] = entry
    with open(os.path.join(HERE, "corners.json"), "w") as fh:
        json.dump(out, fh, indent=1, sort_keys=True)
        fh.write("\n")


if __name__ == "__main__":
    main()
