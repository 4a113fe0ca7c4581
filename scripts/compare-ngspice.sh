#!/usr/bin/env bash
# Speed of `xtal-ladder analyze` against ngspice (and numpy) on the same circuit and the same
# sweep, after checking that they compute the same response.
#
# For the demo design (examples/demo-design.json) over its default analysis window with
# 10,001 linear points:
#   - whole process: `xtal-ladder analyze … --format csv > FILE` against `ngspice -b … > FILE`
#     on the netlist `xtal-ladder netlist` writes for the same points, runs alternating;
#   - analysis alone: the in-process time of the first sweep (`analyze --timing`, in separate
#     runs) against ngspice's whole-process time minus that of an 11-point run of the same
#     netlist (start-up, parsing and output of a few lines);
#   - numpy: scripts/numpy_ladder.py's in-process time of the same chain-matrix analysis
#     (S21, S11 and group delay), vectorized over frequency: its first call against our
#     first sweep (cold), and its median against the median of our repeated sweeps (warm);
#   - agreement: |S21| of analyze, ngspice and numpy, and |S11| of analyze and numpy, within
#     0.02 dB wherever S21 > -60 dB (the passband and skirts), so that the times are of the
#     same work.
# Without --short a 12-crystal design at 100,001 points is timed too.
#
# Usage: bash scripts/compare-ngspice.sh [--short]
#   --short   5 runs of each instead of 15, no 12-crystal case (well under a minute once the
#             release build is there).
# Exit status: 0 when the responses agree (the speed targets are reported, not enforced:
# >= 15x whole process, >= 100x analysis alone, >= 5x numpy in-process); 1 when they do not
# agree or a tool fails.
set -euo pipefail
cd "$(dirname "$0")/.."

short=0
case "${1:-}" in
  --short) short=1 ;;
  "") ;;
  *) echo "usage: bash scripts/compare-ngspice.sh [--short]" >&2; exit 2 ;;
esac

for tool in ngspice python3 cargo; do
  command -v "$tool" >/dev/null 2>&1 || { echo "compare-ngspice: $tool not found" >&2; exit 1; }
done

build_start=$(date +%s)
cargo build --release -q -p filter-cli
echo "release build: $(( $(date +%s) - build_start )) s"

exec python3 - "$short" <<'PYTHON'
import json
import math
import os
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import time

SHORT = sys.argv[1] == "1"
RUNS = 5 if SHORT else 15
POINTS = 10001
SMALL_POINTS = 11
# Agreement limit and where it applies: the contract between analyze and ngspice (passband
# and skirts, S21 > -60 dB).
LIMIT_DB = 0.02
FLOOR_DB = -60.0
# Group delay: ngspice and numpy differentiate the phase numerically; ours is analytic.
DELAY_LIMIT = 1e-3
BIN = os.path.join("target", "release", "xtal-ladder")
DESIGN = os.path.join("examples", "demo-design.json")
TMP = tempfile.mkdtemp(prefix="compare-ngspice-")
started = time.perf_counter()


def fail(msg):
    print(f"compare-ngspice: {msg}", file=sys.stderr)
    sys.exit(1)


def run(args, stdout=subprocess.DEVNULL):
    """Run a command; return (seconds, stderr text)."""
    t0 = time.perf_counter()
    p = subprocess.run(args, stdout=stdout, stderr=subprocess.PIPE, text=True)
    dt = time.perf_counter() - t0
    if p.returncode != 0:
        fail(f"{' '.join(args)} exited {p.returncode}:\n{p.stderr}")
    return dt, p.stderr


def output(args):
    p = subprocess.run(args, capture_output=True, text=True)
    if p.returncode != 0:
        fail(f"{' '.join(args)} exited {p.returncode}:\n{p.stderr}")
    return p.stdout


SCALE = {"f": 1e-15, "p": 1e-12, "n": 1e-9, "u": 1e-6, "m": 1e-3, "k": 1e3, "g": 1e9, "t": 1e12}


def spice_number(text):
    m = re.fullmatch(r"([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)([a-zA-Z]*)", text)
    if not m:
        fail(f"not a SPICE number: {text!r}")
    v, s = float(m.group(1)), m.group(2).lower()
    if s.startswith("meg"):
        return v * 1e6
    return v * SCALE.get(s[:1], 1.0) if s else v


def netlist_ports(path):
    """The source EMF E, Rs, RL and the input node of a netlist written by `xtal-ladder
    netlist`."""
    emf = rs = rl = node = None
    src = None
    for line in open(path):
        c = line.split()
        if not c or c[0].startswith("*"):
            continue
        name = c[0].upper()
        if name.startswith("V") and "AC" in [x.upper() for x in c]:
            src = c[1]
            emf = spice_number(c[[x.upper() for x in c].index("AC") + 1])
    for line in open(path):
        c = line.split()
        if len(c) >= 4 and c[0].upper().startswith("R"):
            if src in (c[1], c[2]):
                rs = spice_number(c[3])
                node = c[2] if c[1] == src else c[1]
            if sorted([c[1].lower(), c[2]]) == ["0", "out"]:
                rl = spice_number(c[3])
    if None in (emf, rs, rl, node):
        fail(f"cannot find the source, input and load of {path}")
    return emf, rs, rl, node


def same_table_netlist(path):
    """Make ngspice print what `analyze --format csv` prints: |S21| (dB), S21 phase (degrees),
    |S11| (dB) and the group delay (s), in place of the netlist's vdb(out) vp(out). With the
    EMF E behind Rs: S21 = 2*sqrt(Rs/RL)*V(out)/E, S11 = 2*V(in)/E - 1; the group delay is
    ngspice's numerical derivative of the continuous phase (degrees per Hz, over 360)."""
    emf, rs, rl, node = netlist_ports(path)
    text = open(path).read()
    old = "print vdb(out) vp(out)"
    if old not in text:
        fail(f"{path}: no '{old}' line to replace")
    new = (f"let s21 = v(out)*{2 * math.sqrt(rs / rl) / emf!r}\n"
           f"let s11 = v({node})*{2 / emf!r} - 1\n"
           "let gd = -deriv(cph(v(out)))/360\n"
           "print db(s21) ph(s21) db(s11) gd")
    with open(path, "w") as fh:
        fh.write(text.replace(old, new))


def ngspice_table(path):
    """Rows (f, s21_db, s21_deg, s11_db, group_delay_s) of the printed table."""
    rows = []
    for line in open(path):
        c = line.split()
        if len(c) >= 6 and c[0].isdigit():
            rows.append(tuple(float(x) for x in c[1:6]))
    return rows


def number(cell):
    """A CSV number; numpy_ladder.py's repr() of a numpy 2 scalar reads np.float64(...)."""
    cell = cell.strip()
    m = re.fullmatch(r"np\.float64\((.*)\)", cell)
    return float(m.group(1) if m else cell)


def csv_table(path, column="s21_db"):
    with open(path) as fh:
        header = fh.readline().strip().split(",")
        k = header.index(column)
        return [(number(r[0]), number(r[k])) for r in (l.split(",") for l in fh if l.strip())]


def agreement(a, b, what, mask=None):
    """Largest |difference| where `mask` (default: a > FLOOR_DB) holds, and over all points;
    same frequencies."""
    if len(a) != len(b):
        fail(f"{what}: {len(a)} against {len(b)} points")
    if mask is None:
        mask = [ya > FLOOR_DB for _, ya in a]
    inside = []
    overall = 0.0
    for (fa, ya), (fb, yb), m in zip(a, b, mask):
        if abs(fa - fb) > 1e-9 * abs(fa):
            fail(f"{what}: frequencies differ ({fa!r} against {fb!r})")
        d = abs(ya - yb)
        overall = max(overall, d)
        if m:
            inside.append(d)
    if not inside:
        fail(f"{what}: no point above {FLOOR_DB} dB")
    return max(inside), len(inside), overall


def delay_agreement(ours, theirs, s21):
    """Largest relative group-delay difference over the -3 dB band, leaving out the points
    where the other tool's numerical derivative came out exactly 0 (ngspice's deriv does at
    some points of very fine grids); returns (difference, points compared, points left out)."""
    top = max(y for _, y in s21)
    diffs, zeros = [], 0
    for a, b, g in zip(ours, theirs, s21):
        if g[1] <= top - 3.0:
            continue
        if b[1] == 0.0:
            zeros += 1
            continue
        diffs.append(abs(a[1] - b[1]) / abs(a[1]))
    return (max(diffs, default=0.0), len(diffs), zeros)


def window(design):
    v = json.loads(output([BIN, "analyze", design, "--format", "json"]))
    return v["from_hz"], v["to_hz"]


def case(design, points, runs, label):
    f1, f2 = window(design)
    rng = ["--from", repr(f1), "--to", repr(f2)]
    big = os.path.join(TMP, f"{label}.cir")
    small = os.path.join(TMP, f"{label}-small.cir")
    output([BIN, "netlist", design, *rng, "--points", str(points), "-o", big])
    output([BIN, "netlist", design, *rng, "--points", str(SMALL_POINTS), "-o", small])
    same_table_netlist(big)
    same_table_netlist(small)
    csv = os.path.join(TMP, f"{label}.csv")
    spice_out = os.path.join(TMP, f"{label}.out")
    # Both programs print their table on stdout, redirected to a file. The whole-process runs
    # do nothing else; separate runs with --timing give the in-process times.
    analyze = [BIN, "analyze", design, *rng, "--points", str(points), "--format", "csv"]

    def time_analyze():
        with open(csv, "w") as fh:
            return run(analyze, stdout=fh)[0]

    def time_inside():
        dt, err = run(analyze + ["--timing"])
        m = re.search(r"analysis: ([0-9.]+) ms for (\d+) points \(first sweep\); ([0-9.]+) ms",
                      err)
        if not m or int(m.group(2)) != points:
            fail(f"no timing line from analyze --timing:\n{err}")
        return float(m.group(1)) / 1e3, float(m.group(3)) / 1e3

    def time_spice(netlist, out):
        with open(out, "w") as fh:
            return run(["ngspice", "-b", netlist], stdout=fh)[0]

    # Warm the caches once, then alternate which program goes first.
    time_analyze()
    time_spice(big, spice_out)
    time_spice(small, os.devnull)
    ours, cold, warm, spice, spice_small = [], [], [], [], []
    for i in range(runs):
        steps = ["a", "s", "m", "t"]
        if i % 2:
            steps.reverse()
        for s in steps:
            if s == "a":
                ours.append(time_analyze())
            elif s == "s":
                spice.append(time_spice(big, spice_out))
            elif s == "m":
                spice_small.append(time_spice(small, os.devnull))
            else:
                c, w = time_inside()
                cold.append(c)
                warm.append(w)
    a = csv_table(csv)
    table_rows = ngspice_table(spice_out)
    s = [(r[0], r[1]) for r in table_rows]
    worst, n_inside, overall = agreement(a, s, f"{label}: analyze against ngspice")
    mask = [y > FLOOR_DB for _, y in a]
    s11, _, _ = agreement(csv_table(csv, "s11_db"), [(r[0], r[3]) for r in table_rows],
                          f"{label}: analyze against ngspice (S11)", mask)
    worst = max(worst, s11)
    delay, _, delay_zeros = delay_agreement(csv_table(csv, "group_delay_s"),
                                            [(r[0], r[4]) for r in table_rows], a)
    return {
        "label": label, "design": design, "points": points, "runs": runs, "range": rng,
        "csv": csv, "whole": statistics.median(ours), "inproc": statistics.median(cold),
        "warm": statistics.median(warm),
        "spice": statistics.median(spice), "spice_small": statistics.median(spice_small),
        "ratio": statistics.median(b / a for a, b in zip(ours, spice)),
        "worst": worst, "inside": n_inside, "overall": overall, "delay": delay,
        "delay_zeros": delay_zeros,
    }


def numpy_case(c, processes, repeat):
    """numpy_ladder.py run `processes` times: medians of its first call and of its warm calls;
    agreement of S21 and S11 with analyze, and of the group delay (a phase gradient there)."""
    out_csv = os.path.join(TMP, f"{c['label']}-numpy.csv")
    rng = c["range"]
    firsts, warms = [], []
    for k in range(processes):
        args = ["python3", os.path.join("scripts", "numpy_ladder.py"), c["design"],
                "--from", rng[1], "--to", rng[3], "--points", str(c["points"]),
                "--repeat", str(repeat)]
        text = output(args + (["--csv", out_csv] if k == 0 else []))
        m = re.search(r"first ([0-9.]+) ms, median ([0-9.]+) ms", text)
        if not m:
            fail(f"no timing from numpy_ladder.py:\n{text}")
        firsts.append(float(m.group(1)) / 1e3)
        warms.append(float(m.group(2)) / 1e3)
    a = csv_table(c["csv"])
    mask = [y > FLOOR_DB for _, y in a]
    worst = 0.0
    for column in ("s21_db", "s11_db"):
        w, _, _ = agreement(csv_table(c["csv"], column), csv_table(out_csv, column),
                            f"{c['label']}: analyze against numpy ({column})", mask)
        worst = max(worst, w)
    n_inside = sum(mask)
    # Group delay over the -3 dB band (numpy's is a finite difference, so only reported).
    delay, _, _ = delay_agreement(csv_table(c["csv"], "group_delay_s"),
                                  csv_table(out_csv, "group_delay_s"), a)
    return {"cold": statistics.median(firsts), "warm": statistics.median(warms),
            "worst": worst, "inside": n_inside, "delay": delay}


def ms(s):
    return f"{s * 1e3:9.3f} ms"


def table(c, np):
    spice_analysis = max(c["spice"] - c["spice_small"], 0.0)
    rows = [
        ("whole process", c["whole"], c["spice"], "ngspice", c["ratio"], 15),
        ("analysis alone", c["inproc"], spice_analysis, "ngspice", spice_analysis / c["inproc"],
         100),
    ]
    if np is not None:
        rows.append(("in-process, cold", c["inproc"], np["cold"], "numpy",
                     np["cold"] / c["inproc"], 5))
        rows.append(("in-process, warm", c["warm"], np["warm"], "numpy",
                     np["warm"] / c["warm"], 5))
    print(f"\n{c['label']}: {c['points']} points, median of {c['runs']} alternating runs")
    print(f"  {'':18} {'xtal-ladder':>12} {'other':>12}            {'ratio':>8}  target")
    for name, ours, other, who, ratio, target in rows:
        flag = "met" if ratio >= target else "NOT met"
        print(f"  {name:18} {ms(ours)} {ms(other)} {who:<8} {ratio:7.1f}x  >= {target}x {flag}")
    print(f"  ngspice 11-point run (start-up and parsing): {ms(c['spice_small']).strip()}")
    print(f"  agreement with ngspice: max |dS21|, |dS11| {c['worst']:.2e} dB over {c['inside']} "
          f"points above {FLOOR_DB:g} dB (limit {LIMIT_DB} dB); |dS21| {c['overall']:.2e} dB "
          f"over all points; group delay in the -3 dB band within {c['delay']:.1e} (relative; "
          f"ngspice's is a numerical derivative, limit {DELAY_LIMIT:g}"
          + (f"; {c['delay_zeros']} points where it came out 0 left out" if c["delay_zeros"]
             else "") + ")")
    if np is not None:
        print(f"  agreement with numpy: max |dS21|, |dS11| {np['worst']:.2e} dB over "
              f"{np['inside']} points; group delay in the -3 dB band within "
              f"{np['delay']:.1e} (relative; numpy's is a phase gradient)")


demo = case(DESIGN, POINTS, RUNS, "demo design")
np_demo = numpy_case(demo, 3 if SHORT else 7, 20)
table(demo, np_demo)
failed = (demo["worst"] > LIMIT_DB or np_demo["worst"] > LIMIT_DB
          or demo["delay"] > DELAY_LIMIT)

if not SHORT:
    big_design = os.path.join(TMP, "twelve.json")
    output([BIN, "design", "--fs", "9.8304M", "--lm", "17m", "--rm", "10", "--c0", "3.9p",
            "--order", "12", "--family", "chebyshev", "--ripple", "0.1", "--bandwidth", "2.4k",
            "--bandwidth-at", "6db", "-o", big_design])
    big = case(big_design, 100001, 5, "12 crystals")
    np_big = numpy_case(big, 3, 5)
    table(big, np_big)
    failed = (failed or big["worst"] > LIMIT_DB or np_big["worst"] > LIMIT_DB
              or big["delay"] > DELAY_LIMIT)

print(f"\ncompare-ngspice: {time.perf_counter() - started:.1f} s")
if failed:
    fail(f"the responses differ by more than {LIMIT_DB} dB above {FLOOR_DB:g} dB (or the group "
         f"delays by more than {DELAY_LIMIT:g}); the files are in {TMP}")
shutil.rmtree(TMP, ignore_errors=True)
PYTHON
