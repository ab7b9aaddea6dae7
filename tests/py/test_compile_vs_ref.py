#!/usr/bin/python3
"""test_compile_vs_ref - `ulk compile` + `ulk inspect --json` against the independent
Python reference tests/py/ref_subbit.py (written from the contract alone, sharing no code).

For the demo pair and for dictionaries of our own that cover every check kind, every
argument type (signed, float32, linear and polynomial calibrations, enum, boolean), A_v = 0
and D = 64, every word's hex must be equal, and the whole sub-bit stream rebuilt from the
inspect JSON (idles and word patterns) must equal the reference stream (section 3).
"""
import json
import os
import subprocess
import sys
import tempfile

ULK = os.environ["ULK"]
SRC = os.environ["ULK_SOURCE_DIR"]
sys.path.insert(0, os.path.join(SRC, "tests", "py"))
import ref_subbit as ref  # noqa: E402

LINK = """\
link:
  profile: subbit
  bit_rate: {rate}
  subbits: {{zero: "{z}", one: "{o}", idle: "{i}"}}
  line_code: {lc}
  subcarrier: {{frequency: {fsc}, waveform: sine, amplitude: 0.5}}
  framing: {{preamble: {P}, gap: {G}, postamble: {T}}}
  word:
    vehicle_address: {{bits: {av}, value: {v}}}
    system_address_bits: {asb}
    opcode_bits: {ob}
    argument_bits: {D}
    check: {check}
"""

# Commands shared by the D = 64 dictionaries: every type, 64 bits packed at most.
WIDE_COMMANDS = """\
systems:
  - {name: CORE, address: 0x3}
  - {name: SENS, address: 0x5}
commands:
  - mnemonic: PAIR
    system: CORE
    opcode: 1
    arguments:
      - {name: gain, type: float32}
      - {name: bias, type: signed, bits: 32}
  - mnemonic: FULL
    system: CORE
    opcode: 2
    arguments:
      - {name: value, type: unsigned, bits: 64}
  - mnemonic: TEMP
    system: SENS
    opcode: 3
    arguments:
      - {name: setpoint, type: signed, bits: 12, units: degC, range: [-100, 100], calibration: {scale: 0.0625, offset: 0}}
      - {name: slope, type: unsigned, bits: 10, calibration: {polynomial: [0.5, 0.25, 0.001]}}
      - {name: mode, type: enum, bits: 3, values: {OFF: 0, ECO: 3, BOOST: 5}, default: ECO}
      - {name: armed, type: boolean, default: false}
  - mnemonic: STEP
    system: SENS
    opcode: 4
    critical: true
    arguments:
      - {name: delta, type: signed, bits: 16, units: m, calibration: {scale: -0.5, offset: 100}}
"""

WIDE_LIST = """\
# every type; ties on binary-exact scales; SI prefixes; hex and binary
PAIR gain=1.5 bias=-1
PAIR gain=-0 bias=0x7FFFFFFF
PAIR gain=3.4028235e38 bias=-2147483648
PAIR gain=0.1 bias=0b101
wait 0.25s
FULL value=18446744073709551615
FULL value=0xDEADBEEFCAFEF00D
TEMP setpoint=21.53125degC slope=0.75 mode=BOOST armed=yes
TEMP setpoint=-0.03125 slope=300.5
TEMP setpoint=100 slope=1 armed=on
wait 100ms
wait 0.3s
STEP delta=250mm confirm
STEP delta=-16283.75 confirm
STEP delta=100.25 confirm
wait 1s
"""

DICTS = {
    # name: (link parameters, commands, list)
    "vs-crc8-av0-d64": (dict(rate="62.5", z="0011", o="1100", i="0101", lc="nrz-l", fsc=500, P=16, G=4, T=3,
                             av=0, v=0, asb=4, ob=4, D=64, check="crc8"), WIDE_COMMANDS, WIDE_LIST),
    "vs-crc16-d64": (dict(rate="1000", z="00111", o="11000", i="01010", lc="nrz-l", fsc=10000, P=32, G=8, T=8,
                          av=8, v=0xA7, asb=4, ob=6, D=64, check="crc16"), WIDE_COMMANDS, WIDE_LIST),
    "vs-parity-even": (dict(rate="2000", z="01", o="10", i="00", lc="nrz-m", fsc=8000, P=20, G=2, T=0,
                            av=16, v=0xBEEF, asb=4, ob=5, D=64, check="parity-even"), WIDE_COMMANDS, WIDE_LIST),
    "vs-parity-odd": (dict(rate="250", z="0110", o="1001", i="0011", lc="nrz-l", fsc=1000, P=16, G=1, T=1,
                           av=3, v=5, asb=4, ob=3, D=64, check="parity-odd"), WIDE_COMMANDS, WIDE_LIST),
    "vs-none-av0": (dict(rate="125", z="000111", o="111000", i="010101", lc="nrz-l", fsc=750, P=17, G=3, T=5,
                         av=0, v=0, asb=4, ob=16, D=64, check="none"), WIDE_COMMANDS, WIDE_LIST),
}


def run(args, **kw):
    return subprocess.run(args, capture_output=True, text=True, **kw)


def ulk_words(dict_path, list_path, tmp):
    out = os.path.join(tmp, "x.upl")
    r = run([ULK, "compile", "-q", "--dict", dict_path, list_path, "-o", out])
    assert r.returncode == 0, "ulk compile failed on %s:\n%s" % (dict_path, r.stderr)
    r = run([ULK, "inspect", "--json", out])
    assert r.returncode == 0, r.stderr
    return json.loads(r.stdout)


def stream_from_inspect(j):
    idle = j["link"]["subbits"]["idle"]
    parts = []
    for w in j["words"]:
        parts.append(idle * int(w["idles_before"]))
        parts.append(w["subbits"])
    parts.append(idle * int(j["idles_after"]))
    return "".join(parts)


def compare(dict_path, list_path, tmp):
    mine = ulk_words(dict_path, list_path, tmp)
    r = run(["/usr/bin/python3", os.path.join(SRC, "tests", "py", "ref_subbit.py"), "words", dict_path, list_path])
    assert r.returncode == 0, "reference refused %s:\n%s" % (list_path, r.stderr)
    theirs = json.loads(r.stdout)
    assert len(theirs) == len(mine["words"]), (len(theirs), len(mine["words"]))
    for k, (a, b) in enumerate(zip(mine["words"], theirs)):
        assert a["mnemonic"] == b["mnemonic"], (k, a["mnemonic"], b["mnemonic"])
        assert a["hex"] == b["hex"], "%s word %d (%s, line %d): ulk %s, reference %s" % (
            os.path.basename(dict_path), k + 1, a["mnemonic"], a["line"], a["hex"], b["hex"])
        assert len(a["hex"]) == (mine["link"]["word_bits"] + 3) // 4, "word %d: %d hex digits for %d bits" % (
            k + 1, len(a["hex"]), mine["link"]["word_bits"])
    # the whole stream, section 3
    d = ref.load_dictionary(dict_path)
    with open(list_path) as f:
        items = ref.parse_command_list(d, f.read(), name=list_path)
    st = ref.build_stream(d, items)
    want = "".join(str(int(x)) for x in st.subbits)
    got = stream_from_inspect(mine)
    assert got == want, "%s: sub-bit streams differ (ulk %d, reference %d sub-bits)" % (
        os.path.basename(dict_path), len(got), len(want))
    assert mine["totals"]["subbits"] == len(want), "%s: totals.subbits %d, reference stream %d" % (
        os.path.basename(dict_path), mine["totals"]["subbits"], len(want))
    return len(theirs)


def main():
    n_words = 0
    with tempfile.TemporaryDirectory() as tmp:
        n_words += compare(os.path.join(SRC, "dictionaries", "demo-subbit.yaml"),
                           os.path.join(SRC, "dictionaries", "demo-subbit.cmd"), tmp)
        for name, (link, cmds, lst) in DICTS.items():
            dp = os.path.join(tmp, name + ".yaml")
            lp = os.path.join(tmp, name + ".cmd")
            with open(dp, "w") as f:
                f.write('dictionary: {name: %s, version: "1"}\n' % name)
                f.write(LINK.format(**link))
                f.write(cmds)
            with open(lp, "w") as f:
                f.write(lst)
            n_words += compare(dp, lp, tmp)
            print("%s: words and stream equal to the reference" % name)
    print("compile vs reference: %d words compared, all equal" % n_words)
    return 0


if __name__ == "__main__":
    sys.exit(main())
