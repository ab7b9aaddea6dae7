#!/usr/bin/python3
"""ref_subbit - an independent Python reference of the sub-bit word contract.

Written from docs/spec/subbit.md and docs/spec/dictionary.md and docs/spec/command-list.md alone; it shares no code
with the C library, so the C tool's words, timing tables and samples can be compared
against it (differential tests). Exact arithmetic is used wherever the contract asks for
it: rates, calibrations, the values an operator writes and the float32 rounding are
fractions.Fraction; sub-bit index, square-wave half and tone phases are integers.

Module use (from a test in tests/py/):

    import ref_subbit as ref
    d = ref.load_dictionary("dictionaries/demo-subbit.yaml")   # -> Dictionary
    cmds = ref.parse_command_list(d, text, name="list.cmd")     # -> [Command | Wait]
    words = ref.encode_list(d, cmds)                            # -> [Word] (bits, hex)
    st = ref.build_stream(d, cmds)                              # -> Stream (sub-bits)
    x = ref.samples(d.link, st.subbits, fs)                     # -> numpy float64 s_i
    csv = ref.timing_csv(d.link, st, fs)                        # -> str, section 6

Functions raise RefError with "file:line:col: message" (or the tree path) on bad input.
Interpretations where the contract is silent (documented again at each place):
  * an uncalibrated integer argument takes whole values only (250ms for a count in s is
    refused, 2.5kHz for a value in Hz is 2500);
  * enum arguments take labels only; hex/binary literals are engineering values like
    decimals (for float32 too: 0x10 is 16.0, not a bit pattern);
  * beyond the ends of the raw range the half-step rule measures the step to the value
    the calibration formula gives at the raw just outside the range;
  * consecutive waits add their times, then ceil(t * R_b) is taken once;
  * `confirm` on a non-critical command is accepted;
  * a float32 value is refused when it rounds beyond the largest finite binary32 (where
    strtof overflows), so 3.4028235e38 is accepted as FLT_MAX;
  * a wait's unit may follow its number directly or after a space ("wait 3 s").

CLI:
    ref_subbit.py words DICT LIST                      JSON [{"mnemonic", "hex", ...}]
    ref_subbit.py timing DICT LIST --rate FS           CSV of section 6 on stdout
    ref_subbit.py samples DICT LIST --rate FS --format f32|s16 -o OUT
    ref_subbit.py validate DICT                        section 1 errors and warnings
"""
import argparse
import json
import math
import os
import re
import struct
import sys
from fractions import Fraction

import numpy as np

__all__ = [
    "RefError", "load_tree", "load_dictionary", "validate_tree", "Dictionary", "Link",
    "parse_command_list", "encode_value", "encode_command", "encode_list", "crc_bits",
    "check_bits", "float32_bits", "build_stream", "levels", "samples", "to_s16",
    "timing_rows", "timing_csv", "word_hex",
]


class RefError(Exception):
    """Bad input: the message names the place (file:line:col or tree path)."""


# --------------------------------------------------------------------------------------
# Loading: YAML 1.2 core-schema rules (section 7), floats kept as exact decimals.

def _yaml_loader():
    import yaml

    class CoreLoader(yaml.SafeLoader):
        pass

    CoreLoader.yaml_implicit_resolvers = {}
    CoreLoader.add_implicit_resolver(
        "tag:yaml.org,2002:bool", re.compile(r"^(?:true|True|TRUE|false|False|FALSE)$"),
        list("tTfF"))
    CoreLoader.add_implicit_resolver(
        "tag:yaml.org,2002:null", re.compile(r"^(?:~|null|Null|NULL|)$"), ["~", "n", "N", ""])
    CoreLoader.add_implicit_resolver(
        "tag:yaml.org,2002:int",
        re.compile(r"^(?:[-+]?[0-9]+|0o[0-7]+|[-+]?0x[0-9a-fA-F]+|[-+]?0b[01]+)$"),
        list("-+0123456789"))
    CoreLoader.add_implicit_resolver(
        "tag:yaml.org,2002:float",
        re.compile(r"^(?:[-+]?(?:\.[0-9]+|[0-9]+(?:\.[0-9]*)?)(?:[eE][-+]?[0-9]+)?"
                   r"|[-+]?\.(?:inf|Inf|INF)|\.(?:nan|NaN|NAN))$"),
        list("-+0123456789."))

    def core_int(loader, node):
        s = loader.construct_scalar(node)
        neg = s.startswith("-")
        t = s.lstrip("+-")
        base = {"0x": 16, "0b": 2, "0o": 8}.get(t[:2].lower(), 10)
        v = int(t[2:] if base != 10 else t, base)
        return -v if neg else v

    def core_float(loader, node):
        s = loader.construct_scalar(node)
        try:
            return Fraction(s)
        except ValueError:
            return float(s.replace(".", "", 1) if "inf" in s.lower() else "nan")

    CoreLoader.add_constructor("tag:yaml.org,2002:int", core_int)
    CoreLoader.add_constructor("tag:yaml.org,2002:float", core_float)
    return CoreLoader


def load_tree(path):
    """Reads a dictionary file into a plain tree (dicts, lists, str, int, bool, Fraction).

    JSON when the name ends in .json, else YAML (core schema). Raises RefError."""
    try:
        with open(path, encoding="utf-8") as f:
            text = f.read()
    except OSError as e:
        raise RefError("%s: cannot read: %s" % (path, e.strerror))
    if path.endswith(".json"):
        try:
            return json.loads(text, parse_float=Fraction)
        except ValueError as e:
            raise RefError("%s: %s" % (path, e))
    import yaml
    try:
        return yaml.load(text, Loader=_yaml_loader())
    except yaml.YAMLError as e:
        raise RefError("%s: %s" % (path, str(e).replace("\n", " ")))


# --------------------------------------------------------------------------------------
# Dictionary model

def _int(v, path):
    if isinstance(v, bool):
        raise RefError("%s: expected an integer, found a boolean" % path)
    if isinstance(v, int):
        return v
    if isinstance(v, Fraction) and v.denominator == 1:
        return int(v)
    if isinstance(v, str):
        m = re.fullmatch(r"([-+]?)0([xXbB])([0-9a-fA-F]+)", v)
        if m:
            try:
                n = int(m.group(3), 16 if m.group(2) in "xX" else 2)
            except ValueError:
                n = None
            if n is not None:
                return -n if m.group(1) == "-" else n
    raise RefError("%s: expected an integer, found %r" % (path, v))


def _num(v, path):
    """Exact number (Fraction) from a tree value."""
    if isinstance(v, bool):
        raise RefError("%s: expected a number, found a boolean" % path)
    if isinstance(v, (int, Fraction)):
        return Fraction(v)
    if isinstance(v, float):
        if not math.isfinite(v):
            raise RefError("%s: expected a finite number, found %r" % (path, v))
        return Fraction(repr(v))   # a tree built in Python: the shortest decimal of the double
    if isinstance(v, str):
        return Fraction(_int(v, path))
    raise RefError("%s: expected a number, found %r" % (path, v))


def _get(tree, key, path, default=KeyError):
    if not isinstance(tree, dict):
        raise RefError("%s: expected a mapping" % path)
    if key not in tree:
        if default is KeyError:
            raise RefError("%s: missing key '%s'" % (path, key))
        return default
    return tree[key]


def _pattern(v, path):
    if not isinstance(v, str):
        raise RefError("%s: a sub-bit pattern must be a quoted string of 0 and 1 "
                       "(hint: write \"0011\", not 0011), found %r" % (path, v))
    if not re.fullmatch(r"[01]+", v):
        raise RefError("%s: a sub-bit pattern holds only 0 and 1, found %r" % (path, v))
    return tuple(int(c) for c in v)


class Link:
    """Section 1 parameters. Rates are Fractions; A and A_p floats (from exact text)."""

    def __init__(self, t, path="link"):
        prof = _get(t, "profile", path)
        if prof != "subbit":
            raise RefError("%s.profile: the reference handles 'subbit' only, found %r" % (path, prof))
        self.bit_rate = _num(_get(t, "bit_rate", path), path + ".bit_rate")        # R_b
        sb = _get(t, "subbits", path)
        self.zero = _pattern(_get(sb, "zero", path + ".subbits"), path + ".subbits.zero")
        self.one = _pattern(_get(sb, "one", path + ".subbits"), path + ".subbits.one")
        self.idle = _pattern(_get(sb, "idle", path + ".subbits"), path + ".subbits.idle")
        self.n = len(self.zero)
        self.line_code = _get(t, "line_code", path, "nrz-l")
        sc = _get(t, "subcarrier", path)
        self.fsc = _num(_get(sc, "frequency", path + ".subcarrier"), path + ".subcarrier.frequency")
        self.waveform = _get(sc, "waveform", path + ".subcarrier", "sine")
        self.amplitude_exact = _num(_get(sc, "amplitude", path + ".subcarrier", 1),
                                    path + ".subcarrier.amplitude")
        self.amplitude = float(self.amplitude_exact)
        pl = _get(t, "pilot", path, None)
        self.has_pilot = pl is not None
        if self.has_pilot:
            self.fp = _num(_get(pl, "frequency", path + ".pilot"), path + ".pilot.frequency")
            self.pilot_amplitude_exact = _num(_get(pl, "amplitude", path + ".pilot"),
                                              path + ".pilot.amplitude")
        else:
            self.fp = Fraction(0)
            self.pilot_amplitude_exact = Fraction(0)
        self.pilot_amplitude = float(self.pilot_amplitude_exact)
        fr = _get(t, "framing", path)
        self.preamble = _int(_get(fr, "preamble", path + ".framing"), path + ".framing.preamble")
        self.gap = _int(_get(fr, "gap", path + ".framing"), path + ".framing.gap")
        self.postamble = _int(_get(fr, "postamble", path + ".framing"), path + ".framing.postamble")
        w = _get(t, "word", path)
        va = _get(w, "vehicle_address", path + ".word")
        self.vehicle_bits = _int(_get(va, "bits", path + ".word.vehicle_address"), path + ".word.vehicle_address.bits")
        self.vehicle_value = _int(_get(va, "value", path + ".word.vehicle_address"), path + ".word.vehicle_address.value")
        self.system_bits = _int(_get(w, "system_address_bits", path + ".word"), path + ".word.system_address_bits")
        self.opcode_bits = _int(_get(w, "opcode_bits", path + ".word"), path + ".word.opcode_bits")
        self.argument_bits = _int(_get(w, "argument_bits", path + ".word"), path + ".word.argument_bits")
        self.check = _get(w, "check", path + ".word")
        self.check_bits = {"none": 0, "parity-even": 1, "parity-odd": 1, "crc8": 8,
                           "crc16": 16}.get(self.check)
        if self.check_bits is None:
            raise RefError("%s.word.check: expected none, parity-even, parity-odd, crc8 or "
                           "crc16, found %r" % (path, self.check))
        self.word_bits = (self.vehicle_bits + self.system_bits + self.opcode_bits +
                          self.argument_bits + self.check_bits)                    # W

    @property
    def subbit_rate(self):
        """R_s = n * R_b (Fraction)."""
        return self.n * self.bit_rate


class Argument:
    def __init__(self, t, path):
        self.path = path
        self.name = _get(t, "name", path)
        self.type = _get(t, "type", path)
        if self.type not in ("unsigned", "signed", "boolean", "enum", "float32"):
            raise RefError("%s.type: expected unsigned, signed, boolean, enum or float32, "
                           "found %r" % (path, self.type))
        dflt_bits = {"boolean": 1, "float32": 32}.get(self.type, KeyError)
        self.bits = _int(_get(t, "bits", path, dflt_bits), path + ".bits")
        rg = _get(t, "range", path, None)
        self.range = None if rg is None else (_num(rg[0], path + ".range[0]"),
                                              _num(rg[1], path + ".range[1]"))
        self.units = _get(t, "units", path, None)
        cal = _get(t, "calibration", path, None)
        self.poly = None          # calibration as polynomial coefficients (Fractions)
        if cal is not None:
            if "polynomial" in cal:
                self.poly = [_num(c, "%s.calibration.polynomial[%d]" % (path, k))
                             for k, c in enumerate(cal["polynomial"])]
            else:
                self.poly = [_num(cal.get("offset", 0), path + ".calibration.offset"),
                             _num(_get(cal, "scale", path + ".calibration"), path + ".calibration.scale")]
        self.values = {}
        if self.type == "enum":
            for lab, code in _get(t, "values", path).items():
                self.values[str(lab)] = _int(code, "%s.values.%s" % (path, lab))
        self.default = _get(t, "default", path, None)

    def raw_limits(self):
        """(lo, hi) of the raw integer for unsigned/signed."""
        if self.type == "signed":
            return -(1 << (self.bits - 1)), (1 << (self.bits - 1)) - 1
        return 0, (1 << self.bits) - 1

    def cal(self, raw):
        """f(raw) exactly."""
        return sum(c * Fraction(raw) ** k for k, c in enumerate(self.poly))


class CommandDef:
    def __init__(self, t, path):
        self.path = path
        self.mnemonic = _get(t, "mnemonic", path)
        self.system = _get(t, "system", path)
        self.opcode = _int(_get(t, "opcode", path), path + ".opcode")
        self.critical = _get(t, "critical", path, False) is True
        self.description = _get(t, "description", path, "")
        self.arguments = [Argument(a, "%s.arguments[%d]" % (path, k))
                          for k, a in enumerate(_get(t, "arguments", path, []) or [])]


class Dictionary:
    """A loaded dictionary: .link (Link), .systems {name: address}, .commands {mnemonic: CommandDef}."""

    def __init__(self, tree, file="<dict>"):
        self.file = file
        self.tree = tree
        d = _get(tree, "dictionary", file)
        self.name = _get(d, "name", "dictionary")
        self.version = _get(d, "version", "dictionary")
        self.link = Link(_get(tree, "link", file))
        self.systems = {}
        for k, s in enumerate(_get(tree, "systems", file)):
            self.systems[_get(s, "name", "systems[%d]" % k)] = _int(
                _get(s, "address", "systems[%d]" % k), "systems[%d].address" % k)
        self.commands = {}
        for k, c in enumerate(_get(tree, "commands", file)):
            cd = CommandDef(c, "commands[%d]" % k)
            self.commands[cd.mnemonic] = cd


def load_dictionary(path, check=True):
    """Loads path into a Dictionary; with check, refuses it (RefError) on any section 1 error."""
    tree = load_tree(path)
    if check:
        errs, _ = validate_tree(tree)
        if errs:
            raise RefError("%s: %s" % (path, errs[0]))
    return Dictionary(tree, path)


def validate_tree(tree):
    """Section 1 (and the dictionary-wide rules listed there). Returns (errors, warnings),
    lists of "path: message" strings. A tree that cannot be modelled gives one error."""
    errs, warns = [], []
    try:
        d = Dictionary(tree)
    except RefError as e:
        return [str(e)], []
    except (TypeError, AttributeError, IndexError) as e:
        return ["malformed tree: %s" % e], []
    L = d.link
    E = errs.append
    if L.bit_rate <= 0:
        E("link.bit_rate: R_b must be > 0")
    if not 1 <= L.n <= 16:
        E("link.subbits.zero: n must be 1..16, found %d" % L.n)
    if len(L.one) != L.n or len(L.idle) != L.n:
        E("link.subbits: zero, one and idle must have the same length")
    else:
        inv = tuple(1 - b for b in L.idle)
        if L.zero == L.one:
            E("link.subbits: zero and one are the same pattern")
        if L.idle in (L.zero, L.one):
            E("link.subbits.idle: the idle pattern equals a data pattern")
        if inv in (L.zero, L.one, L.idle):
            E("link.subbits.idle: the complement of the idle pattern equals I, Z or O "
              "(the 180 degree ambiguity could not be resolved)")
        dist = sum(a != b for a, b in zip(L.zero, L.one))
        if 0 < dist < L.n:
            warns.append("link.subbits: Hamming distance %d between zero and one is below n = %d "
                         "(%.2f dB sensitivity loss)" % (dist, L.n, 10 * math.log10(L.n / dist)))
    for name, v, lo, hi in (("word.vehicle_address.bits", L.vehicle_bits, 0, 16),
                            ("word.system_address_bits", L.system_bits, 0, 16),
                            ("word.opcode_bits", L.opcode_bits, 1, 16),
                            ("word.argument_bits", L.argument_bits, 0, 64)):
        if not lo <= v <= hi:
            E("link.%s: must be %d..%d, found %d" % (name, lo, hi, v))
    if not 0 <= L.vehicle_value < (1 << max(L.vehicle_bits, 0)):
        E("link.word.vehicle_address.value: %d does not fit in %d bits" % (L.vehicle_value, L.vehicle_bits))
    for name, v in (("preamble", L.preamble), ("gap", L.gap), ("postamble", L.postamble)):
        if v < 0:
            E("link.framing.%s: must be >= 0" % name)
    if 0 <= L.preamble < 16:
        warns.append("link.framing.preamble: %d idle patterns is short (< 16)" % L.preamble)
    if L.line_code not in ("nrz-l", "nrz-m"):
        E("link.line_code: expected nrz-l or nrz-m, found %r" % L.line_code)
    if L.waveform not in ("sine", "square"):
        E("link.subcarrier.waveform: expected sine or square, found %r" % L.waveform)
    if not 0 < L.amplitude_exact <= 1:
        E("link.subcarrier.amplitude: A must be in (0, 1]")
    if L.bit_rate > 0 and L.n > 0:
        k = L.fsc / L.subbit_rate
        if k.denominator != 1 or k < 1:
            E("link.subcarrier.frequency: f_sc / R_s = %s is not a whole number >= 1" % k)
        elif L.fsc < 2 * L.subbit_rate:
            warns.append("link.subcarrier.frequency: f_sc below 2 * R_s")
        if L.has_pilot:
            if L.fp <= 0:
                E("link.pilot.frequency: must be > 0")
            else:
                a, b = L.fp / L.subbit_rate, L.subbit_rate / L.fp
                if a.denominator != 1 and b.denominator != 1:
                    E("link.pilot.frequency: neither f_p / R_s nor R_s / f_p is whole")
            if L.pilot_amplitude_exact <= 0 or L.amplitude_exact + L.pilot_amplitude_exact > 1:
                E("link.pilot.amplitude: need A_p > 0 and A + A_p <= 1")
    # systems
    seen_n, seen_a = {}, {}
    for k, s in enumerate(tree.get("systems", [])):
        nm, ad = s.get("name"), _int(s.get("address"), "systems[%d].address" % k)
        if nm in seen_n:
            E("systems[%d].name: duplicate system name %r" % (k, nm))
        if ad in seen_a:
            E("systems[%d].address: address %d already used by %r" % (k, ad, seen_a[ad]))
        if not 0 <= ad < (1 << max(L.system_bits, 0)):
            E("systems[%d].address: %d does not fit in %d bits" % (k, ad, L.system_bits))
        seen_n[nm] = ad
        seen_a.setdefault(ad, nm)
    addrs = list(seen_n.items())
    for i in range(len(addrs)):
        for j in range(i + 1, len(addrs)):
            if bin(addrs[i][1] ^ addrs[j][1]).count("1") == 1:
                warns.append("systems: %s and %s addresses differ in one bit" % (addrs[i][0], addrs[j][0]))
    # commands
    mn, ops = set(), {}
    for k, c in enumerate(tree.get("commands", [])):
        cd = CommandDef(c, "commands[%d]" % k)
        p = cd.path
        if cd.mnemonic in mn:
            E("%s.mnemonic: duplicate mnemonic %r" % (p, cd.mnemonic))
        mn.add(cd.mnemonic)
        if cd.system not in d.systems:
            E("%s.system: unknown system %r" % (p, cd.system))
        if not 0 <= cd.opcode < (1 << max(L.opcode_bits, 0)):
            E("%s.opcode: %d does not fit in %d bits" % (p, cd.opcode, L.opcode_bits))
        key = (cd.system, cd.opcode)
        if key in ops:
            E("%s.opcode: opcode %d already used by %s" % (p, cd.opcode, ops[key]))
        ops.setdefault(key, cd.mnemonic)
        total = 0
        names = set()
        for a in cd.arguments:
            if a.name in names:
                E("%s.name: duplicate argument %r" % (a.path, a.name))
            names.add(a.name)
            total += a.bits
            want = {"boolean": (1, 1), "float32": (32, 32)}.get(a.type, (1, 64))
            if not want[0] <= a.bits <= want[1]:
                E("%s.bits: %s takes %d..%d bits, found %d" % (a.path, a.type, want[0], want[1], a.bits))
                continue
            if a.type == "enum":
                codes = {}
                for lab, code in a.values.items():
                    if code in codes:
                        E("%s.values.%s: code %d already used by %s" % (a.path, lab, code, codes[code]))
                    codes.setdefault(code, lab)
                    if not 0 <= code < (1 << a.bits):
                        E("%s.values.%s: code %d does not fit in %d bits" % (a.path, lab, code, a.bits))
            if a.range is not None and a.type in ("unsigned", "signed"):
                lo, hi = a.raw_limits()
                if a.poly is not None:
                    f_lo, f_hi = a.cal(lo), a.cal(hi)
                    lo, hi = min(f_lo, f_hi), max(f_lo, f_hi)
                if not (lo <= a.range[0] <= a.range[1] <= hi):
                    E("%s.range: [%s, %s] cannot be represented in %d bits (covers [%s, %s])"
                      % (a.path, a.range[0], a.range[1], a.bits, lo, hi))
        if total > L.argument_bits:
            E("%s.arguments: packed arguments take %d bits, more than D = %d"
              % (p, total, L.argument_bits))
    return errs, warns


# --------------------------------------------------------------------------------------
# Command list (docs/spec/command-list.md)

class Command:
    """A command line: .cdef (CommandDef), .values {name: raw int (masked)}, .line."""

    def __init__(self, cdef, values, line):
        self.cdef, self.values, self.line = cdef, values, line


class Wait:
    def __init__(self, seconds, line):
        self.seconds, self.line = seconds, line   # Fraction


_NUM_RE = re.compile(r"([-+]?)(0[xX][0-9a-fA-F]+|0[bB][01]+|"
                     r"(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][-+]?[0-9]+)?)(.*)$", re.S)
_PREFIX = {"k": Fraction(1000), "m": Fraction(1, 1000), "u": Fraction(1, 1000000)}
_BOOL = {"true": 1, "on": 1, "yes": 1, "1": 1, "false": 0, "off": 0, "no": 0, "0": 0}


def parse_number(text):
    """'21.5degC' -> (Fraction 43/2, negative_sign, is_hex_or_binary, 'degC'); None if no number."""
    m = _NUM_RE.match(text)
    if not m:
        return None
    sign, body, rest = m.groups()
    if body[:2] in ("0x", "0X", "0b", "0B"):
        v = Fraction(int(body[2:], 16 if body[1] in "xX" else 2))
        radix = True
    else:
        v = Fraction(body)
        radix = False
    return (-v if sign == "-" else v), sign == "-", radix, rest


def float32_bits(value, negative=False):
    """IEEE-754 binary32 pattern of an exact value rounded once to nearest-even.

    value: Fraction; negative: the sign as written (so '-0' gives 0x80000000).
    Raises ValueError when the value rounds beyond the largest finite binary32."""
    a = abs(Fraction(value))
    sign = 1 if (value < 0 or (value == 0 and negative)) else 0
    if a == 0:
        return sign << 31
    # Refused when it rounds beyond the largest finite binary32 (as strtof overflows): at or
    # above FLT_MAX + half an ulp = 2^128 - 2^103 (the tie goes to the even 2^128). So
    # 3.4028235e38, FLT_MAX as usually printed, is accepted and gives FLT_MAX.
    if a >= Fraction(2) ** 128 - Fraction(2) ** 103:
        raise ValueError("beyond the largest finite binary32")
    e = a.numerator.bit_length() - a.denominator.bit_length()    # 2^e <= a < 2^(e+2)
    if Fraction(2) ** e > a:
        e -= 1
    if Fraction(2) ** (e + 1) <= a:
        e += 1
    q = Fraction(2) ** (max(e, -126) - 23)                        # quantum (subnormal below)
    m = a / q
    fl = m.numerator // m.denominator
    r = m - fl
    if r > Fraction(1, 2) or (r == Fraction(1, 2) and fl % 2 == 1):
        fl += 1
    exact = fl * q                                               # representable
    bits = struct.unpack("<I", struct.pack("<f", float(exact)))[0]
    assert Fraction(struct.unpack("<f", struct.pack("<I", bits))[0]) == exact, \
        "float32 rounding: %s is not representable as bits 0x%08x" % (exact, bits)
    return bits | (sign << 31)


def _nearest_raw(arg, x):
    """Nearest raw (section 2) for calibrated arg and exact engineering x.
    Returns raw or raises ValueError with the reason."""
    lo, hi = arg.raw_limits()
    f = arg.cal
    f_lo, f_hi = f(lo), f(hi)
    inc = f_hi >= f_lo
    g = (lambda r: f(r)) if inc else (lambda r: -f(r))
    y = x if inc else -x
    # largest r with g(r) <= y, by bisection (f monotonic over the raw range)
    if g(lo) > y:
        r, side = lo, -1
        cand = [lo]
    else:
        a, b = lo, hi
        while a < b:
            mid = (a + b + 1) // 2
            if g(mid) <= y:
                a = mid
            else:
                b = mid - 1
        r = a
        if g(r) == y:
            return r
        if r == hi:
            cand, side = [hi], +1
        else:
            cand, side = [r, r + 1], 0
    if side == 0:
        d0, d1 = y - g(cand[0]), g(cand[1]) - y
        return cand[0] if d0 <= d1 else cand[1]     # tie: the smaller raw
    # beyond an end of the raw range: step to the formula's value one raw further out
    r = cand[0]
    step = abs(f(r + side) - f(r))
    if abs(x - f(r)) * 2 > step:
        raise ValueError("value %s is more than half a raw step from the nearest "
                         "calibrated value %s" % (_fmt(x), _fmt(f(r))))
    return r


def _fmt(v):
    v = Fraction(v)
    return str(v.numerator) if v.denominator == 1 else repr(float(v))


def _check_monotonic(arg):
    lo, hi = arg.raw_limits()
    if hi - lo > 65536:
        return   # too wide to enumerate; bisection assumes it
    prev = None
    sgn = 0
    for r in range(lo, hi + 1):
        v = arg.cal(r)
        if prev is not None and v != prev:
            s = 1 if v > prev else -1
            if sgn and s != sgn:
                raise ValueError("calibration is not monotonic over the raw range")
            sgn = s
        prev = v


_mono_checked = set()


def encode_value(arg, text):
    """Raw field (non-negative int, two's complement masked to arg.bits) for a value written
    as in a command list (text, e.g. '21.5degC', 'OPEN', 'on', '0x1F'). Defaults from the
    tree (bool, int, Fraction) are accepted too. Raises ValueError with the reason."""
    if isinstance(text, bool):
        text = "true" if text else "false"
    elif isinstance(text, (int, Fraction)):
        v = Fraction(text)
        text = str(v.numerator) if v.denominator == 1 else _frac_decimal(v)
    text = str(text)
    if arg.type == "boolean":
        b = _BOOL.get(text.lower())
        if b is None:
            raise ValueError("expected a boolean (true/false, on/off, yes/no, 1/0), found '%s'" % text)
        return b
    if arg.type == "enum":
        if text not in arg.values:
            raise ValueError("no label '%s' (labels: %s)" % (text, ", ".join(arg.values)))
        return arg.values[text]
    p = parse_number(text)
    if p is None:
        raise ValueError("expected a number, found '%s'" % text)
    x, neg, radix, unit = p
    if unit:
        if radix:
            raise ValueError("hex and binary integers take no unit ('%s')" % text)
        if arg.units is None:
            raise ValueError("'%s' carries a unit but the argument has none" % text)
        if unit == arg.units:
            pass
        elif unit[0] in _PREFIX and unit[1:] == arg.units:
            x *= _PREFIX[unit[0]]
        else:
            raise ValueError("unit '%s' is not '%s' (optionally with prefix k, m or u)"
                             % (unit, arg.units))
    if arg.range is not None and not arg.range[0] <= x <= arg.range[1]:
        raise ValueError("value %s is outside the range [%s, %s]"
                         % (_fmt(x), _fmt(arg.range[0]), _fmt(arg.range[1])))
    if arg.type == "float32":
        return float32_bits(x, neg)
    lo, hi = arg.raw_limits()
    if arg.poly is not None:
        if id(arg) not in _mono_checked:
            _check_monotonic(arg)
            _mono_checked.add(id(arg))
        raw = _nearest_raw(arg, x)
    else:
        if x.denominator != 1:
            raise ValueError("value %s is not a whole number" % _fmt(x))
        raw = int(x)
        if not lo <= raw <= hi:
            raise ValueError("value %d does not fit in %d %s bits" % (raw, arg.bits, arg.type))
    return raw & ((1 << arg.bits) - 1)


def _frac_decimal(v):
    """Exact decimal text of a Fraction whose denominator has only factors 2 and 5."""
    s = "-" if v < 0 else ""
    v = abs(v)
    ip = v.numerator // v.denominator
    rem = v - ip
    digits = ""
    for _ in range(60):
        if rem == 0:
            break
        rem *= 10
        dgt = rem.numerator // rem.denominator
        digits += str(dgt)
        rem -= dgt
    return s + str(ip) + ("." + digits if digits else "")


def parse_command_list(d, text, name="<list>"):
    """Parses a command list against Dictionary d. Returns [Command | Wait].
    Raises RefError('name:line:col: reason') on the first error; an empty list is refused."""
    out = []
    for ln, raw_line in enumerate(text.splitlines(), 1):
        line = raw_line.split("#", 1)[0]
        toks = [(m.group(0), m.start() + 1) for m in re.finditer(r"\S+", line)]
        if not toks:
            continue
        where = lambda col: "%s:%d:%d" % (name, ln, col)
        head, col0 = toks[0]
        if head == "wait":
            # "wait 2.5s"; a space before the unit ("wait 2.5 s") is accepted too
            arg = "".join(t for t, _ in toks[1:3]) if 2 <= len(toks) <= 3 else ""
            m = re.fullmatch(r"((?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][-+]?[0-9]+)?)(s|ms|min)", arg)
            if not m:
                raise RefError("%s: expected 'wait DURATION' with s, ms or min, e.g. 'wait 2.5s'"
                               % where(toks[1][1] if len(toks) > 1 else col0))
            t = Fraction(m.group(1)) * {"s": 1, "ms": Fraction(1, 1000), "min": 60}[m.group(2)]
            out.append(Wait(t, ln))
            continue
        cdef = d.commands.get(head)
        if cdef is None:
            raise RefError("%s: unknown command '%s'" % (where(col0), head))
        given, confirm = {}, False
        for tok, col in toks[1:]:
            if tok == "confirm":
                confirm = True
                continue
            if "=" not in tok:
                raise RefError("%s: expected name=value, found '%s'" % (where(col), tok))
            k, v = tok.split("=", 1)
            if k in given:
                raise RefError("%s: argument '%s' given twice" % (where(col), k))
            if not v:
                raise RefError("%s: argument '%s' has no value" % (where(col), k))
            given[k] = (v, col + len(k) + 1)
        if cdef.critical and not confirm:
            raise RefError("%s: %s is critical and needs 'confirm'" % (where(col0), head))
        known = {a.name for a in cdef.arguments}
        for k, (v, col) in given.items():
            if k not in known:
                raise RefError("%s: %s has no argument '%s'" % (where(col - len(k) - 1), head, k))
        values = {}
        for a in cdef.arguments:
            if a.name in given:
                v, col = given[a.name]
            elif a.default is not None:
                v, col = a.default, col0
            else:
                raise RefError("%s: %s needs argument '%s'" % (where(col0), head, a.name))
            try:
                values[a.name] = encode_value(a, v)
            except ValueError as e:
                raise RefError("%s: %s: %s" % (where(col), a.name, e))
        out.append(Command(cdef, values, ln))
    if not any(isinstance(c, Command) for c in out):
        raise RefError("%s: the command list holds no command" % name)
    return out


# --------------------------------------------------------------------------------------
# Words (section 2)

def crc_bits(bits, width, poly, init):
    """Non-reflected CRC, no final XOR, bit by bit MSB first (section 2)."""
    mask = (1 << width) - 1
    reg = init
    for b in bits:
        top = (reg >> (width - 1)) & 1
        reg = (reg << 1) & mask
        if top ^ b:
            reg ^= poly
    return reg


def check_bits(kind, bits):
    """Check field value over bits (list of 0/1) for kind (none/parity-even/-odd/crc8/crc16)."""
    if kind == "none":
        return 0
    if kind == "parity-even":
        return sum(bits) & 1
    if kind == "parity-odd":
        return 1 - (sum(bits) & 1)
    if kind == "crc8":
        return crc_bits(bits, 8, 0x07, 0x00)
    if kind == "crc16":
        return crc_bits(bits, 16, 0x1021, 0xFFFF)
    raise ValueError(kind)


def _put(bits, value, n):
    bits.extend((value >> (n - 1 - i)) & 1 for i in range(n))


def word_hex(bits):
    """W-bit word right-aligned in ceil(W/4) uppercase hex digits."""
    v = 0
    for b in bits:
        v = (v << 1) | b
    return "%0*X" % ((len(bits) + 3) // 4, v) if bits else ""


class Word:
    """.mnemonic, .bits (list of 0/1, first sent first), .hex, .line, .values {name: raw}."""

    def __init__(self, mnemonic, bits, line, values):
        self.mnemonic, self.bits, self.line, self.values = mnemonic, bits, line, values
        self.hex = word_hex(bits)


def encode_command(d, cmd):
    """Word for one Command of Dictionary d."""
    L = d.link
    bits = []
    _put(bits, L.vehicle_value, L.vehicle_bits)
    _put(bits, d.systems[cmd.cdef.system], L.system_bits)
    _put(bits, cmd.cdef.opcode, L.opcode_bits)
    used = 0
    for a in cmd.cdef.arguments:
        _put(bits, cmd.values[a.name], a.bits)
        used += a.bits
    _put(bits, 0, L.argument_bits - used)
    _put(bits, check_bits(L.check, bits), L.check_bits)
    assert len(bits) == L.word_bits, "%s: word of %d bits, the link has %d" % (cmd.cdef.mnemonic, len(bits), L.word_bits)
    return Word(cmd.cdef.mnemonic, bits, cmd.line, dict(cmd.values))


def encode_list(d, items):
    """Words of every Command in items (waits skipped)."""
    return [encode_command(d, c) for c in items if isinstance(c, Command)]


# --------------------------------------------------------------------------------------
# Sub-bit stream (section 3)

class Stream:
    """.subbits (numpy uint8), and per sub-bit .word (1-based, 0 idle), .bit (-1 idle),
    .bit_value (-1 idle); .words the Word list."""


def build_stream(d, items):
    L = d.link
    n = L.n
    words = []
    idle_before = []          # idle patterns before each word, then the postamble
    pending = Fraction(0)
    for it in items:
        if isinstance(it, Wait):
            pending += it.seconds
            continue
        base = L.preamble if not words else L.gap
        idle_before.append(max(base, _ceil(pending * L.bit_rate)) if pending else base)
        pending = Fraction(0)
        words.append(encode_command(d, it))
    if not words:
        raise RefError("the command list holds no command")
    tail = max(L.postamble, _ceil(pending * L.bit_rate)) if pending else L.postamble
    sb, wn, bn, bv = [], [], [], []

    def idle(k):
        for _ in range(k):
            sb.extend(L.idle)
            wn.extend([0] * n)
            bn.extend([-1] * n)
            bv.extend([-1] * n)

    for k, w in enumerate(words):
        idle(idle_before[k])
        for i, b in enumerate(w.bits):
            sb.extend(L.one if b else L.zero)
            wn.extend([k + 1] * n)
            bn.extend([i] * n)
            bv.extend([b] * n)
    idle(tail)
    s = Stream()
    s.subbits = np.array(sb, dtype=np.uint8)
    s.word, s.bit, s.bit_value = np.array(wn), np.array(bn), np.array(bv)
    s.words = words
    return s


def _ceil(fr):
    fr = Fraction(fr)
    return -((-fr.numerator) // fr.denominator)


# --------------------------------------------------------------------------------------
# Waveform (section 4)

def levels(link, subbits):
    """Line level d_j (+1/-1, int8) of every sub-bit."""
    sb = np.asarray(subbits, dtype=np.int64)
    if link.line_code == "nrz-m":
        # d_j = +1 * (-1)^(number of ones in sub-bits 0..j)
        ones = np.cumsum(sb) & 1
        return (1 - 2 * ones).astype(np.int8)
    return (2 * sb - 1).astype(np.int8)


def _frac_phase(i, ratio, i0=Fraction(0)):
    """((i - i0) * ratio) split exactly: returns (floor, remainder numerator, denominator)
    arrays. i: int64 array; ratio >= 0 and i0 Fractions. Uses int64 when the products fit,
    else Python integers (object arrays)."""
    u, v = i0.numerator, i0.denominator
    p, q = ratio.numerator, ratio.denominator
    imax = int(i[-1]) if len(i) else 0
    lim = 1 << 62
    if ((abs(imax * v) + abs(u)) * p < lim) and q * v < lim:
        num = (i * np.int64(v) - np.int64(u)) * np.int64(p)
        den = q * v
        return num // den, num % den, den
    num = [(int(k) * v - u) * p for k in i]
    den = q * v
    return (np.array([x // den for x in num], dtype=object),
            np.array([x % den for x in num], dtype=object), den)


def n_samples(link, n_subbits, fs):
    """ceil(L * f_s / R_s)."""
    return _ceil(Fraction(n_subbits) * Fraction(fs) / link.subbit_rate)


def samples(link, subbits, fs, count=None, i0=0, gate=False):
    """s_i (float64 numpy array) for i = 0 .. count-1 (default ceil(L f_s / R_s)).

    fs may be any exact positive rate (Fraction, int, or decimal string); sub-bit index,
    square half and tone phases are exact, only sin() and the scaling are floating point.
    Sample i is taken at contract time (i - i0) / fs (i0 an exact sample offset, default 0:
    section 4). Outside the stream [0, L / R_s) the data term is 0; the pilot is kept unless
    gate is true (then the whole signal is 0 there, as when the transmitter is off)."""
    fs = Fraction(fs)
    i0 = Fraction(i0)
    L_sub = len(subbits)
    if count is None:
        count = _ceil(Fraction(L_sub) * fs / link.subbit_rate + i0)
    i = np.arange(count, dtype=np.int64)
    d = levels(link, subbits).astype(np.float64)
    j, _, _ = _frac_phase(i, link.subbit_rate / fs, i0)
    j = np.asarray(j, dtype=np.int64)
    inside = (j >= 0) & (j < L_sub)
    dj = np.zeros(count)
    dj[inside] = d[j[inside]]
    _, rem, q = _frac_phase(i, link.fsc / fs, i0)
    if link.waveform == "square":
        c = np.where(np.asarray(2 * rem < q, dtype=bool), 1.0, -1.0)
    else:
        c = np.sin(2 * np.pi * (np.asarray(rem, dtype=np.float64) / float(q)))
    s = link.amplitude * dj * c
    if link.has_pilot:
        _, rem_p, qp = _frac_phase(i, link.fp / fs, i0)
        pil = link.pilot_amplitude * np.sin(2 * np.pi * (np.asarray(rem_p, dtype=np.float64) / float(qp)))
        s = s + (np.where(inside, pil, 0.0) if gate else pil)
    return s


def to_s16(s):
    """round(32767 * s), halves away from zero, as int16."""
    x = 32767.0 * np.asarray(s, dtype=np.float64)
    r = np.sign(x) * np.floor(np.abs(x) + 0.5)
    return np.clip(r, -32768, 32767).astype("<i2")


def write_raw(path, s, fmt):
    """Writes samples little-endian: fmt 'f32' (float32) or 's16'."""
    data = (np.asarray(s, dtype="<f4") if fmt == "f32" else to_s16(s)).tobytes()
    tmp = path + ".tmp"
    with open(tmp, "wb") as f:
        f.write(data)
    os.replace(tmp, path)


# --------------------------------------------------------------------------------------
# Timing table (section 6)

TIMING_HEADER = "index,start_s,first_sample,word,bit,bit_value,subbit,level,phase_deg"


def timing_rows(link, stream, fs):
    """Rows (tuples) of section 6: index, start_s (Fraction), first_sample, word, bit,
    bit_value, subbit, level, phase_deg."""
    fs = Fraction(fs)
    Rs = link.subbit_rate
    lv = levels(link, stream.subbits)
    rows = []
    for jj in range(len(stream.subbits)):
        rows.append((jj, Fraction(jj) / Rs, _ceil(Fraction(jj) * fs / Rs), int(stream.word[jj]),
                     int(stream.bit[jj]), int(stream.bit_value[jj]), int(stream.subbits[jj]),
                     int(lv[jj]), 0 if lv[jj] > 0 else 180))
    return rows


def timing_csv(link, stream, fs):
    """The table as CSV text; start_s printed as the shortest decimal that reads back as
    the same double."""
    out = [TIMING_HEADER]
    for r in timing_rows(link, stream, fs):
        out.append("%d,%s,%d,%d,%d,%d,%d,%d,%d" % (r[0], repr(float(r[1])), *r[2:]))
    return "\n".join(out) + "\n"


# --------------------------------------------------------------------------------------
# CLI

def _load_both(dict_path, list_path):
    d = load_dictionary(dict_path)
    try:
        with open(list_path, encoding="utf-8") as f:
            text = f.read()
    except OSError as e:
        raise RefError("%s: cannot read: %s" % (list_path, e.strerror))
    return d, parse_command_list(d, text, list_path)


def main(argv=None):
    ap = argparse.ArgumentParser(prog="ref_subbit.py",
                                 description="Independent reference of the sub-bit word contract.")
    sub = ap.add_subparsers(dest="cmd", required=True)
    p = sub.add_parser("words", help="JSON list of words")
    p.add_argument("dict")
    p.add_argument("list")
    p = sub.add_parser("timing", help="timing table CSV")
    p.add_argument("dict")
    p.add_argument("list")
    p.add_argument("--rate", required=True)
    p = sub.add_parser("samples", help="raw little-endian samples")
    p.add_argument("dict")
    p.add_argument("list")
    p.add_argument("--rate", required=True)
    p.add_argument("--format", choices=["f32", "s16"], default=None)
    p.add_argument("-o", required=True)
    p = sub.add_parser("validate", help="section 1 errors and warnings")
    p.add_argument("dict")
    a = ap.parse_args(argv)
    try:
        if a.cmd == "validate":
            errs, warns = validate_tree(load_tree(a.dict))
            for w in warns:
                print("%s: warning: %s" % (a.dict, w))
            for e in errs:
                print("%s: error: %s" % (a.dict, e))
            return 1 if errs else 0
        d, items = _load_both(a.dict, a.list)
        if a.cmd == "words":
            ws = encode_list(d, items)
            print(json.dumps([{"mnemonic": w.mnemonic, "hex": w.hex, "line": w.line,
                               "raw": w.values} for w in ws], indent=1))
            return 0
        try:
            fs = Fraction(a.rate)
        except ValueError:
            fs = Fraction(0)
        if fs <= 0:
            raise RefError("--rate: expected a positive decimal rate, found %r" % a.rate)
        st = build_stream(d, items)
        if a.cmd == "timing":
            sys.stdout.write(timing_csv(d.link, st, fs))
            return 0
        fmt = a.format or ("s16" if a.o.endswith(".s16") else "f32")
        write_raw(a.o, samples(d.link, st.subbits, fs), fmt)
        return 0
    except RefError as e:
        print("ref_subbit: %s" % e, file=sys.stderr)
        return 1


if __name__ == "__main__":
    sys.exit(main())
