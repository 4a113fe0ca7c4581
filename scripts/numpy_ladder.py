#!/usr/bin/env python3
"""The chain-matrix analysis a builder would otherwise write: numpy, vectorized over frequency.

Reads an xtal-ladder design record (JSON), analyses the ladder over a linear sweep with the
same model (BVD crystals with C0 and spurious modes, ideal capacitors, resistive ends) and
prints the in-process analysis time. It computes what `xtal-ladder analyze` computes per
point for its table: S21, S11 and the group delay (here the way a numpy user would: the
gradient of the unwrapped S21 phase). Two times are printed: the first call in this process (cold, as a
one-off run of a script is) and the median of --repeat further calls (warm). With --csv it
writes frequency_hz,s21_db,s11_db,group_delay_s for an agreement check against
`xtal-ladder analyze`.

Usage: numpy_ladder.py DESIGN.json --from F1 --to F2 --points N [--repeat R] [--csv OUT]
"""
import argparse
import json
import sys
import time

import numpy as np


def crystal_z(x, w):
    zm = x["rm_ohm"] + 1j * (w * x["lm_h"] - 1.0 / (w * x["cm_f"]))
    y = 1.0 / zm + 1j * w * x["c0_f"]
    for b in x.get("spurious", []):
        y = y + 1.0 / (b["rm_ohm"] + 1j * (w * b["lm_h"] - 1.0 / (w * b["cm_f"])))
    return 1.0 / y


def analyse(design, f):
    """S21, S11 and group delay (s) at the frequencies f (Hz)."""
    w = 2.0 * np.pi * f
    one = np.ones_like(w, dtype=complex)
    zero = np.zeros_like(w, dtype=complex)
    a, b, c, d = one, zero, zero, one
    n = len(design["crystals"])
    for i, x in enumerate(design["crystals"]):
        z = crystal_z(x, w)
        cs = design["series_caps_f"][i]
        if cs is not None:
            z = z + 1.0 / (1j * w * cs)
        b = a * z + b
        d = c * z + d
        if i + 1 < n:
            y = 1j * w * design["shunt_caps_f"][i]
            a = a + b * y
            c = c + d * y
    rs, rl = design["source_ohm"], design["load_ohm"]
    ar, crr, dr = a * rl, c * rs * rl, d * rs
    den = ar + b + crr + dr
    s21 = 2.0 * np.sqrt(rs * rl) / den
    s11 = (ar + b - crr - dr) / den
    delay = -np.gradient(np.unwrap(np.angle(s21)), w)
    return s21, s11, delay


def main():
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("design")
    p.add_argument("--from", dest="f1", type=float, required=True)
    p.add_argument("--to", dest="f2", type=float, required=True)
    p.add_argument("--points", type=int, default=10001)
    p.add_argument("--repeat", type=int, default=20)
    p.add_argument("--csv")
    args = p.parse_args()
    with open(args.design) as fh:
        design = json.load(fh)
    f = np.linspace(args.f1, args.f2, args.points)
    t0 = time.perf_counter()
    s21, s11, delay = analyse(design, f)
    first = time.perf_counter() - t0
    times = []
    for _ in range(args.repeat):
        t0 = time.perf_counter()
        analyse(design, f)
        times.append(time.perf_counter() - t0)
    print(f"numpy analysis: first {first * 1e3:.3f} ms, median {np.median(times) * 1e3:.3f} ms "
          f"for {args.points} points")
    if args.csv:
        with open(args.csv, "w") as fh:
            fh.write("frequency_hz,s21_db,s11_db,group_delay_s\n")
            for fi, hi, ri, di in zip(f, s21, s11, delay):
                fh.write(f"{float(fi)!r},{float(20 * np.log10(abs(hi)))!r},"
                         f"{float(20 * np.log10(abs(ri)))!r},{float(di)!r}\n")
    return 0


if __name__ == "__main__":
    sys.exit(main())
