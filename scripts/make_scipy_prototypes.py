#!/usr/bin/env python3
"""Write reference-tables/scipy_prototypes.csv: golden lowpass prototype data from scipy.signal.

Cases: Butterworth (buttap), Chebyshev type I (cheb1ap, 0.01/0.1/0.5/1 dB ripple) and Bessel
(besselap, norm='delay': unit group delay at DC), orders 1..12. For each case the file holds the
poles and the magnitude in dB (20*log10|H(jw)|, from freqs_zpk) at 60 log-spaced normalized
frequencies 0.05..10 rad/s. For Bessel it also holds the half-power (-3.0103 dB) frequency of the
delay-normalized prototype, the ratio of the norm='delay' to the norm='mag' poles.

Usage: python3 scripts/make_scipy_prototypes.py   (run from the workspace root)
"""
import os
import sys

import numpy as np
import scipy
from scipy import signal

SCIPY_VERSION = "1.17.1"
assert scipy.__version__ == SCIPY_VERSION, (
    f"golden data is pinned to scipy {SCIPY_VERSION}, found {scipy.__version__}"
)

ORDERS = range(1, 13)
W = np.logspace(np.log10(0.05), np.log10(10.0), 60)


def cases():
    for n in ORDERS:
        yield ("butterworth", 0.0, n) + signal.buttap(n)
    for rp in (0.01, 0.1, 0.5, 1.0):
        for n in ORDERS:
            yield ("chebyshev", rp, n) + signal.cheb1ap(n, rp)
    for n in ORDERS:
        yield ("bessel", 0.0, n) + signal.besselap(n, norm="delay")


def main():
    out = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "reference-tables",
                       "scipy_prototypes.csv")
    lines = [
        f"# Source: scipy.signal {scipy.__version__} (numpy {np.__version__}): buttap, "
        "cheb1ap, besselap(norm='delay'), freqs_zpk; written by scripts/make_scipy_prototypes.py",
        "# Rows: pole,family,ripple_db,order,re,im  |  mag,family,ripple_db,order,w_rad_s,db "
        "(db = 20*log10|H(jw)|, gain as scipy returns it: peak 0 dB)  |  "
        "w3db,bessel,0.0,order,w_rad_s (half-power frequency of the delay-normalized Bessel)",
    ]
    for family, rp, n, z, p, k in cases():
        assert len(z) == 0, "all-pole prototypes only"
        # Deterministic pole order: by imaginary part, then real part.
        for pole in sorted(p, key=lambda c: (round(c.imag, 12), c.real)):
            lines.append(f"pole,{family},{float(rp)!r},{n},{float(pole.real)!r},{float(pole.imag)!r}")
        _, h = signal.freqs_zpk(z, p, k, worN=W)
        for w, hv in zip(W, h):
            lines.append(f"mag,{family},{float(rp)!r},{n},{float(w)!r},{float(20.0 * np.log10(abs(hv)))!r}")
    for n in ORDERS:
        _, p_delay, _ = signal.besselap(n, norm="delay")
        _, p_mag, _ = signal.besselap(n, norm="mag")
        ratios = sorted(abs(pd) / abs(pm) for pd, pm in zip(sorted(p_delay, key=abs),
                                                         sorted(p_mag, key=abs)))
        assert ratios[-1] - ratios[0] < 1e-12 * ratios[0], "pole sets differ by more than a scale"
        w3 = ratios[len(ratios) // 2]
        _, h = signal.freqs_zpk([], p_delay, np.prod(-p_delay).real, worN=[w3])
        assert abs(abs(h[0]) ** 2 - 0.5) < 1e-12, "not the half-power point"
        lines.append(f"w3db,bessel,0.0,{n},{float(w3)!r}")
    with open(out, "w", encoding="ascii") as f:
        f.write("\n".join(lines) + "\n")
    print(f"wrote {len(lines)} lines to {os.path.normpath(out)}", file=sys.stderr)


if __name__ == "__main__":
    main()
