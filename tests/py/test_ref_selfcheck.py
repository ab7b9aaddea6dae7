#!/usr/bin/python3
"""Checks the Python reference (tests/py/ref_subbit.py) against sources outside it:
the CRC catalogue check values, python3-crcmod, glibc's strtof (via ctypes), a naive
polynomial-division CRC, hand-worked words, and a slow per-sample evaluation of the
waveform formula of docs/spec/subbit.md section 4 in exact arithmetic.

Run: /usr/bin/python3 tests/py/test_ref_selfcheck.py   (exit 0 when everything passed)
"""
import ctypes
import ctypes.util
import json
import math
import os
import random
import subprocess
import sys
import tempfile
from fractions import Fraction

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import ref_subbit as ref  # noqa: E402

SRC = os.environ.get("ULK_SOURCE_DIR") or os.path.normpath(
    os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", ".."))

passed = 0
failed = 0


def check(ok, name, detail=""):
    global passed, failed
    if ok:
        passed += 1
        print("ok   %s" % name)
    else:
        failed += 1
        print("FAIL %s %s" % (name, detail))


def bits_of_bytes(data):
    return [(byte >> (7 - i)) & 1 for byte in data for i in range(8)]


def crc_by_division(bits, width, poly, init):
    """Naive model: remainder of (message with its first `width` bits XORed by init,
    followed by `width` zeros) divided by x^width + poly, over GF(2) with Python ints.
    (Common practice: a non-reflected CRC with init equals this division.)"""
    m = 0
    for b in bits:
        m = (m << 1) | b
    nb = len(bits)
    if nb >= width:
        m ^= init << (nb - width)
    else:
        # fewer message bits than the register: init bits past the message are shifted
        # in as if the register were preloaded; fall back on the shift definition
        m ^= init >> (width - nb)
        rest = init & ((1 << (width - nb)) - 1)
        m = (m << width) ^ (rest << nb)
        return _mod(m, (1 << width) | poly, width)
    return _mod(m << width, (1 << width) | poly, width)


def _mod(m, g, width):
    while m.bit_length() > width:
        m ^= g << (m.bit_length() - width - 1)
    return m


TINY = """
dictionary: {name: tiny, version: "1"}
link:
  profile: subbit
  bit_rate: 62.5
  subbits: {zero: "01", one: "10", idle: "11"}
  line_code: LC
  subcarrier: {frequency: 250, waveform: WF, amplitude: 0.5}
  pilot: {frequency: 62.5, amplitude: 0.25}
  framing: {preamble: 1, gap: 1, postamble: 1}
  word:
    vehicle_address: {bits: 4, value: 0xA}
    system_address_bits: 2
    opcode_bits: 3
    argument_bits: 6
    check: CHK
systems: [{name: S, address: 0b01}]
commands:
  - mnemonic: GO
    system: S
    opcode: 3
    arguments:
      - {name: n, type: unsigned, bits: 4}
      - {name: f, type: boolean}
  - mnemonic: CAL
    system: S
    opcode: 4
    arguments:
      - {name: lin, type: signed, bits: 4, calibration: {scale: 0.5, offset: 0}}
  - mnemonic: DEC
    system: S
    opcode: 5
    arguments:
      - {name: v, type: unsigned, bits: 3, calibration: {scale: -2, offset: 10}}
  - mnemonic: STOP
    system: S
    opcode: 6
    critical: true
    arguments:
      - {name: mode, type: enum, bits: 2, values: {SOFT: 1, HARD: 2}, default: SOFT}
"""


def tiny(line_code="nrz-l", waveform="sine", chk="parity-even"):
    import yaml
    text = TINY.replace("LC", line_code).replace("WF", waveform).replace("CHK", chk)
    tree = yaml.load(text, Loader=ref._yaml_loader())
    errs, _ = ref.validate_tree(tree)
    assert not errs, errs
    return ref.Dictionary(tree, "tiny.yaml")


def words_of(d, text):
    return [w.hex for w in ref.encode_list(d, ref.parse_command_list(d, text, "t.cmd"))]


def refused(d, text, fragment):
    try:
        ref.parse_command_list(d, text, "t.cmd")
    except ref.RefError as e:
        return fragment in str(e), str(e)
    return False, "(accepted)"


def main():
    # ---- CRCs: catalogue check values (published catalogue of parametrised CRC
    # algorithms: CRC-8/SMBUS check 0xF4, CRC-16/IBM-3740 check 0x29B1) ----
    msg = b"123456789"
    c8 = ref.crc_bits(bits_of_bytes(msg), 8, 0x07, 0x00)
    c16 = ref.crc_bits(bits_of_bytes(msg), 16, 0x1021, 0xFFFF)
    check(c8 == 0xF4, "crc8 check value 0xF4 (CRC-8/SMBUS, CRC catalogue)", hex(c8))
    check(c16 == 0x29B1, "crc16 check value 0x29B1 (CRC-16/IBM-3740, CRC catalogue)", hex(c16))

    # ---- CRCs against python3-crcmod on random octet strings ----
    import crcmod
    f8 = crcmod.mkCrcFun(0x107, initCrc=0x00, rev=False, xorOut=0)
    f16 = crcmod.mkCrcFun(0x11021, initCrc=0xFFFF, rev=False, xorOut=0)
    check(f8(msg) == 0xF4 and f16(msg) == 0x29B1, "crcmod agrees with the catalogue values")
    rng = random.Random(20240607)
    bad = 0
    for _ in range(300):
        data = bytes(rng.randrange(256) for _ in range(rng.randrange(0, 17)))
        b = bits_of_bytes(data)
        if ref.crc_bits(b, 8, 0x07, 0) != f8(data) or ref.crc_bits(b, 16, 0x1021, 0xFFFF) != f16(data):
            bad += 1
    check(bad == 0, "crc8/crc16 equal crcmod on 300 random octet strings", "%d differ" % bad)

    # ---- CRCs on bit lengths that are not whole octets: naive polynomial division ----
    bad = 0
    for _ in range(300):
        nb = rng.randrange(17, 120)
        b = [rng.randrange(2) for _ in range(nb)]
        if ref.crc_bits(b, 8, 0x07, 0) != crc_by_division(b, 8, 0x07, 0):
            bad += 1
        if ref.crc_bits(b, 16, 0x1021, 0xFFFF) != crc_by_division(b, 16, 0x1021, 0xFFFF):
            bad += 1
    check(bad == 0, "bitwise CRC equals polynomial division on 300 odd-length messages",
          "%d differ" % bad)
    # Hand-worked: CRC-8 (poly 0x07, init 0) of the single octet 0x01 is x^8 mod
    # (x^8 + x^2 + x + 1) = x^2 + x + 1 = 0x07.
    check(ref.crc_bits(bits_of_bytes(b"\x01"), 8, 0x07, 0) == 0x07, "crc8 of 0x01 is 0x07 (by hand)")

    # ---- Hand-worked word (parity-even) ----
    # vehicle 4 bits 0xA = 1010, system S = 01, opcode GO = 3 = 011,
    # arguments n=9 -> 1001, f=true -> 1, pad to D=6 -> 0  => 100110,
    # ones in 1010 01 011 100110 = 2+1+2+3 = 8, even -> parity bit 0.
    # word 1010 0101 1100 1100 = 0xA5CC (W = 4+2+3+6+1 = 16); parity-odd ends in 1: 0xA5CD.
    d = tiny()
    got = words_of(d, "GO n=9 f=true")
    check(got == ["A5CC"], "hand-worked parity-even word A5CC", got)
    got = words_of(tiny(chk="parity-odd"), "GO n=9 f=yes")
    check(got == ["A5CD"], "hand-worked parity-odd word A5CD", got)
    # crc8 over the 15 bits 101001011100110 (W = 23, 6 hex digits): checked against the
    # polynomial-division model, and the word's first 15 bits must be the same fields.
    w = ref.encode_list(tiny(chk="crc8"), ref.parse_command_list(tiny(chk="crc8"), "GO n=9 f=on"))[0]
    head = [int(c) for c in "101001011100110"]
    check(w.bits[:15] == head and ref.word_hex(w.bits[15:]) == "%02X" % crc_by_division(head, 8, 7, 0)
          and len(w.hex) == 6, "crc8 word fields and check", w.hex)

    # ---- calibration: nearest raw, ties to the smaller raw, half-step refusal ----
    # CAL: signed 4 bits, eng = 0.5 * raw, raw -8..7 -> eng -4 .. 3.5; opcode 4 = 100
    def cal_raw(text):
        return ref.parse_command_list(d, "CAL lin=" + text)[0].values["lin"]
    check(cal_raw("1.5") == 3, "1.5 -> raw 3 (exact)")
    check(cal_raw("0.25") == 0, "tie 0.25 between raw 0 and 1 -> 0 (smaller raw)")
    check(cal_raw("-0.25") == 0xF, "tie -0.25 between raw -1 and 0 -> -1 (two's complement 1111)")
    check(cal_raw("0.3") == 1, "0.3 -> raw 1 (nearest 0.5)")
    check(cal_raw("3.75") == 7, "3.75 is exactly half a step above 3.5 -> accepted, raw 7")
    ok, msg_ = refused(d, "CAL lin=3.76", "half a raw step")
    check(ok, "3.76 is beyond half a step -> refused", msg_)
    check(cal_raw("-4.25") == 8, "-4.25 half a step below -4 -> raw -8 (1000)")
    ok, msg_ = refused(d, "CAL lin=-4.3", "half a raw step")
    check(ok, "-4.3 refused", msg_)
    # DEC: decreasing eng = 10 - 2 raw, raw 0..7 -> 10 .. -4; 7 is a tie between raw 1 (8)
    # and raw 2 (6) -> raw 1; 5 -> tie raw 2 (6) / raw 3 (4) -> raw 2
    def dec_raw(text):
        return ref.parse_command_list(d, "DEC v=" + text)[0].values["v"]
    check(dec_raw("7") == 1 and dec_raw("5") == 2 and dec_raw("6.9") == 2,
          "decreasing calibration: ties to the smaller raw",
          (dec_raw("7"), dec_raw("5"), dec_raw("6.9")))
    check(dec_raw("11") == 0 and dec_raw("-5") == 7, "decreasing: half a step beyond each end accepted")

    # ---- command list syntax ----
    check(words_of(d, "GO n=0x9 f=1  # comment\n\n# only a comment\n") == ["A5CC"], "hex value and comment")
    check(words_of(d, "GO n=0b1001 f=on") == ["A5CC"], "binary value")
    check(words_of(d, "GO n=9e0 f=TRUE") == ["A5CC"], "scientific value, boolean case")
    for text, frag, name in (
            ("GO n=9", "needs argument 'f'", "missing argument"),
            ("GO n=9 f=maybe", "expected a boolean", "bad boolean"),
            ("GO n=16 f=0", "does not fit", "value too wide"),
            ("GO n=9.5 f=0", "not a whole number", "fraction for an integer"),
            ("GO n=9 f=0 g=1", "no argument 'g'", "unknown argument"),
            ("GO n=9 n=8 f=0", "given twice", "argument twice"),
            ("STOP", "needs 'confirm'", "critical without confirm"),
            ("STOP mode=MEDIUM confirm", "no label 'MEDIUM'", "unknown enum label"),
            ("GOO n=1 f=0", "t.cmd:1:1: unknown command", "unknown command, with location"),
            ("GO n=1 f=0\n  wait 3", "t.cmd:2:8", "wait without unit (location of the value)"),
            ("GO n=1 f=0\nwait 3 s 4", "wait DURATION", "wait with extra words"),
            ("GO n=1 f=0\nwait 3h", "wait DURATION", "wait in hours"),
            ("wait 1s", "no command", "list without commands"),
            ("GO n=1V f=0", "has none", "unit on a unitless argument"),
    ):
        ok, m = refused(d, text, frag)
        check(ok, "refuses " + name, m)
    check(words_of(d, "STOP confirm") == words_of(d, "STOP mode=SOFT confirm"), "enum default")

    # units with SI prefixes, on the demo dictionary
    demo = ref.load_dictionary(os.path.join(SRC, "dictionaries", "demo-subbit.yaml"))
    def demo_raw(line, arg):
        return ref.parse_command_list(demo, line)[0].values[arg]
    check(demo_raw("COMM_TUNE offset=-2.5kHz", "offset") == (-2500) & 0xFFFF, "-2.5kHz -> -2500 Hz")
    check(demo_raw("CAM_CAPTURE interval=1500ms", "interval") == 150, "1500ms with scale 0.01 s -> 150")
    check(demo_raw("THERM_SETPOINT zone=BATTERY setpoint=21.5degC", "setpoint") == 123,
          "21.5 degC, offset -40, scale 0.5 -> 123")
    check(demo_raw("THERM_SETPOINT zone=BATTERY", "setpoint") == 120, "default 20 degC -> 120")
    ok, m = refused(demo, "COMM_TUNE offset=-2.5MHz", "is not 'Hz'")
    check(ok, "refuses an unknown prefix", m)
    ok, m = refused(demo, "THERM_SETPOINT zone=BATTERY setpoint=81degC", "outside the range")
    check(ok, "refuses a value outside the range", m)

    # ---- float32: once-rounded to nearest even, against glibc strtof ----
    libc = ctypes.CDLL(ctypes.util.find_library("c"))
    libc.strtof.restype = ctypes.c_float
    libc.strtof.argtypes = [ctypes.c_char_p, ctypes.c_void_p]

    def strtof_bits(s):
        v = libc.strtof(s.encode(), None)
        return None if math.isinf(v) else struct_bits(v)

    def our_bits(s):
        p = ref.parse_number(s)
        try:
            return ref.float32_bits(p[0], p[1])
        except ValueError:
            return None     # refused: strtof overflows to infinity there

    cases = ["0.1", "1", "-0", "-0.0", "3.4028235e38", "1e-45", "7e-46", "1.17549435e-38",
             "0.02", "2.5e-2", "1.000000059604644775390625",       # 1 + 2^-24: tie -> even 1.0
             "1.000000178813934326171875",                          # 1 + 3*2^-24: tie -> up
             "1.00000005960464477539062500000000000000000000000000000000000000000001"]
    bad = [s for s in cases if our_bits(s) != strtof_bits(s)]
    for _ in range(2000):
        s = "%s%d.%de%d" % (rng.choice(["", "-"]), rng.randrange(10 ** rng.randrange(1, 9)),
                            rng.randrange(10 ** 9), rng.randrange(-45, 39))
        if our_bits(s) != strtof_bits(s):
            bad.append(s)
    check(not bad, "float32 rounding equals glibc strtof on %d values" % (len(cases) + 2000), bad[:5])
    check(our_bits("0.1") == 0x3DCCCCCD and our_bits("-0") == 0x80000000
          and our_bits("3.4028235e38") == 0x7F7FFFFF,
          "float32 patterns 0.1, -0, FLT_MAX (IEEE-754 binary32, from memory)")
    # the double-rounding trap: via a double this rounds to 1.0
    check(our_bits("1.00000005960464477539062500000000000000000000000000000000000000000001")
          == 0x3F800001, "just above the 1 + 2^-24 tie rounds up (no double rounding)")
    check(our_bits("3.5e38") is None and our_bits("-3.4028236e38") is None, "3.5e38 and -3.4028236e38 refused")

    # ---- stream: preamble, gap, waits, postamble (section 3) ----
    # R_b = 62.5: wait 0.1s -> ceil(6.25) = 7 idle patterns; two waits 0.02s + 0.02s add
    # up to 0.04s -> ceil(2.5) = 3; gap 1 otherwise.
    items = ref.parse_command_list(d, "wait 100ms\nGO n=1 f=0\nGO n=2 f=0\nwait 0.02s\nwait 20 ms\n"
                                      "GO n=3 f=0\nwait 0.0005min")
    st = ref.build_stream(d, items)
    n, W = 2, 16
    expect = (7 + W + 1 + W + 3 + W + 2) * n          # 0.0005 min = 0.03 s -> ceil(1.875) = 2
    check(len(st.subbits) == expect, "stream length with waits", (len(st.subbits), expect))
    check(list(st.subbits[:14]) == [1] * 14 and st.word[14] == 1 and st.bit[14] == 0,
          "preamble of 7 idles, then word 1 bit 0")
    idle_runs = []
    run = 0
    for wv in st.word:
        if wv == 0:
            run += 1
        elif run:
            idle_runs.append(run)
            run = 0
    idle_runs.append(run)
    check(idle_runs == [14, 2, 6, 4], "idle runs (sub-bits) 7, 1, 3, 2 patterns", idle_runs)

    # ---- levels: nrz-l and nrz-m ----
    dm = tiny(line_code="nrz-m")
    check(list(ref.levels(dm.link, [1, 0, 1, 1, 0])) == [-1, -1, 1, -1, -1], "nrz-m levels (d_-1 = +1)")
    check(list(ref.levels(d.link, [1, 0, 1, 1, 0])) == [1, -1, 1, 1, -1], "nrz-l levels")

    # ---- samples against a slow exact evaluation of section 4 ----
    # R_b = 62.5, n = 2 -> R_s = 125; f_sc = 250; pilot 62.5 Hz; f_s = 1000 puts samples
    # exactly on sub-bit starts (every 8th) and on square edges (every 2nd).
    for wf in ("sine", "square"):
        for lc in ("nrz-l", "nrz-m"):
            dd = tiny(line_code=lc, waveform=wf)
            st = ref.build_stream(dd, ref.parse_command_list(dd, "GO n=5 f=1\nwait 0.05s\nCAL lin=-1"))
            for fs in (Fraction(1000), Fraction(44100), Fraction(2401, 2)):
                s = ref.samples(dd.link, st.subbits, fs)
                Ls = len(st.subbits)
                cnt = math.ceil(Fraction(Ls) * fs / 125)
                lv = slow_levels(lc, st.subbits)
                worst = 0.0
                for i in range(0, cnt, max(1, cnt // 400)):
                    t = Fraction(i) / fs
                    j = math.floor(t * 125)
                    ph = (t * 250) % 1
                    c = math.sin(2 * math.pi * float(ph)) if wf == "sine" else (1.0 if ph < Fraction(1, 2) else -1.0)
                    pp = (t * Fraction(125, 2)) % 1
                    v = 0.5 * lv[j] * c + 0.25 * math.sin(2 * math.pi * float(pp))
                    worst = max(worst, abs(v - s[i]))
                check(len(s) == cnt and worst < 1e-12,
                      "samples %s %s fs=%s equal the slow formula" % (wf, lc, fs), (len(s), cnt, worst))
    # square edges and sub-bit starts at fs = 1000: sample 8 starts sub-bit 1, sample 2 is the
    # second half of the first subcarrier cycle (c = -1)
    dd = tiny(waveform="square")
    st = ref.build_stream(dd, ref.parse_command_list(dd, "GO n=5 f=1"))
    s = ref.samples(dd.link, st.subbits, 1000)
    lv = ref.levels(dd.link, st.subbits)
    pil = [0.25 * math.sin(2 * math.pi * 62.5 * i / 1000) for i in range(12)]
    check(abs(s[2] - (0.5 * lv[0] * -1 + pil[2])) < 1e-12 and abs(s[8] - (0.5 * lv[1] + pil[8])) < 1e-12,
          "exact edges: a sample on a sub-bit start or square edge takes the new one")

    # ---- 16-bit rounding, halves away from zero ----
    got = list(ref.to_s16(np.array([0.5, -0.5, 1.0, -1.0, 0.0, 1.5 / 32767])))
    check(got == [16384, -16384, 32767, -32767, 0, 2], "s16 rounding halves away from zero", got)

    # ---- timing table (section 6) ----
    st = ref.build_stream(d, ref.parse_command_list(d, "GO n=9 f=1"))
    rows = ref.timing_rows(d.link, st, 44100)
    r0 = rows[2]      # first sub-bit of word 1 (after one idle pattern of 2 sub-bits)
    check(rows[0][3:6] == (0, -1, -1) and r0[0] == 2 and r0[1] == Fraction(2, 125)
          and r0[2] == math.ceil(Fraction(2 * 44100, 125)) and r0[3:7] == (1, 0, 1, 1)
          and r0[7:] == (1, 0) and rows[3][6:] == (0, -1, 180),
          "timing rows: idle row, word 1 bit 0 (bit 1 -> pattern 10)", (rows[0], r0, rows[3]))
    i = r0[2]
    check(math.floor(Fraction(i, 44100) * 125) == 2 and math.floor(Fraction(i - 1, 44100) * 125) == 1,
          "first_sample is the first sample inside the sub-bit")

    # ---- dictionary validation (section 1) ----
    import yaml
    base = yaml.load(TINY.replace("LC", "nrz-l").replace("WF", "sine").replace("CHK", "crc8"),
                     Loader=ref._yaml_loader())
    import copy

    def verr(mut, frag, name, warn=False):
        t = copy.deepcopy(base)
        mut(t)
        e, w = ref.validate_tree(t)
        hit = any(frag in x for x in (w if warn else e))
        check(hit, ("warns " if warn else "refuses ") + name, e + w)
    verr(lambda t: t["link"]["subbits"].update(idle="10"), "idle pattern equals", "idle equal to one")
    # Z and O not complements: I = ~Z differs from Z and O but its complement is Z
    verr(lambda t: t["link"]["subbits"].update(zero="0011", one="0110", idle="1100"),
         "complement of the idle pattern", "idle whose complement is Z")
    verr(lambda t: t["link"]["subcarrier"].update(frequency=300), "not a whole number", "f_sc not k R_s")
    verr(lambda t: t["systems"].append({"name": "T", "address": 1}), "already used", "duplicate address")
    verr(lambda t: t["commands"][1].update(opcode=3), "already used", "duplicate opcode")
    verr(lambda t: t["commands"][0]["arguments"].append({"name": "x", "type": "unsigned", "bits": 2}),
         "more than D", "arguments wider than D")
    verr(lambda t: t["commands"][0]["arguments"][0].update(range=[0, 16]), "cannot be represented",
         "range wider than the width")
    verr(lambda t: t["link"]["subbits"].update(zero=1), "quoted string", "unquoted pattern")
    verr(lambda t: t["link"]["pilot"].update(amplitude=0.6), "A + A_p", "A + A_p above 1")
    verr(lambda t: t["link"]["framing"].update(preamble=8), "short", "short preamble", warn=True)
    verr(lambda t: t["link"]["subbits"].update(zero="0011", one="0110", idle="1111"),
         "Hamming distance 2", "Z/O distance below n", warn=True)
    e, w = ref.validate_tree(copy.deepcopy(base))
    check(not e and len(w) == 1 and "short" in w[0], "tiny dictionary: only the short-preamble warning", e + w)
    e, w = ref.validate_tree(ref.load_tree(os.path.join(SRC, "dictionaries", "demo-subbit.yaml")))
    check(not e and not w, "demo dictionary is clean (no errors, no warnings)", e + w)

    # ---- gen_capture: the impaired-capture generator ----
    import gen_capture as gc
    dd = tiny()
    items = ref.parse_command_list(dd, "GO n=5 f=1\nCAL lin=-1")
    st = ref.build_stream(dd, items)
    clean = ref.samples(dd.link, st.subbits, 1000)
    x, tr = gc.make_capture(dd, items, 1000)
    check(len(x) == len(clean) and np.max(np.abs(x - clean)) == 0.0, "capture without impairments = reference samples")
    # sigma by hand (section 5): sine, A = 0.5 -> P_d = 0.125; f_s = 1000, R_b = 62.5,
    # E_b/N_0 = 10 dB = 10 -> sigma^2 = 0.125 * 1000 / (2 * 10 * 62.5) = 0.1
    check(abs(gc.sigma_for_ebn0(dd.link, 1000, 10.0) - math.sqrt(0.1)) < 1e-12, "sigma for 10 dB by hand")
    check(abs(gc.ebn0_db_for_sigma(dd.link, 1000, math.sqrt(0.1)) - 10.0) < 1e-9, "E_b/N_0 of sigma inverts")
    long_items = ref.parse_command_list(dd, "\n".join("GO n=%d f=%d" % (k % 16, k % 2) for k in range(200)))
    lst = ref.build_stream(dd, long_items)
    x, tr = gc.make_capture(dd, long_items, 1000, ebn0_db=10.0, seed=5)
    resid = x - ref.samples(dd.link, lst.subbits, 1000)
    check(abs(np.std(resid) / math.sqrt(0.1) - 1) < 0.02 and abs(np.mean(resid)) < 0.01,
          "noise sigma within 2 %% of the E_b/N_0 definition (%d samples)" % len(x), np.std(resid))
    x2, _ = gc.make_capture(dd, long_items, 1000, ebn0_db=10.0, seed=5)
    x3, _ = gc.make_capture(dd, long_items, 1000, ebn0_db=10.0, seed=6)
    check(np.array_equal(x, x2) and not np.array_equal(x, x3), "seeded: same seed same capture, other seed differs")
    # the data power of the demo waveform is the section 5 P_d (A^2/2 for a sine subcarrier)
    dst = ref.build_stream(demo, ref.parse_command_list(demo, open(os.path.join(SRC, "dictionaries", "demo-subbit.cmd")).read()))
    pd = float(np.mean(ref.samples(demo.link, dst.subbits, 48000) ** 2))
    check(abs(pd / gc.data_power(demo.link) - 1) < 0.005, "demo data power equals A^2/2", pd)
    # delay, scale, invert, DC: i0 = 0.0123 s * 1000 = 12.3 -> first signal sample 13
    x, tr = gc.make_capture(dd, items, 1000, delay_s="0.0123", tail_s="0.01", scale=0.5, invert=True, dc=0.125)
    t_end = Fraction(123, 10) + Fraction(len(st.subbits), 125) * 1000
    check(tr["first_signal_sample"] == 13 and len(x) == math.ceil(t_end + 10)
          and np.all(x[:13] == 0.125) and x[13] != 0.125 and np.all(x[math.ceil(t_end):] == 0.125),
          "delay and tail are signal-free, first signal sample 13", (tr["first_signal_sample"], len(x)))
    ok = True
    for i in range(13, math.ceil(t_end), 7):
        tau = (Fraction(i) - Fraction(123, 10)) / 1000
        j = math.floor(tau * 125)
        c = math.sin(2 * math.pi * float((tau * 250) % 1))
        p_ = 0.25 * math.sin(2 * math.pi * float((tau * Fraction(125, 2)) % 1))
        lv = slow_levels("nrz-l", st.subbits)
        v = -0.5 * (0.5 * lv[j] * c + p_) + 0.125
        ok = ok and abs(v - x[i]) < 1e-12
    check(ok, "fractional delay, scale, polarity flip and DC equal the formula at tau = t - delay")
    # clock error: +1000 ppm, tau_i = i / (f_s * 1.001)
    x, tr = gc.make_capture(dd, items, 1000, ppm=1000)
    ok = len(x) == math.ceil(Fraction(len(st.subbits), 125) * 1001)
    for i in range(0, len(x), 5):
        tau = Fraction(i, 1001)
        j = math.floor(tau * 125)
        if j >= len(st.subbits):
            continue
        v = 0.5 * slow_levels("nrz-l", st.subbits)[j] * math.sin(2 * math.pi * float((tau * 250) % 1)) \
            + 0.25 * math.sin(2 * math.pi * float((tau * Fraction(125, 2)) % 1))
        ok = ok and abs(v - x[i]) < 1e-12
    check(ok, "clock error regenerates the contract at f_s (1 + ppm 1e-6)")
    check(abs(tr["words"][1]["start_s"] - float(Fraction(st.word.tolist().index(2), 125) * Fraction(1001, 1000))) < 1e-12,
          "truth start time of word 2 stretched by 1 + ppm")
    with tempfile.TemporaryDirectory() as tmp:
        wpath = os.path.join(tmp, "c.wav")
        x, _ = gc.make_capture(dd, items, 1000, ebn0_db=20, seed=2)
        clipped = gc.write_capture(wpath, x, 1000)
        import wave
        with wave.open(wpath, "rb") as w:
            ok = (w.getframerate(), w.getsampwidth(), w.getnchannels(), w.getnframes()) == (1000, 2, 1, len(x))
            frames = np.frombuffer(w.readframes(w.getnframes()), dtype="<i2")
        check(ok and np.array_equal(frames, ref.to_s16(np.clip(x, -1, 1))) and clipped == int(np.sum(np.abs(x) > 1)),
              "WAV written by the wave module reads back as the 16-bit samples")
        fpath = os.path.join(tmp, "c.f32")
        gc.write_capture(fpath, x, 1000)
        check(np.array_equal(np.fromfile(fpath, dtype="<f4"), x.astype(np.float32)), "raw f32 capture")

    # ---- CLI on the demo files ----
    with tempfile.TemporaryDirectory() as tmp:
        me = os.path.join(os.path.dirname(os.path.abspath(__file__)), "ref_subbit.py")
        dy = os.path.join(SRC, "dictionaries", "demo-subbit.yaml")
        dj = os.path.join(SRC, "dictionaries", "demo-subbit.json")
        lst = os.path.join(SRC, "dictionaries", "demo-subbit.cmd")
        a = subprocess.run([sys.executable, me, "words", dy, lst], capture_output=True, text=True)
        b = subprocess.run([sys.executable, me, "words", dj, lst], capture_output=True, text=True)
        ws = json.loads(a.stdout) if a.returncode == 0 else []
        check(a.returncode == 0 and a.stdout == b.stdout and len(ws) == 21
              and all(len(x["hex"]) == 17 for x in ws),
              "CLI words: YAML and JSON give the same 21 words of 17 hex digits", a.stderr)
        out = os.path.join(tmp, "demo.s16")
        r = subprocess.run([sys.executable, me, "samples", dy, lst, "--rate", "48000",
                            "--format", "s16", "-o", out], capture_output=True, text=True)
        st = ref.build_stream(demo, ref.parse_command_list(demo, open(lst).read()))
        nexp = math.ceil(Fraction(len(st.subbits) * 48000, 5000))
        size = os.path.getsize(out) if os.path.exists(out) else -1
        check(r.returncode == 0 and size == 2 * nexp, "CLI samples s16 size", (r.stderr, size, 2 * nexp))
        if size > 0:
            x = np.fromfile(out, dtype="<i2").astype(float) / 32767
            # the 10 kHz subcarrier carries the data: most power near 10 kHz +- R_s
            spec = np.abs(np.fft.rfft(x)) ** 2
            fr = np.fft.rfftfreq(len(x), 1 / 48000)
            band = spec[(fr > 5000) & (fr < 15000)].sum() / spec.sum()
            check(band > 0.85, "demo samples: power in 10 kHz +- 5 kHz", band)
        t = subprocess.run([sys.executable, me, "timing", dy, lst, "--rate", "48000"],
                           capture_output=True, text=True)
        lines = t.stdout.splitlines()
        check(t.returncode == 0 and lines[0] == ref.TIMING_HEADER and len(lines) == len(st.subbits) + 1,
              "CLI timing: header and one row per sub-bit")
        bad = os.path.join(tmp, "bad.cmd")
        with open(bad, "w") as f:
            f.write("OBC_NOOP\nPROP_ARM arm=true key=1\n")
        r = subprocess.run([sys.executable, me, "samples", dy, bad, "--rate", "48000", "-o",
                            os.path.join(tmp, "x.f32")], capture_output=True, text=True)
        check(r.returncode == 1 and "bad.cmd:2:1" in r.stderr and not os.path.exists(os.path.join(tmp, "x.f32")),
              "CLI refuses a critical command without confirm, no output file", r.stderr)


def slow_levels(lc, subbits):
    out, d = [], 1
    for b in subbits:
        if lc == "nrz-m":
            d = -d if b else d
        else:
            d = 1 if b else -1
        out.append(d)
    return out


def struct_bits(f):
    import struct
    return struct.unpack("<I", struct.pack("<f", f))[0]


if __name__ == "__main__":
    try:
        main()
    except Exception:
        import traceback
        traceback.print_exc()
        failed += 1
    print("%d passed, %d failed" % (passed, failed))
    sys.exit(1 if failed else 0)
