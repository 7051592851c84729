#!/usr/bin/python3
"""Reference battery for the rolloff response analysis, computed with SciPy.

Every design below is an analog transfer function (scipy.signal zpk form).
For each one and each grid (5, 10 and 20 points per decade, regular and
irregular) the exact gain is evaluated with scipy.signal.freqs_zpk at the
grid's frequencies.  The exact corners (the crossings of the reference plus
the level bounding the passband that holds the reference, as the analysis
defines them) are found with scipy.optimize.brentq on the exact magnitude.

For the noisy cases the battery also records the information limit of the
true structure: the design is written as a gain times sections (each
conjugate pole pair as ln w0 and ln Q, each real pole as ln |p|, each pair
of zeros on the jw axis as ln w, each complex zero pair as ln w0 and ln Q,
each real zero as ln |z|), the Fisher information of the gains in dB with
unit noise is J^T J (J the Jacobian over the grid), and the corner's
standard deviation is sqrt(g^T (J^T J)^-1 g), g the gradient of ln fc
through the corner condition (implicit function theorem).  It scales with
the noise sigma in dB.  This is the first-order (Cramer-Rao) figure for
Gaussian noise, from memory, the same one the analysis tests compute.

Writes battery.json next to this script.  Regenerate from the repository
root with:

    /usr/bin/python3 testdata/battery/make_battery.py
"""
import json
import math
import os

import numpy as np
import scipy
from scipy import optimize, signal

HERE = os.path.dirname(os.path.abspath(__file__))
W = 2 * math.pi
HALF = 10 * math.log10(0.5)
DENSITIES = [5, 10, 20]


def zpk_lp2(f0, q):
    w = W * f0
    p = complex(-w / (2 * q), w * math.sqrt(max(1 - 1 / (4 * q * q), 0)))
    return [], [p, p.conjugate()], w * w


def zpk_hp2(f0, q):
    z, p, _ = zpk_lp2(f0, q)
    return [0, 0], p, 1.0


def zpk_bp2(f0, q):
    z, p, _ = zpk_lp2(f0, q)
    return [0], p, W * f0 / q


def zpk_notch(f0, q):
    w = W * f0
    _, p, _ = zpk_lp2(f0, q)
    return [1j * w, -1j * w], p, 1.0


def zpk_shelf(fz, fp):
    """Real pole-zero pair, unity gain at DC: (1 + s/wz)/(1 + s/wp)."""
    wz, wp = W * fz, W * fp
    return [-wz], [-wp], wp / wz


def cascade(*parts):
    z, p, k = [], [], 1.0
    for zz, pp, kk in parts:
        z += list(zz)
        p += list(pp)
        k *= kk
    return np.array(z, dtype=complex), np.array(p, dtype=complex), k


def sp(fn, *a, **kw):
    z, p, k = fn(*a, output="zpk", analog=True, **kw)
    return z, p, k


def designs():
    d = []

    def add(name, family, desc, zpk, f0, f1, ref_hz, max_ref=False):
        d.append(dict(name=name, family=family, description=desc, zpk=zpk,
                      sweep=(f0, f1), ref_hz=ref_hz, max_ref=max_ref))

    for n in range(1, 9):
        fc = [3300.0, 12500.0, 740.0, 2870.0, 61300.0, 470.0, 8100.0, 21000.0][n - 1]
        add("butter_lp%d" % n, "butterworth", "Butterworth low-pass, order %d, -3 dB at %g Hz" % (n, fc),
            sp(signal.butter, n, W * fc, btype="low"), fc / 300, fc * 60, fc / 30)
    add("butter_hp2", "butterworth", "Butterworth high-pass, order 2, -3 dB at 38 Hz",
        sp(signal.butter, 2, W * 38.0, btype="high"), 1.0, 5e4, 1000.0)
    add("butter_hp5", "butterworth", "Butterworth high-pass, order 5, -3 dB at 16 Hz",
        sp(signal.butter, 5, W * 16.0, btype="high"), 1.0, 5e4, 1000.0)
    add("butter_bp2", "butterworth", "Butterworth band-pass, order 2, edges 47 Hz and 15.8 kHz",
        sp(signal.butter, 2, [W * 47.0, W * 15800.0], btype="bandpass"), 2.0, 5e5, 1000.0)
    add("butter_bp4", "butterworth", "Butterworth band-pass, order 4, edges 120 Hz and 9.3 kHz",
        sp(signal.butter, 4, [W * 120.0, W * 9300.0], btype="bandpass"), 10.0, 1e5, 1000.0)

    for n, rp, fc in [(2, 0.5, 5200.0), (3, 1.0, 1800.0), (4, 1.0, 1234.0), (5, 0.25, 33000.0), (6, 2.0, 910.0)]:
        add("cheby1_lp%d" % n, "chebyshev1", "Chebyshev I low-pass, order %d, %g dB ripple, edge %g Hz" % (n, rp, fc),
            sp(signal.cheby1, n, rp, W * fc, btype="low"), fc / 200, fc * 40, fc / 20)
    add("cheby1_hp4", "chebyshev1", "Chebyshev I high-pass, order 4, 0.5 dB ripple, edge 85 Hz",
        sp(signal.cheby1, 4, 0.5, W * 85.0, btype="high"), 3.0, 3e4, 2000.0)

    for n, rs, fc in [(3, 40.0, 2400.0), (4, 50.0, 15000.0), (6, 60.0, 700.0), (8, 70.0, 20000.0)]:
        add("cheby2_lp%d" % n, "chebyshev2", "Chebyshev II low-pass, order %d, %g dB stop band from %g Hz" % (n, rs, fc),
            sp(signal.cheby2, n, rs, W * fc, btype="low"), fc / 200, fc * 30, fc / 20)
    add("cheby2_hp4", "chebyshev2", "Chebyshev II high-pass, order 4, 45 dB stop band below 30 Hz",
        sp(signal.cheby2, 4, 45.0, W * 30.0, btype="high"), 1.0, 2e4, 1000.0)

    for n, rp, rs, fc in [(3, 0.5, 40.0, 3000.0), (4, 0.2, 50.0, 20000.0), (5, 0.1, 60.0, 1500.0), (7, 0.1, 80.0, 22000.0)]:
        add("ellip_lp%d" % n, "elliptic", "elliptic low-pass, order %d, %g dB ripple, %g dB stop band, edge %g Hz" % (n, rp, rs, fc),
            sp(signal.ellip, n, rp, rs, W * fc, btype="low"), fc / 200, fc * 30, fc / 20)
    add("ellip_hp4", "elliptic", "elliptic high-pass, order 4, 0.5 dB ripple, 45 dB stop band, edge 60 Hz",
        sp(signal.ellip, 4, 0.5, 45.0, W * 60.0, btype="high"), 2.0, 2e4, 1000.0)

    for n, fc in [(2, 7300.0), (3, 540.0), (4, 2870.0), (6, 18000.0), (8, 1300.0)]:
        add("bessel_lp%d" % n, "bessel", "Bessel low-pass, order %d, norm='mag', -3 dB at %g Hz" % (n, fc),
            sp(signal.bessel, n, W * fc, btype="low", norm="mag"), fc / 300, fc * 60, fc / 30)

    for q, fc in [(1.5, 4400.0), (3.0, 880.0), (8.0, 12000.0), (30.0, 2500.0)]:
        add("peak_lp2_q%g" % q, "peaking", "second-order low-pass, Q %g, f0 %g Hz" % (q, fc),
            cascade(zpk_lp2(fc, q)), fc / 100, fc * 50, fc / 30, max_ref=True)
    add("peak_hp2_q2.5", "peaking", "second-order high-pass, Q 2.5, f0 140 Hz",
        cascade(zpk_hp2(140.0, 2.5)), 5.0, 3e4, 3000.0, max_ref=True)

    for q, f0 in [(2.0, 60.0), (8.0, 50.0), (30.0, 400.0)]:
        add("notch_q%g" % q, "notch", "notch at %g Hz, Q %g" % (f0, q),
            cascade(zpk_notch(f0, q)), f0 / 20, f0 * 200, f0 * 40)
    add("notch_lp", "notch", "notch at 19 kHz, Q 5, with a first-order low-pass at 60 kHz",
        cascade(zpk_notch(19000.0, 5.0), ([], [-W * 60000.0], W * 60000.0)), 200.0, 5e5, 1000.0)

    add("bandstop2", "band-stop", "Butterworth band-stop, order 2, 410 Hz to 2.5 kHz",
        sp(signal.butter, 2, [W * 410.0, W * 2500.0], btype="bandstop"), 10.0, 1e5, 30.0)
    add("bandstop_ellip", "band-stop", "elliptic band-stop, order 2, 0.5 dB ripple, 40 dB, 900 Hz to 1.4 kHz",
        sp(signal.ellip, 2, 0.5, 40.0, [W * 900.0, W * 1400.0], btype="bandstop"), 20.0, 5e4, 100.0)

    for q, f0 in [(0.7, 1000.0), (5.0, 3150.0)]:
        add("bp2_q%g" % q, "band-pass", "second-order band-pass, Q %g, centre %g Hz" % (q, f0),
            cascade(zpk_bp2(f0, q)), f0 / 100, f0 * 100, f0, max_ref=True)

    add("shelf_low_cut", "shelf", "low shelf, -12 dB below 80 Hz (pole 80 Hz, zero 20 Hz)",
        cascade(zpk_shelf(20.0, 80.0)), 2.0, 2e4, 1000.0)
    add("shelf_high_cut", "shelf", "high shelf, -10 dB above 6 kHz (pole 6 kHz, zero 19 kHz)",
        cascade(zpk_shelf(19000.0, 6000.0)), 20.0, 2e5, 1000.0)
    add("tilt", "shelf", "tone control: bass lift shelf (zero 200 Hz, pole 50 Hz) and treble cut shelf (pole 3 kHz, zero 12 kHz)",
        cascade(zpk_shelf(200.0, 50.0), zpk_shelf(12000.0, 3000.0)), 5.0, 1e5, 1000.0)

    # Phono-style playback equalization with our own time constants
    # 3000 us, 300 us and 80 us (the standard ones are 3180, 318 and 75 us,
    # from memory): H = (1 + s*t2)/((1 + s*t1)(1 + s*t3)).
    t1, t2, t3 = 3000e-6, 300e-6, 80e-6
    eq = (np.array([-1 / t2], dtype=complex), np.array([-1 / t1, -1 / t3], dtype=complex), t2 / (t1 * t3))
    add("playback_eq", "playback-eq", "playback equalization, time constants 3000, 300 and 80 us",
        eq, 5.0, 1e5, 1000.0)
    z, p, k = sp(signal.butter, 2, W * 18.0, btype="high")
    add("playback_eq_rumble", "playback-eq", "playback equalization (3000, 300, 80 us) with a second-order 18 Hz rumble high-pass",
        cascade((eq[0], eq[1], eq[2]), (z, p, k)), 1.0, 1e5, 1000.0)

    add("anti_alias_ellip9", "elliptic", "anti-alias elliptic low-pass, order 9, 0.05 dB ripple, 90 dB, edge 20 kHz",
        sp(signal.ellip, 9, 0.05, 90.0, W * 20000.0, btype="low"), 100.0, 5e5, 1000.0)
    add("butter_lp10", "butterworth", "Butterworth low-pass, order 10, -3 dB at 5 kHz",
        sp(signal.butter, 10, W * 5000.0, btype="low"), 20.0, 1e5, 500.0)
    return d


def gain_db(zpk, f_hz):
    z, p, k = zpk
    _, h = signal.freqs_zpk(z, p, k, worN=W * np.atleast_1d(np.asarray(f_hz, dtype=float)))
    return 20 * np.log10(np.abs(h))


def grid(f0, f1, ppd, irregular, seed):
    k0 = math.ceil(ppd * math.log10(f0) - 1e-9)
    k1 = math.floor(ppd * math.log10(f1) + 1e-9)
    ks = np.arange(k0, k1 + 1, dtype=float)
    if irregular:
        rng = np.random.default_rng(seed)
        ks = ks + rng.uniform(-0.4, 0.4, size=ks.size)
        ks[0], ks[-1] = k0, k1
        keep = rng.uniform(size=ks.size) > 0.1
        keep[0] = keep[-1] = True
        ks = ks[keep]
    return 10 ** (ks / ppd)


def find_max(zpk, f0, f1):
    fine = np.logspace(math.log10(f0), math.log10(f1), 100001)
    g = gain_db(zpk, fine)
    i = int(np.argmax(g))
    if i == 0 or i == len(fine) - 1:
        return float(fine[i]), float(g[i])
    res = optimize.minimize_scalar(lambda lf: -gain_db(zpk, 10 ** lf)[0],
                                   bracket=(math.log10(fine[i - 1]), math.log10(fine[i]), math.log10(fine[i + 1])),
                                   method="brent", tol=1e-12)
    return float(10 ** res.x), float(-res.fun)


def corners(zpk, f0, f1, ref_hz, target):
    fine = np.logspace(math.log10(f0), math.log10(f1), 100001)
    g = gain_db(zpk, fine) - target
    i0 = int(np.argmin(np.abs(np.log(fine / ref_hz))))
    fn = lambda f: gain_db(zpk, f)[0] - target
    low = high = None
    for i in range(i0, 0, -1):
        if (g[i - 1] < 0) != (g[i] < 0):
            low = optimize.brentq(fn, fine[i - 1], fine[i], xtol=1e-14, rtol=1e-15)
            break
    for i in range(i0, len(fine) - 1):
        if (g[i] < 0) != (g[i + 1] < 0):
            high = optimize.brentq(fn, fine[i], fine[i + 1], xtol=1e-14, rtol=1e-15)
            break
    return low, high


# --- the true structure as sections, for the information limit ---

def structure(zpk):
    """Parameters and a gain function g(theta, f) in dB (up to a constant)."""
    z, p, k = zpk
    secs = []

    def group(roots, zero):
        out = []
        for r in roots:
            if abs(r) < 1e-9:
                out.append(("origin", None))
            elif abs(r.imag) < 1e-9 * abs(r):
                out.append(("real", math.log(abs(r.real))))
            elif r.imag > 0:
                w0 = abs(r)
                if abs(r.real) < 1e-9 * w0:
                    out.append(("jw", math.log(w0)))
                else:
                    out.append(("pair", (math.log(w0), math.log(w0 / (-2 * r.real) if not zero else w0 / (2 * abs(r.real))))))
        return out

    # Repeated roots (the double jw zeros of a band-stop) are one section
    # of higher multiplicity: separate parameters would not be identifiable.
    for side, roots in (("p", p), ("z", z)):
        for kind, v in group(roots, side == "z"):
            for i, (s2, k2, v2, m) in enumerate(secs):
                if s2 == side and k2 == kind and k2 != "origin" and np.allclose(v2, v, rtol=0, atol=1e-9):
                    secs[i] = (s2, k2, v2, m + 1)
                    break
            else:
                secs.append((side, kind, v, 1))
    theta = [0.0]
    for side, kind, v, _ in secs:
        if kind in ("real", "jw"):
            theta.append(v)
        elif kind == "pair":
            theta.extend(v)
    theta = np.array(theta)

    def g(th, f):
        w = W * np.asarray(f, dtype=float)
        out = np.full(w.shape, th[0])
        j = 1
        for side, kind, _, m in secs:
            s = (-1 if side == "p" else 1) * m
            if kind == "origin":
                out = out + s * 20 * np.log10(w)
            elif kind == "real":
                a = math.exp(th[j]); j += 1
                out = out + s * 10 * np.log10(1 + (w / a) ** 2)
            elif kind == "jw":
                a = math.exp(th[j]); j += 1
                out = out + s * 20 * np.log10(np.abs(1 - (w / a) ** 2))
            else:
                a, q = math.exp(th[j]), math.exp(th[j + 1]); j += 2
                u2 = (w / a) ** 2
                out = out + s * 10 * np.log10((1 - u2) ** 2 + u2 / (q * q))
        return out

    return theta, g


def info_limit(zpk, fs, ref, target_level, corner_hz, mode):
    """Standard deviation of ln fc per dB of noise, or None when undetermined."""
    theta, g = structure(zpk)
    # the section form reproduces the design up to a constant
    check = gain_db(zpk, fs) - g(theta, fs)
    assert np.ptp(check) < 1e-6, (np.ptp(check), zpk)
    h = 1e-6
    npar = theta.size
    J = np.zeros((len(fs), npar))
    for a in range(npar):
        tp = theta.copy(); tp[a] += h
        tm = theta.copy(); tm[a] -= h
        J[:, a] = (g(tp, fs) - g(tm, fs)) / (2 * h)
    info = J.T @ J
    if np.linalg.cond(info) > 1e14:
        return None
    cov = np.linalg.inv(info)
    # ln fc: g(fc) - g(ref) = level; dlnfc/dth = -(dg(fc)/dth - dg(ref)/dth)/(dg/dlnf at fc)
    gr = np.zeros(npar)
    for a in range(npar):
        tp = theta.copy(); tp[a] += h
        tm = theta.copy(); tm[a] -= h
        d = (g(tp, [corner_hz]) - g(tm, [corner_hz]))[0] / (2 * h)
        dref = (g(tp, [ref]) - g(tm, [ref]))[0] / (2 * h)  # envelope theorem for the maximum too
        gr[a] = d - dref
    slope = (g(theta, [corner_hz * math.exp(h)]) - g(theta, [corner_hz * math.exp(-h)]))[0] / (2 * h)
    gr = -gr / slope
    v = float(gr @ cov @ gr)
    return math.sqrt(v) if v > 0 else None


def main():
    out = {"scipy_version": scipy.__version__, "numpy_version": np.__version__, "designs": []}
    for di, d in enumerate(designs()):
        zpk = d["zpk"]
        f0, f1 = d["sweep"]
        refs = [("frequency", d["ref_hz"], float(gain_db(zpk, d["ref_hz"])[0]))]
        if d["max_ref"]:
            mx, mg = find_max(zpk, f0, f1)
            refs.append(("max", mx, mg))
        cases = []
        for mode, rhz, rdb in refs:
            lo, hi = corners(zpk, f0, f1, rhz, rdb + HALF)
            cases.append({"ref_mode": mode, "ref_hz": rhz, "ref_gain_db": rdb, "level_db": HALF,
                          "low_hz": lo, "high_hz": hi})
        grids = []
        for ppd in DENSITIES:
            for irregular in (False, True):
                fs = np.array([float("%.12g" % f) for f in grid(f0, f1, ppd, irregular, 1000 * di + ppd)])
                gs = gain_db(zpk, fs)
                # A bench resolves about 100 dB below the passband (common
                # practice): the sweep stops where the response leaves that.
                floor = max(gs) - 100
                i0, i1 = 0, len(fs)
                while gs[i0] < floor:
                    i0 += 1
                while gs[i1 - 1] < floor:
                    i1 -= 1
                fs, gs = fs[i0:i1], gs[i0:i1]
                lim = []
                for c in cases:
                    row = {}
                    for side in ("low", "high"):
                        fc = c[side + "_hz"]
                        row[side] = None if fc is None else info_limit(zpk, fs, c["ref_hz"], c["level_db"], fc, c["ref_mode"])
                    lim.append(row)
                grids.append({"ppd": ppd, "irregular": irregular,
                              "freq_hz": [float(f) for f in fs],
                              "gain_db": [float("%.12g" % v) for v in gs],
                              "limit_per_db": lim})
        out["designs"].append({"name": d["name"], "family": d["family"], "description": d["description"],
                               "sweep_hz": [f0, f1], "corners": cases, "grids": grids})
    with open(os.path.join(HERE, "battery.json"), "w") as fh:
        json.dump(out, fh, separators=(",", ":"))
        fh.write("\n")
    print("%d designs, %d responses" % (len(out["designs"]), sum(len(d["grids"]) for d in out["designs"])))


if __name__ == "__main__":
    main()
