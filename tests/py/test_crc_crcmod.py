#!/usr/bin/python3
"""test_crc_crcmod - the check fields of compiled words against python3-crcmod (Debian).

For dictionaries whose W - C is a multiple of 8, the check field of every word that
`ulk compile` + `ulk inspect --json` produce must equal crcmod's catalogue CRC over the
word's first W - C bits taken as octets:
  crc8  -> crcmod.predefined 'crc-8'           (poly 0x07, init 0x00, not reflected, xorout 0):
           CRC-8/SMBUS in the catalogue of parametrised CRC algorithms, check 0xF4;
  crc16 -> crcmod.predefined 'crc-ccitt-false' (poly 0x1021, init 0xFFFF, not reflected,
           xorout 0): CRC-16/IBM-3740, check 0x29B1.
No C code is involved on the reference side.
"""
import json
import os
import subprocess
import sys
import tempfile

import crcmod.predefined

ULK = os.environ["ULK"]

CRC = {
    "crc8": (crcmod.predefined.mkCrcFun("crc-8"), 8),
    "crc16": (crcmod.predefined.mkCrcFun("crc-ccitt-false"), 16),
}

DICT = """\
dictionary: {{name: crc-{check}-{av}, version: "1"}}
link:
  profile: subbit
  bit_rate: 500
  subbits: {{zero: "0011", one: "1100", idle: "0101"}}
  subcarrier: {{frequency: 4000, waveform: square, amplitude: 1}}
  framing: {{preamble: 16, gap: 2, postamble: 2}}
  word:
    vehicle_address: {{bits: {av}, value: {v}}}
    system_address_bits: 4
    opcode_bits: 4
    argument_bits: {D}
    check: {check}
systems:
  - {{name: ALPHA, address: 0x6}}
  - {{name: BETA, address: 0x9}}
commands:
  - mnemonic: LOAD
    system: ALPHA
    opcode: 0x1
    arguments:
      - {{name: a, type: unsigned, bits: 16}}
  - mnemonic: MIX
    system: BETA
    opcode: 0xE
    arguments:
      - {{name: s, type: signed, bits: 7}}
      - {{name: f, type: boolean}}
      - {{name: g, type: unsigned, bits: 8}}
"""

LIST = "".join("LOAD a=%d\nMIX s=%d f=%s g=%d\n" % ((k * 7919) % 65536, (k * 37) % 128 - 64,
                                                    "on" if k % 2 else "off", (k * 151) % 256)
               for k in range(40))


def main():
    # the catalogue check values, to be sure which algorithms crcmod gives us
    # (CRC catalogue check values for "123456789": CRC-8 0xF4, CRC-16/IBM-3740 0x29B1)
    assert CRC["crc8"][0](b"123456789") == 0xF4, "crcmod's crc-8 does not give the catalogue check value 0xF4"
    assert CRC["crc16"][0](b"123456789") == 0x29B1, "crcmod's crc-16 does not give the catalogue check value 0x29B1"
    n = 0
    with tempfile.TemporaryDirectory() as tmp:
        lp = os.path.join(tmp, "l.cmd")
        with open(lp, "w") as f:
            f.write(LIST)
        # W - C: 8 + 4 + 4 + 16 = 32 and 0 + 4 + 4 + 64 = 72 bits
        for check in ("crc8", "crc16"):
            for av, v, D in ((8, 0x5A, 16), (0, 0, 64)):
                dp = os.path.join(tmp, "d-%s-%d.yaml" % (check, av))
                with open(dp, "w") as f:
                    f.write(DICT.format(check=check, av=av, v=v, D=D))
                up = os.path.join(tmp, "u.upl")
                r = subprocess.run([ULK, "compile", "-q", "--dict", dp, lp, "-o", up], capture_output=True, text=True)
                assert r.returncode == 0, r.stderr
                r = subprocess.run([ULK, "inspect", "--json", up], capture_output=True, text=True)
                assert r.returncode == 0, r.stderr
                words = json.loads(r.stdout)["words"]
                fn, c = CRC[check]
                for w in words:
                    bits = w["binary"]
                    body = bits[:-c]
                    assert len(body) % 8 == 0, "%s: %d bits before the check field, not whole octets" % (w["hex"], len(body))
                    data = int(body, 2).to_bytes(len(body) // 8, "big")
                    want = fn(data)
                    got = int(bits[-c:], 2)
                    assert got == want, "%s A_v=%d %s: ulk 0x%X, crcmod 0x%X" % (check, av, w["hex"], got, want)
                    assert int(w["check"]["value"], 16) == want and w["check"]["ok"], \
                        "%s: inspect reports check %s ok=%s, crcmod 0x%X" % (w["hex"], w["check"]["value"], w["check"]["ok"], want)
                    n += 1
    # 2 check kinds x 2 dictionaries x the list's 80 commands (40 LOAD, 40 MIX), one word each
    assert n == 2 * 2 * 80, "compared %d check fields, expected exactly 320" % n
    print("crcmod: %d check fields equal" % n)
    return 0


if __name__ == "__main__":
    sys.exit(main())
