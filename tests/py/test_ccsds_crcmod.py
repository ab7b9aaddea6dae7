#!/usr/bin/python3
"""FECF of TC Transfer Frames cross-checked with python3-crcmod (Debian's reference CRC
library), and the frame header fields read back independently per CCSDS 232.0-B-4
section 4.1.2 (from memory); FECF per its section 4.1.4 (from memory).

The frames come from the C library: `test_ccsds --print-frames` (the cmocka program of
tests/test_ccsds.c) builds frames and prints them in hex with the parameters it used, and
prints CRC-16 values of random octet strings.
"""
import os
import subprocess
import sys

import crcmod
import crcmod.predefined


def fail(msg):
    print("FAIL: " + msg)
    sys.exit(1)


def main():
    bindir = os.environ.get("ULK_BINARY_DIR")
    if not bindir:
        fail("ULK_BINARY_DIR is not set (run through ctest)")
    prog = os.path.join(bindir, "test_ccsds")
    if not os.path.exists(prog):
        fail(prog + " was not built (cmocka missing?)")

    # Two independent ways to get CRC-16/IBM-3740 out of crcmod: its predefined
    # 'crc-ccitt-false' and the explicit parameter block (poly 0x1021 with the x^16 term,
    # init 0xFFFF, not reflected, no final XOR).
    crc_named = crcmod.predefined.mkCrcFun("crc-ccitt-false")
    crc_params = crcmod.mkCrcFun(0x11021, initCrc=0xFFFF, rev=False, xorOut=0x0000)
    # Published CRC catalogue: check value 0x29B1 for "123456789".
    for f in (crc_named, crc_params):
        if f(b"123456789") != 0x29B1:
            fail("crcmod does not give the catalogue check value")

    out = subprocess.run([prog, "--print-frames"], capture_output=True, text=True, check=False)
    if out.returncode != 0:
        fail("test_ccsds --print-frames exited with %d: %s" % (out.returncode, out.stderr))
    n_frames = n_crcs = 0
    for line in out.stdout.splitlines():
        parts = line.split()
        if parts[0] == "frame":
            fields = dict(p.split("=") for p in parts[1:-1])
            frame = bytes.fromhex(parts[-1])
            body, fecf = frame[:-2], int.from_bytes(frame[-2:], "big")
            want = crc_params(body)
            if want != fecf or crc_named(body) != fecf:
                fail("FECF %04x, crcmod %04x: %s" % (fecf, want, line[:80]))
            # CCSDS 232.0-B-4 section 4.1.2 (from memory) header: version 2, bypass 1, control command 1, spare 2,
            # SCID 10, VCID 6, frame length 10, N(S) 8 bits.
            h = int.from_bytes(frame[:5], "big")
            got = {
                "version": h >> 38, "bypass": h >> 37 & 1, "ctrl": h >> 36 & 1,
                "spare": h >> 34 & 3, "scid": h >> 24 & 0x3FF, "vcid": h >> 18 & 0x3F,
                "length": h >> 8 & 0x3FF, "ns": h & 0xFF,
            }
            expect = {
                "version": 0, "bypass": int(fields["bypass"]), "ctrl": 0, "spare": 0,
                "scid": int(fields["scid"]), "vcid": int(fields["vcid"]),
                "length": len(frame) - 1, "ns": int(fields["ns"]),
            }
            if got != expect:
                fail("header %r, expected %r" % (got, expect))
            if fields["seg"] == "1":
                seg = frame[5]
                if seg >> 6 != 3 or seg & 0x3F != int(fields["map"]):
                    fail("segment header %02x, map %s" % (seg, fields["map"]))
            if len(frame) > 1024:
                fail("frame of %d octets" % len(frame))
            n_frames += 1
        elif parts[0] == "crc":
            data = bytes.fromhex(parts[2]) if len(parts) > 2 else b""
            if int(parts[1], 16) != crc_params(data):
                fail("crc %s, crcmod %04x over %d octets" % (parts[1], crc_params(data), len(data)))
            n_crcs += 1
        else:
            fail("unexpected line: " + line[:80])
    # print_frames in tests/test_ccsds.c prints exactly 40 frames and 40 CRC values
    if n_frames != 40 or n_crcs != 40:
        fail("compared %d frames and %d CRCs, expected exactly 40 of each" % (n_frames, n_crcs))
    print("ok: %d frames and %d CRC values agree with python3-crcmod" % (n_frames, n_crcs))


if __name__ == "__main__":
    main()
