#!/usr/bin/python3
"""tests/golden/gen_dicts.py OUTDIR [N] - writes N (default 20) seeded random dictionaries
(gNN.yaml) with a command list each (gNN.cmd) and a line of modulation parameters
(gNN.params: "RATE PPM DELAY_S EBN0_DB") for the golden-output test (make_golden.sh).

Same seed, same files: only random.Random(seed) with integer arguments is used (its
sequence is fixed across Python 3 releases for randrange/choice/shuffle), and every number
is written from integers or decimal.Decimal, never from a binary float.

Both profiles, every argument type, linear and polynomial calibrations, every check kind,
both line codes and waveforms, a pilot now and then. Values written in the lists sit at
least 0.2 of a raw step away from a rounding boundary (a tie between two raws is half a
step): the golden outputs must not depend on how the compiler breaks ties, since the
calibration arithmetic may change.
"""
import random
import sys
from decimal import Decimal

SEED = 20261203

# Pattern sets (n, zero, one, idle) that the validator accepts (checked by ulk validate in
# make_golden.sh: a refused dictionary stops the run).
PATTERNS = [
    (5, "00111", "11000", "01010"),
    (3, "011", "100", "010"),
    (4, "0011", "1100", "0101"),
    (6, "000111", "111000", "010101"),
    (7, "1110010", "0001101", "1010101"),
    (2, "01", "10", "00"),
]
CHECKS = ["none", "parity-even", "parity-odd", "crc8", "crc16"]
SCALES = ["0.5", "0.25", "0.1", "0.01", "2", "0.005", "0.125"]
OFFSETS = ["0", "-10", "12.5", "100"]
RATES_HZ = [48000, 96000, 192000]


def pick_rate(top_hz, extra_hz=0):
    """Smallest of RATES_HZ at least 2.5 x (top line) (the modulator's rule)."""
    for fs in RATES_HZ:
        if 2 * fs >= 5 * top_hz and 2 * fs >= 5 * extra_hz:
            return fs
    return None


def name(rng, prefix, used):
    while True:
        s = prefix + "".join(rng.choice("ABCDEFGHJKLMNPRSTUVWXYZ") for _ in range(rng.randrange(2, 5)))
        if s not in used:
            used.add(s)
            return s


def dec_str(d):
    s = format(d.normalize(), "f")
    return s if s not in ("-0",) else "0"


def make_arg(rng, bits_left, used, ccsds):
    """One argument (YAML lines, value writer) of at most bits_left bits, or None."""
    kinds = ["unsigned", "signed", "boolean", "enum", "lin", "poly", "float32"]
    kind = rng.choice(kinds)
    aname = name(rng, "a", used).lower()
    if kind == "boolean":
        if bits_left < 1:
            return None
        return 1, [f"      - {{name: {aname}, type: boolean}}"], \
            lambda r: f"{aname}={r.choice(['true', 'false', 'on', 'off', 'yes', 'no'])}"
    if kind == "float32":
        if bits_left < 32:
            return None
        # dyadic values: exact in float32, no rounding at all
        return 32, [f"      - {{name: {aname}, type: float32, units: m}}"], \
            lambda r: f"{aname}={dec_str(Decimal(r.randrange(-4000, 4000)) / Decimal(64))}"
    if kind == "enum":
        b = rng.randrange(2, 5)
        if bits_left < b:
            return None
        nl = rng.randrange(2, min(6, 1 << b) + 1)
        codes = rng.sample(range(1 << b), nl)
        labels = [name(rng, "L", used) for _ in range(nl)]
        vals = ", ".join(f"{lb}: {c}" for lb, c in zip(labels, codes))
        return b, [f"      - {{name: {aname}, type: enum, bits: {b}, values: {{{vals}}}}}"], \
            lambda r: f"{aname}={r.choice(labels)}"
    b = rng.randrange(4, 17)
    if bits_left < b:
        return None
    if kind == "unsigned":
        def wr(r):
            v = r.randrange(0, 1 << b)
            return f"{aname}={hex(v) if r.randrange(2) else v}"
        return b, [f"      - {{name: {aname}, type: unsigned, bits: {b}}}"], wr
    if kind == "signed":
        return b, [f"      - {{name: {aname}, type: signed, bits: {b}}}"], \
            lambda r: f"{aname}={r.randrange(-(1 << (b - 1)), 1 << (b - 1))}"
    signed = rng.randrange(2) == 0 and kind == "lin"
    if kind == "lin":
        scale, off = Decimal(rng.choice(SCALES)), Decimal(rng.choice(OFFSETS))
        typ = "signed" if signed else "unsigned"
        lo, hi = (-(1 << (b - 1)), (1 << (b - 1)) - 1) if signed else (0, (1 << b) - 1)

        def wr(r):
            raw = r.randrange(lo, hi)  # hi excluded: raw + 0.2 stays inside the field
            frac = Decimal(r.choice([2, 3, -2, -3])) / 10 if lo < raw else Decimal(r.choice([2, 3])) / 10
            return f"{aname}={dec_str(off + scale * (Decimal(raw) + frac))}"
        return b, [f"      - {{name: {aname}, type: {typ}, bits: {b}, calibration: {{scale: {scale}, offset: {off}}}, units: V}}"], wr
    # polynomial c0 + c1 r + c2 r^2, increasing; steps of at least c1 >= 0.05
    c0 = Decimal(rng.randrange(-500, 500)) / 10
    c1 = Decimal(rng.randrange(5, 200)) / 100
    c2 = Decimal(rng.randrange(0, 40)) / 100000
    ev = lambda r: c0 + c1 * r + c2 * r * r

    def wr(r):
        raw = r.randrange(0, (1 << b) - 1)
        e0, e1 = ev(Decimal(raw)), ev(Decimal(raw + 1))
        v = e0 + (e1 - e0) * Decimal(r.choice([2, 3, 7, 8])) / 10
        return f"{aname}={dec_str(v.quantize(Decimal('0.000001')))}"
    return b, [f"      - {{name: {aname}, type: unsigned, bits: {b}, calibration: {{polynomial: [{c0}, {c1}, {c2}]}}}}"], wr


def gen_one(idx, rng, out):
    ccsds = idx % 4 == 3
    used = set()
    y = [f"# generated golden dictionary {idx} (tests/golden/gen_dicts.py, seed {SEED}); fictional",
         "dictionary:", f"  name: golden-{idx:02d}", f'  version: "0.{idx}.0"', "", "link:"]
    if ccsds:
        rb = rng.choice([500, 1000, 2000, 4000])
        fsc = rng.choice([8000, 16000])
        fs = pick_rate(fsc + rb)
        y += ["  profile: ccsds-tc", f"  bit_rate: {rb}", f"  line_code: {rng.choice(['nrz-l', 'nrz-m'])}",
              f"  subcarrier: {{frequency: {fsc}, waveform: {rng.choice(['sine', 'sine', 'square'])}, amplitude: 0.{rng.randrange(5, 10)}}}",
              "  tc:", f"    spacecraft_id: {rng.randrange(0, 1024)}", f"    virtual_channel: {rng.randrange(0, 64)}"]
        service = rng.choice(["sequence-controlled", "expedited"])
        y.append(f"    service: {service}")
        if service == "sequence-controlled":
            y.append(f"    first_sequence: {rng.randrange(0, 256)}")
        if rng.randrange(2):
            y.append(f"    segment_header: {{map_id: {rng.randrange(0, 64)}}}")
        y += [f"    fecf: {rng.choice(['true', 'false'])}", f"    randomize: {rng.choice(['true', 'false'])}",
              "    acquisition_octets: 16", f"    idle_octets: {rng.randrange(1, 4)}",
              f"    start_errors: {rng.randrange(0, 2)}", f"    correction: {rng.choice(['sec', 'ted'])}"]
        addrs = rng.sample(range(1, 0x7FE), rng.randrange(2, 5))
        arg_bits, op_bits = 64, 8
    else:
        n, z, o, i = PATTERNS[idx % len(PATTERNS)]
        rb = rng.choice([250, 500, 1000, 1000, 2000])
        k = rng.randrange(1, 4)
        rs = n * rb
        fsc = k * rs
        fs = pick_rate(fsc + rs)
        while fs is None:
            rb //= 2
            rs, fsc = n * rb, k * n * rb
            fs = pick_rate(fsc + rs)
        code = "nrz-m" if n == 2 else rng.choice(["nrz-l", "nrz-l", "nrz-m"])
        wave = rng.choice(["sine", "sine", "square"])
        amp = "0.8" if rng.randrange(3) else "0.6"
        y += ["  profile: subbit", f"  bit_rate: {rb}", f'  subbits: {{zero: "{z}", one: "{o}", idle: "{i}"}}',
              f"  line_code: {code}", f"  subcarrier: {{frequency: {fsc}, waveform: {wave}, amplitude: {amp}}}"]
        if amp == "0.6" and wave == "sine":
            # pilot at R_s / 2 or 2 R_s (f_p / R_s or R_s / f_p whole), amplitude A + A_p <= 1
            fp = Decimal(rs) / 2 if rng.randrange(2) else Decimal(rs) * 2
            y.append(f"  pilot: {{frequency: {dec_str(fp)}, amplitude: 0.2}}")
            fs = pick_rate(fsc + rs, int(fp) + 1)
        va = rng.randrange(0, 9)
        sab = rng.randrange(2, 7)
        op_bits = rng.randrange(3, 9)
        arg_bits = rng.choice([16, 24, 32, 40, 48, 64])
        check = CHECKS[idx % len(CHECKS)]
        y += ["  framing: {preamble: 16, gap: %d, postamble: 4}" % rng.randrange(2, 9), "  word:",
              f"    vehicle_address: {{bits: {va}, value: {rng.randrange(0, 1 << va) if va else 0}}}",
              f"    system_address_bits: {sab}", f"    opcode_bits: {op_bits}",
              f"    argument_bits: {arg_bits}", f"    check: {check}"]
        addrs = rng.sample(range(0, 1 << sab), min(rng.randrange(2, 5), 1 << sab))
    y += ["", "systems:"]
    sysnames = []
    for a in addrs:
        sn = name(rng, "S", used)
        sysnames.append(sn)
        y.append(f"  - {{name: {sn}, address: {a}}}")
    y += ["", "commands:"]
    cmds = []
    for c in range(rng.randrange(4, 9)):
        mn = name(rng, "CMD_", used)
        sysn = rng.choice(sysnames)
        ops_used = {oc for (_, s, oc, _, _) in cmds if s == sysn}
        oc = rng.choice([v for v in range(min(1 << op_bits, 256)) if v not in ops_used])
        critical = rng.randrange(6) == 0
        y += [f"  - mnemonic: {mn}", f"    system: {sysn}", f"    opcode: {oc}"]
        if critical:
            y.append("    critical: true")
        left = arg_bits if not ccsds else 96
        args = []
        lines = []
        for _ in range(rng.randrange(0, 4)):
            a = make_arg(rng, left, used, ccsds)
            if a is None:
                continue
            b, al, wr = a
            left -= b
            lines += al
            args.append(wr)
        if lines:
            y.append("    arguments:")
            y += lines
        cmds.append((mn, sysn, oc, critical, args))
    with open(f"{out}/g{idx:02d}.yaml", "w") as f:
        f.write("\n".join(y) + "\n")
    lst = [f"# generated list {idx} for g{idx:02d}.yaml"]
    for j in range(rng.randrange(6, 13)):
        mn, _, _, critical, args = rng.choice(cmds)
        line = " ".join([mn] + [w(rng) for w in args] + (["confirm"] if critical else []))
        lst.append(line)
        if rng.randrange(5) == 0:
            lst.append(f"wait {rng.choice(['100ms', '250ms', '0.5s'])}")
    with open(f"{out}/g{idx:02d}.cmd", "w") as f:
        f.write("\n".join(lst) + "\n")
    ppm = rng.randrange(-150, 151)
    delay = Decimal(rng.randrange(0, 80)) / 1000
    ebn0 = rng.choice([11, 12, 14])
    with open(f"{out}/g{idx:02d}.params", "w") as f:
        f.write(f"{fs} {ppm} {dec_str(delay)} {ebn0}\n")


def main():
    out = sys.argv[1]
    n = int(sys.argv[2]) if len(sys.argv) > 2 else 20
    rng = random.Random(SEED)
    for idx in range(n):
        gen_one(idx, rng, out)


if __name__ == "__main__":
    main()
