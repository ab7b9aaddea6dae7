#!/usr/bin/python3
"""scripts/cross_cases.py - generated dictionaries and command lists, compiled by two ulk
builds (native and aarch64 under qemu-user), compared byte for byte.

    python3 scripts/cross_cases.py --count 1000 --seed 1 --work DIR --a "build/ulk" \
        --b "qemu-aarch64 -L /usr/aarch64-linux-gnu build-aarch64/ulk" [--samples-every 20]

Each case is a sub-bit dictionary (random link, systems, commands; unsigned, signed, boolean,
enum, float32, linear and polynomial calibrations, ranges) and a command list whose values are
chosen to sit where platforms used to disagree: exactly on and next to the midpoint between
two calibrated values (ties), nearly flat polynomials, values equal to written range ends,
float32 midpoints and the largest finite float32, uint64 above 2^63. Expected raws are not
computed here: the point is that both builds decide the same bits, whatever they are, and
that every tie is decided (test_argval and test_compile_vs_ref check the values themselves).

For every case both builds run `ulk compile` (exit code, stdout, stderr and the upload file
must be identical) and `ulk modulate --timing` (the timing table must be identical); every
--samples-every'th case is also modulated to raw float32 samples, which must agree within
1e-6 (and the SigMF metadata byte for byte). Prints the counts; exit 1 on any difference.
Debian's python3 only (no numpy needed: samples are read with the array module).
"""
import argparse
import array
import os
import random
import shlex
import shutil
import subprocess
import sys
from fractions import Fraction as F

SAMPLE_TOL = 1e-6


def dec(q):
    """Exact decimal text of a Fraction whose denominator is 2^a 5^b."""
    q = F(q)
    sign = "-" if q < 0 else ""
    q = abs(q)
    d, a, b = q.denominator, 0, 0
    while d % 2 == 0:
        d //= 2
        a += 1
    while d % 5 == 0:
        d //= 5
        b += 1
    assert d == 1, "not a finite decimal: %r" % q
    k = max(a, b)
    n = q.numerator * 10 ** k // q.denominator
    s = str(n).rjust(k + 1, "0")
    if k:
        s = (s[:-k] + "." + s[-k:]).rstrip("0").rstrip(".")
    return sign + s


def raw_limits(signed, bits):
    return (-(1 << (bits - 1)), (1 << (bits - 1)) - 1) if signed else (0, (1 << bits) - 1)


def poly_val(c, r):
    acc = F(0)
    for ck in reversed(c):
        acc = acc * r + ck
    return acc


SCALES = ["0.1", "0.01", "0.3", "0.25", "1.7", "-0.05", "0.001", "1e-7", "0.123456789", "2.5",
          "-1.1", "0.7", "0.0625", "3.3", "1e-12", "12345.678"]
OFFSETS = ["0", "0.7", "-12.5", "1000.001", "-0.3", "0.1", "273.15", "-40"]


def near(rng, m, step):
    """A value on or next to the point m (a tie or a range end), exact decimal text."""
    kind = rng.randrange(6)
    if kind <= 1:
        return dec(m)                                   # exactly on it
    k = rng.randint(12, 30)
    eps = F(1, 10 ** k)
    if kind == 2:
        return dec(m + eps)
    if kind == 3:
        return dec(m - eps)
    # a digit string that a double cannot hold: m +- step * 10^-k
    return dec(m + (step * eps if kind == 4 else -step * eps))


def gen_linear(rng, name):
    signed = rng.random() < 0.3
    bits = rng.choice([8, 10, 12, 16, 20, 24, 32])
    scale, offset = F(rng.choice(SCALES)), F(rng.choice(OFFSETS))
    st, ot = dec(scale), dec(offset)
    lo, hi = raw_limits(signed, bits)
    f = lambda r: offset + scale * r
    fl, fh = sorted([f(lo), f(hi)])
    arg = "{name: %s, type: %s, bits: %d, calibration: {scale: %s, offset: %s}" % (
        name, "signed" if signed else "unsigned", bits, yaml_num(st), yaml_num(ot))
    rng_lo, rng_hi = fl, fh
    if rng.random() < 0.5:
        # a written range: calibrated values or arbitrary decimals inside
        r1, r2 = sorted([rng.randint(lo, hi), rng.randint(lo, hi)])
        a, b = sorted([f(r1), f(r2)])
        if rng.random() < 0.5 and b - a > abs(scale):
            a += abs(scale) * F(3, 10)
        rng_lo, rng_hi = a, b
        arg += ", range: [%s, %s]" % (yaml_num(dec(a)), yaml_num(dec(b)))
    arg += "}"
    return arg, lambda: value_cal(rng, f, lo, hi, abs(scale), rng_lo, rng_hi, bool(rng_lo != fl or rng_hi != fh))


def yaml_num(t):
    return t


def value_cal(rng, f, lo, hi, step_abs, rlo, rhi, has_range):
    """A value for a calibrated argument, mostly on or near ties."""
    for _ in range(20):
        kind = rng.randrange(10)
        r = rng.randint(lo, hi - 1)
        a, b = f(r), f(r + 1)
        step = abs(b - a)
        if kind < 5:
            v = near(rng, (a + b) / 2, step)           # the midpoint: tie rule
        elif kind < 7:
            v = dec(a + (b - a) * F(rng.randint(-299, 299), 1000))  # ordinary
        elif kind == 7:
            e = rng.choice([lo, hi])
            v = near(rng, f(e), step)                   # the raw ends
        elif kind == 8 and has_range:
            v = dec(rng.choice([rlo, rhi]))            # a written range end, exactly
        else:
            e = rng.choice([lo, hi])
            out = f(e - 1) if e == lo else f(e + 1)
            v = dec((f(e) + out) / 2)                   # exactly half a step beyond an end
        x = F(v)
        if rlo <= x <= rhi or rng.random() < 0.003:   # a few refused ones too
            return v
    return dec(f(lo))


def gen_poly(rng, name):
    bits = rng.choice([8, 12, 16, 24, 32, 48, 64])
    kind = rng.randrange(4)
    if kind == 0:       # nearly flat: steps far below a long double's resolution at c0
        c = [F(1), F(rng.choice(["1e-20", "3e-21", "1e-25"])), F(rng.choice(["0", "1e-40"]))]
    elif kind == 1:     # ordinary quadratic
        c = [F(rng.choice(["0", "-5", "0.5", "12.25"])), F(rng.choice(["0.5", "0.01", "2", "0.0001"])),
             F(rng.choice(["0.25", "0.000001", "1e-9", "0"]))]
    elif kind == 2:     # cubic
        c = [F(rng.choice(["0", "1"])), F(rng.choice(["1", "0.1"])), F(0), F(rng.choice(["1e-12", "0.001"]))]
    else:               # decreasing
        c = [F(rng.choice(["100", "0"])), -F(rng.choice(["0.5", "1e-20", "3"])), -F(rng.choice(["0", "1e-30"]))]
    while len(c) > 2 and c[-1] == 0:
        c.pop()
    lim = F(10) ** 300
    while bits > 8 and abs(poly_val(c, (1 << bits) - 1)) > lim:
        bits //= 2
    lo, hi = 0, (1 << bits) - 1
    f = lambda r: poly_val(c, r)
    arg = "{name: %s, type: unsigned, bits: %d, calibration: {polynomial: [%s]}}" % (
        name, bits, ", ".join(dec(x) for x in c))
    fl, fh = sorted([f(lo), f(hi)])
    return arg, lambda: value_cal(rng, f, lo, hi, None, fl, fh, False)


def f32_val(rng):
    kind = rng.randrange(6)
    if kind == 0:
        return "3.4028235e38"
    if kind == 1:       # the midpoint between two neighbouring binary32 values: ties to even
        e = rng.randint(-149, 104)
        m = rng.randint(1 << 23, (1 << 24) - 2)
        q = F(2 * m + 1, 2) * F(2) ** e
        return near(rng, q, F(2) ** e)
    if kind == 2:
        return "%.9g" % rng.uniform(-1e6, 1e6)
    if kind == 3:       # halfway to infinity: 2^128 - 2^103 is refused, one below is not
        t = F(2) ** 128 - F(2) ** 103
        return dec(t - rng.choice([1, 0]))
    if kind == 4:
        return dec(F(rng.randint(1, 999)) * F(1, 10) ** rng.randint(38, 45))   # subnormal range
    return "0.1"


def gen_case(rng, idx):
    n = rng.choice([2, 4, 8])
    pats = {2: ("01", "10", "00"), 4: ("0011", "1100", "0101"), 8: ("00001111", "11110000", "01010101")}[n]
    rb = F(rng.choice(["62.5", "100", "125", "300", "1000", "7.8125", "1200", "33.3", "2000", "512"]))
    rs = rb * n
    k = rng.randint(1, 6)
    fsc = rs * k
    check = rng.choice(["none", "parity-even", "parity-odd", "crc8", "crc16"])
    vbits = rng.randint(0, 8)
    sbits = rng.randint(1, 4)
    obits = rng.randint(3, 8)
    lines = ["dictionary: {name: cross-%d, version: \"1\"}" % idx,
             "link:", "  profile: subbit", "  bit_rate: %s" % dec(rb),
             "  subbits: {zero: \"%s\", one: \"%s\", idle: \"%s\"}" % pats,
             "  subcarrier: {frequency: %s, waveform: %s, amplitude: %s}" % (
                 dec(fsc), rng.choice(["sine", "square"]), rng.choice(["1", "0.8", "0.5"])),
             "  framing: {preamble: %d, gap: %d, postamble: %d}" % (rng.randint(16, 40), rng.randint(0, 8),
                                                                    rng.randint(0, 4)),
             "  word:",
             "    vehicle_address: {bits: %d, value: %d}" % (vbits, rng.randrange(1 << vbits) if vbits else 0),
             "    system_address_bits: %d" % sbits,
             "    opcode_bits: %d" % obits,
             "    argument_bits: 64",
             "    check: %s" % check,
             "systems:"]
    nsys = rng.randint(1, min(3, 1 << sbits))
    addrs = rng.sample(range(1 << sbits), nsys)
    for i, a in enumerate(addrs):
        lines.append("  - {name: S%d, address: %d}" % (i, a))
    lines.append("commands:")
    cmds = []
    ncmd = rng.randint(2, 6)
    used = set()
    for ci in range(ncmd):
        si = rng.randrange(nsys)
        while True:
            op = rng.randrange(1 << obits)
            if (si, op) not in used:
                used.add((si, op))
                break
        args, width = [], 0
        for ai in range(rng.randint(1, 3)):
            name = "a%d" % ai
            t = rng.randrange(9)
            if t <= 2:
                arg, val = gen_linear(rng, name)
            elif t <= 4:
                arg, val = gen_poly(rng, name)
            elif t == 5:
                if rng.random() < 0.5:
                    arg, val = "{name: %s, type: float32, range: [-3.4e38, 3.4e38]}" % name, \
                        (lambda: rng.choice(["3.4e38", "-3.4e38", "3.39999999999999999999e38"]))
                else:
                    arg, val = "{name: %s, type: float32}" % name, (lambda: f32_val(rng))
            elif t == 6:
                arg = "{name: %s, type: unsigned, bits: 64}" % name
                val = (lambda: rng.choice([str((1 << 64) - 1), str(1 << 63), "0xFFFFFFFFFFFFFFFF",
                                           str(rng.randint(1 << 63, (1 << 64) - 1))]))
            elif t == 7:
                bits = rng.randint(2, 64)
                lo, hi = raw_limits(True, bits)
                a, b = sorted([rng.randint(lo, hi), rng.randint(lo, hi)])
                arg = "{name: %s, type: signed, bits: %d, range: [%d, %d]}" % (name, bits, a, b)
                val = (lambda a=a, b=b: str(rng.choice([a, b, (a + b) // 2])))
            else:
                arg = "{name: %s, type: enum, bits: 3, values: {LOW: 0, MID: 3, HIGH: 7}}" % name
                val = (lambda: rng.choice(["LOW", "MID", "HIGH"]))
            bits = int(arg.split("bits: ")[1].split(",")[0].split("}")[0]) if "bits: " in arg else 32
            if width + bits > 64:
                break
            width += bits
            args.append((name, arg, val))
        if not args:
            args.append(("a0", "{name: a0, type: boolean}", lambda: rng.choice(["true", "off"])))
        lines += ["  - mnemonic: C%d" % ci, "    system: S%d" % si, "    opcode: %d" % op, "    arguments:"]
        lines += ["      - " + a for _, a, _ in args]
        cmds.append(("C%d" % ci, args))
    cmd_lines = ["# cross case %d" % idx]
    for _ in range(rng.randint(3, 12)):
        mn, args = rng.choice(cmds)
        cmd_lines.append(mn + " " + " ".join("%s=%s" % (nm, v()) for nm, _, v in args))
        if rng.random() < 0.2:
            cmd_lines.append("wait %s" % rng.choice(["500ms", "1s", "0.25s", "0.1min", "1.5s"]))
    # the sample rate: at least 2.5 (f_sc + R_s), sometimes not a multiple of R_s, sometimes fractional
    need = F(5, 2) * (fsc + rs)
    fs = F(-(-need.numerator // need.denominator)) + rng.choice([0, 7, 100, 1234])
    if rng.random() < 0.3:
        fs += F(1, 4)
    return "\n".join(lines) + "\n", "\n".join(cmd_lines) + "\n", dec(fs)


def run(cmd, cwd):
    p = subprocess.run(cmd, cwd=cwd, capture_output=True)
    return p.returncode, p.stdout, p.stderr


def read(path):
    try:
        with open(path, "rb") as fh:
            return fh.read()
    except OSError:
        return None


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--count", type=int, default=1000)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--work", required=True)
    ap.add_argument("--a", required=True, help="first ulk command (native)")
    ap.add_argument("--b", required=True, help="second ulk command (e.g. under qemu-user)")
    ap.add_argument("--samples-every", type=int, default=20)
    ap.add_argument("--keep", action="store_true", help="keep the cases that agree too")
    o = ap.parse_args()
    # words that name files (the binaries) are made absolute: the cases run in their folders
    A, B = ([os.path.abspath(w) if os.path.exists(w) else w for w in shlex.split(c)] for c in (o.a, o.b))
    rng = random.Random(o.seed)
    os.makedirs(o.work, exist_ok=True)
    n = {"cases": 0, "compiled": 0, "refused": 0, "upload_same": 0, "timing_same": 0, "sampled": 0,
         "differ": 0, "words": 0}
    worst = 0.0
    for i in range(o.count):
        d = os.path.join(o.work, "case%04d" % i)
        os.makedirs(d, exist_ok=True)
        dict_text, list_text, fs = gen_case(rng, i)
        with open(os.path.join(d, "d.yaml"), "w") as fh:
            fh.write(dict_text)
        with open(os.path.join(d, "l.cmd"), "w") as fh:
            fh.write(list_text)
        n["cases"] += 1
        why = []
        # each build works in its own folder with the same names, so messages can be compared
        da, db = os.path.join(d, "a"), os.path.join(d, "b")
        os.makedirs(da, exist_ok=True)
        os.makedirs(db, exist_ok=True)
        ra = run(A + ["compile", "--dict", "../d.yaml", "../l.cmd", "-o", "out.ulku"], da)
        rb = run(B + ["compile", "--dict", "../d.yaml", "../l.cmd", "-o", "out.ulku"], db)
        if ra != rb:
            why.append("compile: exit/stdout/stderr differ (%d vs %d)" % (ra[0], rb[0]))
        ua, ub = read(os.path.join(da, "out.ulku")), read(os.path.join(db, "out.ulku"))
        if ua != ub:
            why.append("upload files differ")
        if ra[0] == 0 and ua is not None and ua == ub:
            n["compiled"] += 1
            n["upload_same"] += 1
            n["words"] += ua.count(b'"mnemonic"')
            ta = run(A + ["modulate", "out.ulku", "--timing", "t.csv", "--rate", fs, "-q"], da)
            tb = run(B + ["modulate", "out.ulku", "--timing", "t.csv", "--rate", fs, "-q"], db)
            ca, cb = read(os.path.join(da, "t.csv")), read(os.path.join(db, "t.csv"))
            if ta != tb or ca != cb or ca is None:
                why.append("timing tables differ (exit %d vs %d)" % (ta[0], tb[0]))
            else:
                n["timing_same"] += 1
            if o.samples_every and i % o.samples_every == 0:
                sa = run(A + ["modulate", "out.ulku", "-o", "s.f32", "--rate", fs, "-q"], da)
                sb = run(B + ["modulate", "out.ulku", "-o", "s.f32", "--rate", fs, "-q"], db)
                xa, xb = read(os.path.join(da, "s.f32")), read(os.path.join(db, "s.f32"))
                if sa[0] != sb[0] or xa is None or xb is None or len(xa) != len(xb):
                    why.append("samples: exit %d vs %d or lengths differ" % (sa[0], sb[0]))
                else:
                    fa, fb = array.array("f"), array.array("f")
                    fa.frombytes(xa)
                    fb.frombytes(xb)
                    dmax = max((abs(p - q) for p, q in zip(fa, fb)), default=0.0)
                    worst = max(worst, dmax)
                    ma, mb = read(os.path.join(da, "s.sigmf-meta")), read(os.path.join(db, "s.sigmf-meta"))
                    if dmax > SAMPLE_TOL:
                        why.append("samples differ by %.3g (> %g)" % (dmax, SAMPLE_TOL))
                    elif ma is None or ma != mb:
                        why.append("SigMF metadata differ")
                    else:
                        n["sampled"] += 1
        elif ra[0] != 0 and ra == rb:
            n["refused"] += 1
        if why:
            n["differ"] += 1
            print("DIFFER case%04d: %s" % (i, "; ".join(why)))
        elif not o.keep:
            shutil.rmtree(d)
    print("cases %(cases)d: compiled %(compiled)d (%(words)d commands), refused identically %(refused)d, "
          "uploads identical %(upload_same)d, timing tables identical %(timing_same)d, "
          "sample files within 1e-6 %(sampled)d, cases that differ %(differ)d" % n)
    print("largest sample difference: %.3g" % worst)
    return 1 if n["differ"] else 0


if __name__ == "__main__":
    sys.exit(main())
