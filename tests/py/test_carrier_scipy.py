#!/usr/bin/python3
"""The composite-carrier planner (`ulk plan --json`) against a computation written here with
numpy and scipy.special (Debian's python3-numpy and python3-scipy), per
docs/spec/carrier.md section 2; and the library's Bessel J0/J1 (printed by
`test_carrier --print-bessel`) against scipy.special.j0/j1.

Cases: the demo carrier file (data from the demo dictionary, voice, ranging), a whole
dictionary with a pilot tone and a carrier section (the data channel then splits into two
Jacobi-Anger factors, data and pilot), and the solver against an exhaustive numpy search of
the same 0.01 rad lattice.
"""
import json
import os
import struct
import subprocess
import sys
import tempfile
import xml.etree.ElementTree as ET

import numpy as np
from scipy import special

TOL_DB = 0.01


def fail(msg):
    print("FAIL: " + msg)
    sys.exit(1)


def db(x):
    return 10 * np.log10(x) if x > 0 else -np.inf


def fractions(kind, m):
    """(f0, f1) of one channel: sinusoidal J0^2, 2 J1^2; binary cos^2, sin^2."""
    if kind == "sine":
        return special.j0(m) ** 2, 2 * special.j1(m) ** 2
    return np.cos(m) ** 2, np.sin(m) ** 2


def reference_plan(mode_idx, data_kind, pilot_share, needs, pt):
    """Fractions and margins the way the page defines them.
    mode_idx: {channel: index}; pilot_share: A_p/(A+A_p) or None; needs: dict."""
    terms = []  # (name, kind, index)
    for ch, m in mode_idx.items():
        if ch == "data":
            if pilot_share is not None:
                terms.append(("data", data_kind, m * (1 - pilot_share)))
                terms.append(("pilot", "sine", m * pilot_share))
            else:
                terms.append(("data", data_kind, m))
        elif ch == "voice":
            terms.append(("voice", "sine", m))
        else:
            terms.append(("ranging", "binary", m))
    f = [fractions(k, m) for _, k, m in terms]
    carrier = float(np.prod([a for a, _ in f]))
    useful = {}
    for i, (name, _, _) in enumerate(terms):
        u = f[i][1]
        for j in range(len(terms)):
            if j != i:
                u *= f[j][0]
        useful[name] = float(u)
    out = {"carrier": carrier, **useful, "intermodulation": 1 - carrier - sum(useful.values())}
    margins = {}
    if pt is not None:
        if "loop" in needs:
            bw, req = needs["loop"]
            margins["carrier_loop"] = pt + db(carrier) - db(bw) - req
        if "data" in mode_idx and "data" in needs:
            rb, req = needs["data"]
            margins["data"] = pt + db(useful["data"]) - db(rb) - req
        for ch in ("voice", "ranging"):
            if ch in mode_idx and ch in needs:
                margins[ch] = pt + db(useful[ch]) - needs[ch]
    return out, margins


def run_plan(ulk, path, *extra):
    r = subprocess.run([ulk, "plan", "--json", path, *extra], capture_output=True, text=True, check=False)
    if r.returncode != 0:
        fail("ulk plan %s exited %d: %s" % (path, r.returncode, r.stderr))
    return json.loads(r.stdout)


def compare(label, got, want):
    for k, v in want.items():
        if k not in got:
            fail("%s: %s missing from ulk's output" % (label, k))
        g = got[k]
        if v <= 0 or g is None:
            if not (g is None or abs(g - v) < 1e-12):
                fail("%s: %s = %r, reference %r" % (label, k, g, v))
            continue
        if abs(db(g) - db(v)) > TOL_DB:
            fail("%s: %s %.5f dB, reference %.5f dB" % (label, k, db(g), db(v)))
    extra = set(got) - set(want)
    if extra:
        fail("%s: unexpected lines %s" % (label, sorted(extra)))


def compare_margins(label, got, want):
    for k, v in want.items():
        g = got.get(k)
        if g is None or abs(g - v) > TOL_DB:
            fail("%s: margin %s = %r dB, reference %.5f dB" % (label, k, g, v))
    if set(got) != set(want):
        fail("%s: margins %s, reference %s" % (label, sorted(got), sorted(want)))


def check_bessel(bindir):
    """x, J0, J1 printed by `test_carrier --print-bessel` (the library's functions) against
    scipy.special.j0/j1: 1e-12 relative, with an absolute floor of 2e-15 near the zeros."""
    prog = os.path.join(bindir, "test_carrier")
    if not os.path.exists(prog):
        fail(prog + " was not built (cmocka missing?)")
    r = subprocess.run([prog, "--print-bessel"], capture_output=True, text=True, check=False)
    if r.returncode != 0:
        fail("test_carrier --print-bessel exited %d" % r.returncode)
    rows = [tuple(float(v) for v in line.split()) for line in r.stdout.splitlines()]
    if len(rows) < 4000:
        fail("test_carrier --print-bessel printed %d rows" % len(rows))
    worst = 0.0
    for x, a0, a1 in rows:
        for a, b in ((a0, float(special.j0(x))), (a1, float(special.j1(x)))):
            err = abs(a - b)
            if err > 1e-12 * abs(b) + 2e-15:
                fail("Bessel at %r: ulk %.17g, scipy %.17g" % (x, a, b))
            worst = max(worst, err)
    print("Bessel J0/J1 vs scipy.special over 0..40 (%d points): worst absolute difference %.3g"
          % (len(rows), worst))


def main():
    ulk = os.environ.get("ULK")
    src = os.environ.get("ULK_SOURCE_DIR")
    bindir = os.environ.get("ULK_BINARY_DIR")
    if not ulk or not src or not bindir:
        fail("ULK, ULK_SOURCE_DIR and ULK_BINARY_DIR must be set (run through ctest)")

    check_bessel(bindir)

    # --- demo carrier file: needs as written in dictionaries/carrier/demo-carrier.yaml ---
    demo = os.path.join(src, "dictionaries", "carrier", "demo-carrier.yaml")
    needs = {"loop": (20.0, 12.0), "data": (1000.0, 9.6), "voice": 45.0, "ranging": 30.0}
    modes = {"acquisition": {"ranging": 1.2}, "command": {"data": 1.1},
             "full": {"data": 0.9, "voice": 0.9, "ranging": 0.4}}
    for pt in (62.0, 48.5):
        doc = run_plan(ulk, demo, "--pt-n0", str(pt))
        if [m["name"] for m in doc["modes"]] != list(modes):
            fail("demo: modes %r" % [m["name"] for m in doc["modes"]])
        for m in doc["modes"]:
            want, wm = reference_plan(modes[m["name"]], "sine", None, needs, pt)
            compare("demo %s" % m["name"], m["fractions"], want)
            compare_margins("demo %s @ %g dB-Hz" % (m["name"], pt), m["margins_db"], wm)
            if abs(m["min_margin_db"] - min(wm.values())) > TOL_DB:
                fail("demo %s: smallest margin" % m["name"])

    # --- solver: exhaustive numpy search over the same lattice (bounds from the demo file) ---
    doc = run_plan(ulk, demo, "--mode", "full", "--solve")
    solved = doc["modes"][0]["solved"]
    pt = 62.0
    a = np.round(np.arange(20, 151) * 0.01, 2)   # data bounds [0.2, 1.5]
    b = np.round(np.arange(20, 151) * 0.01, 2)   # voice [0.2, 1.5]
    r = np.round(np.arange(10, 141) * 0.01, 2)   # ranging [0.1, 1.4]
    A, B, R = np.meshgrid(a, b, r, indexing="ij")
    d0, d1 = special.j0(A) ** 2, 2 * special.j1(A) ** 2
    v0, v1 = special.j0(B) ** 2, 2 * special.j1(B) ** 2
    r0, r1 = np.cos(R) ** 2, np.sin(R) ** 2
    with np.errstate(divide="ignore"):
        margins = np.stack([
            pt + 10 * np.log10(d0 * v0 * r0) - 10 * np.log10(20.0) - 12.0,
            pt + 10 * np.log10(d1 * v0 * r0) - 30.0 - 9.6,
            pt + 10 * np.log10(v1 * d0 * r0) - 45.0,
            pt + 10 * np.log10(r1 * d0 * v0) - 30.0,
        ])
    worst = margins.min(axis=0)
    best = float(worst.max())
    i = np.unravel_index(int(np.argmax(worst)), worst.shape)
    if abs(solved["min_margin_db"] - best) > 1e-6:
        fail("solver: smallest margin %.6f dB, numpy lattice optimum %.6f dB" % (solved["min_margin_db"], best))
    got_idx = (solved["indices_rad"]["data"], solved["indices_rad"]["voice"], solved["indices_rad"]["ranging"])
    want_idx = (float(a[i[0]]), float(b[i[1]]), float(r[i[2]]))
    if any(abs(g - w) > 1e-9 for g, w in zip(got_idx, want_idx)):
        fail("solver: indices %r, numpy %r" % (got_idx, want_idx))
    print("solver: full mode %r rad, smallest margin %.3f dB (numpy lattice agrees)" % (got_idx, best))

    # --- a whole dictionary with a pilot and a carrier section ---
    text = open(os.path.join(src, "dictionaries", "demo-subbit.yaml")).read()
    marker = "    waveform: sine\n    amplitude: 0.9\n"
    if marker not in text:
        fail("demo dictionary layout changed: cannot add a pilot")
    text = text.replace(marker, "    waveform: sine\n    amplitude: 0.75\n  pilot: {frequency: 2500, amplitude: 0.25}\n")
    # The demo's own carrier section (from "carrier:" to "systems:") gives way to this one.
    cs, ce = text.find("\ncarrier:\n"), text.find("\nsystems:")
    if 0 <= cs < ce:
        text = text[:cs + 1] + text[ce + 1:]
    text += ("\ncarrier:\n"
             "  loop: {bandwidth_hz: 30, required_snr_db: 10}\n"
             "  budget: {pt_n0_dbhz: 55}\n"
             "  data: {required_ebn0_db: 10.5}\n"
             "  ranging: {chip_rate: 1000, polynomial: [11, 2, 0], required_pn0_dbhz: 27}\n"
             "  modes:\n"
             "    cmd: {data: 1.3}\n"
             "    both: {data: 1.0, ranging: 0.6}\n")
    with tempfile.TemporaryDirectory(dir=bindir) as tmp:
        path = os.path.join(tmp, "pilot.yaml")
        with open(path, "w") as f:
            f.write(text)
        doc = run_plan(ulk, path)
    needs = {"loop": (30.0, 10.0), "data": (1000.0, 10.5), "ranging": 27.0}
    pmodes = {"cmd": {"data": 1.3}, "both": {"data": 1.0, "ranging": 0.6}}
    for m in doc["modes"]:
        want, wm = reference_plan(pmodes[m["name"]], "sine", 0.25 / (0.75 + 0.25), needs, 55.0)
        compare("pilot %s" % m["name"], m["fractions"], want)
        compare_margins("pilot %s" % m["name"], m["margins_db"], wm)
    print("planner fractions and margins agree with numpy/scipy within %.2f dB" % TOL_DB)

    check_plots(ulk, demo, bindir)


def check_plots(ulk, demo, bindir):
    """--plot writes a PNG (signature and IHDR size) or SVG (well-formed XML) atomically; a
    bad extension writes nothing. Under LeakSanitizer, fontconfig's process-lifetime cache
    (reached through cairo's text) is suppressed by library name, nothing else."""
    with tempfile.TemporaryDirectory(dir=bindir) as tmp:
        supp = os.path.join(tmp, "lsan.supp")
        with open(supp, "w") as f:
            f.write("leak:libfontconfig\n")
        env = dict(os.environ, LSAN_OPTIONS="suppressions=" + supp)
        png, svg, bad = (os.path.join(tmp, n) for n in ("p.png", "p.svg", "p.gif"))
        for out in (png, svg):
            r = subprocess.run([ulk, "plan", demo, "--mode", "full", "--plot", out], env=env,
                               capture_output=True, text=True, check=False)
            if r.returncode != 0:
                fail("plot %s: exit %d: %s" % (out, r.returncode, r.stderr))
        data = open(png, "rb").read()
        if data[:8] != b"\x89PNG\r\n\x1a\n" or data[12:16] != b"IHDR":
            fail("plot: not a PNG")
        w, h = struct.unpack(">II", data[16:24])
        if (w, h) != (1000, 480):  # the picture size of src/carrier_plot.c (room for two legend rows)
            fail("plot: PNG is %dx%d" % (w, h))
        root = ET.parse(svg).getroot()
        if not root.tag.endswith("svg"):
            fail("plot: SVG root is %s" % root.tag)
        r = subprocess.run([ulk, "plan", demo, "--plot", bad], env=env, capture_output=True, text=True, check=False)
        if r.returncode != 2:
            fail("plot with a .gif name: exit %d" % r.returncode)
        left = sorted(n for n in os.listdir(tmp) if n.startswith("p.gif"))
        if left:
            fail("plot with a .gif name left %r behind" % left)
    print("plots: PNG 1000x480 and SVG written; a bad name writes nothing")


if __name__ == "__main__":
    main()
