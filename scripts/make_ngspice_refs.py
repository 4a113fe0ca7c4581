#!/usr/bin/env python3
"""Run ngspice-39 on the reference netlists and write (or check) their AC responses.

For every netlist reference-tables/ngspice/<case>.cir (written by filter-core's SPICE netlist
writer, see tests/tests/ngspice_reference.rs) this runs `ngspice -b <case>.cir`, which prints
frequency, vdb(out) and vp(out) (degrees) with 15 digits, and writes <case>.csv beside it:

    # source: ngspice-39 AC analysis of <case>.cir; made by scripts/make_ngspice_refs.py
    # ... (what the columns are)
    f_hz,vout_db,vout_deg,s21_db,s21_deg

S21 follows the netlist's EMF convention: with an AC EMF E behind Rs and the load RL at node
out, S21 = 2*sqrt(Rs/RL)*V(out)/E, so s21_db = vout_db + 20*log10(2/E) + 10*log10(Rs/RL) and
s21_deg = vout_deg. E, Rs and RL are read from the netlist's V card, the resistor at the
source node, and the resistor from node out to ground.

The run fails (exit 1) when ngspice is not version 39, exits non-zero, prints any line with
"warning" or "error" in it, or prints a table of unexpected shape.

The netlists themselves are written by filter-core's writer from the circuits defined in
tests/tests/ngspice_reference.rs:
    XTAL_LADDER_WRITE_NETLISTS=1 cargo test -p xtal-ladder-tests --test ngspice_reference

Usage (from anywhere):
    python3 scripts/make_ngspice_refs.py            rewrite the committed CSVs
    python3 scripts/make_ngspice_refs.py --check    rerun into a temporary directory and
                                                    compare with the committed CSVs: fails on
                                                    any drift above 1e-6 dB / 1e-6 degrees
                                                    or 1e-12 relative in frequency
"""
import math
import os
import re
import subprocess
import sys
import tempfile

NGSPICE_VERSION = "39"
HERE = os.path.dirname(os.path.abspath(__file__))
REFS = os.path.normpath(os.path.join(HERE, "..", "reference-tables", "ngspice"))
# --check tolerances: ngspice is deterministic, so any change beyond print rounding is drift.
TOL_DB = 1e-6
TOL_DEG = 1e-6
TOL_F_REL = 1e-12


def fail(msg):
    print(f"make_ngspice_refs: {msg}", file=sys.stderr)
    sys.exit(1)


def check_version():
    try:
        out = subprocess.run(["ngspice", "--version"], capture_output=True, text=True,
                             timeout=60)
    except FileNotFoundError:
        fail(f"ngspice not found; install ngspice-{NGSPICE_VERSION} (Debian: apt-get install "
             "ngspice)")
    text = out.stdout + out.stderr
    m = re.search(r"ngspice-(\d+)", text)
    if not m or m.group(1) != NGSPICE_VERSION:
        found = m.group(0) if m else repr(text.strip()[:200])
        fail(f"the references are pinned to ngspice-{NGSPICE_VERSION}; `ngspice --version` "
             f"reports {found}")


SCALE = {"f": -15, "p": -12, "n": -9, "u": -6, "m": -3, "k": 3, "g": 9, "t": 12}


def spice_value(text):
    """A SPICE number with its scale suffix (m is milli, meg is mega; trailing letters ignored)."""
    m = re.fullmatch(r"([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)([a-zA-Z]*)", text)
    if not m:
        raise ValueError(f"not a SPICE number: {text!r}")
    num, suffix = m.group(1), m.group(2).lower()
    if suffix.startswith("meg"):
        return float(num) * 1e6
    if suffix.startswith("mil"):
        return float(num) * 25.4e-6
    if suffix and suffix[0] in SCALE:
        return float(num) * 10.0 ** SCALE[suffix[0]]
    return float(num)


def terminations(netlist_text):
    """EMF (V), Rs and RL (ohm) from the element cards."""
    cards = []
    in_control = False
    for line in netlist_text.splitlines()[1:]:
        t = line.strip().lower()
        if t == ".control":
            in_control = True
        elif t == ".endc":
            in_control = False
        elif t and not in_control and t[0] not in "*.":
            cards.append(t.split())
    v = [c for c in cards if c[0].startswith("v")]
    if len(v) != 1 or v[0][2] != "0" or "ac" not in v[0]:
        raise ValueError("expected one V card 'Vx node 0 ... AC <emf>'")
    src = v[0][1]
    emf = spice_value(v[0][v[0].index("ac") + 1])
    rs = [spice_value(c[3]) for c in cards if c[0].startswith("r") and src in c[1:3]]
    rl = [spice_value(c[3]) for c in cards
          if c[0].startswith("r") and c[1:3] == ["out", "0"] and not c[0].startswith("rb")]
    if len(rs) != 1 or len(rl) != 1:
        raise ValueError("expected one resistor at the source node and one from out to 0")
    return emf, rs[0], rl[0]


def run_ngspice(cir_path, workdir):
    """Run ngspice in batch mode; return the rows (f, vdb, vp) it printed."""
    env = dict(os.environ)
    # A user's ~/.spiceinit must not change the run.
    env["HOME"] = workdir
    p = subprocess.run(["ngspice", "-b", cir_path], cwd=workdir, env=env, capture_output=True,
                       text=True, timeout=600)
    name = os.path.basename(cir_path)
    text = p.stdout + "\n" + p.stderr
    if p.returncode != 0:
        fail(f"ngspice exited with {p.returncode} on {name}:\n{text}")
    bad = [l for l in text.splitlines() if re.search(r"warning|error", l, re.IGNORECASE)]
    if bad:
        fail(f"ngspice printed warnings or errors on {name}:\n" + "\n".join(bad))
    m = re.search(r"No\. of Data Rows : (\d+)", p.stdout)
    if not m:
        fail(f"no 'No. of Data Rows' line in the output for {name}")
    n = int(m.group(1))
    header = re.search(r"^Index\s+frequency\s+vdb\(out\)\s+vp\(out\)\s*$", p.stdout, re.M)
    if not header:
        fail(f"no 'Index frequency vdb(out) vp(out)' table for {name}")
    rows = []
    for line in p.stdout.splitlines():
        f = line.split()
        if len(f) == 4 and f[0].isdigit():
            if int(f[0]) != len(rows):
                fail(f"{name}: table row {f[0]} out of order")
            rows.append(tuple(float(x) for x in f[1:]))
    if len(rows) != n:
        fail(f"{name}: {len(rows)} table rows, ngspice reported {n}")
    return rows


def csv_text(stem, netlist_text, rows):
    emf, rs, rl = terminations(netlist_text)
    offset = 20.0 * math.log10(2.0 / emf) + 10.0 * math.log10(rs / rl)
    lines = [
        f"# source: ngspice-{NGSPICE_VERSION} AC analysis of {stem}.cir; made by "
        "scripts/make_ngspice_refs.py",
        "# f_hz: the frequency ngspice analysed; vout_db, vout_deg: vdb(out) and vp(out) as "
        "printed (15 digits).",
        f"# s21_db = vout_db + 20*log10(2/EMF) + 10*log10(Rs/RL) = vout_db + {offset!r} "
        f"(EMF {emf!r} V, Rs {rs!r} ohm, RL {rl!r} ohm); s21_deg = vout_deg.",
        "f_hz,vout_db,vout_deg,s21_db,s21_deg",
    ]
    for f, vdb, vp in rows:
        lines.append(f"{f!r},{vdb!r},{vp!r},{vdb + offset!r},{vp!r}")
    return "\n".join(lines) + "\n"


def read_csv(text):
    header = [l for l in text.splitlines() if l.startswith("#")]
    data = [l for l in text.splitlines() if l and not l.startswith("#")][1:]
    return header, [tuple(float(x) for x in l.split(",")) for l in data]


def wrap(d):
    return (d + 180.0) % 360.0 - 180.0


def compare(stem, committed, fresh):
    """Worst differences; fails on drift."""
    h1, a = read_csv(committed)
    h2, b = read_csv(fresh)
    if h1 != h2:
        fail(f"{stem}.csv: header lines differ:\n" + "\n".join(h1) + "\nvs\n" + "\n".join(h2))
    if len(a) != len(b):
        fail(f"{stem}.csv: {len(a)} committed rows, {len(b)} from ngspice now")
    worst_f = worst_db = worst_deg = 0.0
    for i, (x, y) in enumerate(zip(a, b)):
        df = abs(x[0] - y[0]) / abs(x[0])
        ddb = max(abs(x[1] - y[1]), abs(x[3] - y[3]))
        ddeg = max(abs(wrap(x[2] - y[2])), abs(wrap(x[4] - y[4])))
        worst_f, worst_db, worst_deg = max(worst_f, df), max(worst_db, ddb), max(worst_deg, ddeg)
        if df > TOL_F_REL or ddb > TOL_DB or ddeg > TOL_DEG:
            fail(f"{stem}.csv row {i}: committed {x}, ngspice now {y}")
    return worst_f, worst_db, worst_deg


def main():
    args = sys.argv[1:]
    if args not in ([], ["--check"]):
        fail("usage: make_ngspice_refs.py [--check]")
    check = args == ["--check"]
    check_version()
    stems = sorted(f[:-4] for f in os.listdir(REFS) if f.endswith(".cir"))
    if not stems:
        fail(f"no netlists in {REFS}")
    with tempfile.TemporaryDirectory() as tmp:
        for stem in stems:
            cir = os.path.join(REFS, stem + ".cir")
            with open(cir, encoding="utf-8") as fh:
                netlist = fh.read()
            text = csv_text(stem, netlist, run_ngspice(cir, tmp))
            out = os.path.join(REFS, stem + ".csv")
            if check:
                if not os.path.exists(out):
                    fail(f"{stem}.csv is missing; run scripts/make_ngspice_refs.py")
                with open(out, encoding="utf-8") as fh:
                    committed = fh.read()
                f, d, p = compare(stem, committed, text)
                print(f"{stem}: no drift (max |df|/f {f:.1e}, |dB| {d:.1e}, |deg| {p:.1e})")
            else:
                with open(out, "w", encoding="utf-8") as fh:
                    fh.write(text)
                print(f"wrote {out} ({text.count(chr(10)) - 4} rows)")


if __name__ == "__main__":
    main()
