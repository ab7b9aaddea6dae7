#!/usr/bin/python3
"""BCH(63,56) codeblocks of the C library against an independent encoder written here.

The encoder below is written from the standard's definition, sharing nothing with src/:
  - generator polynomial g(x) = x^7 + x^6 + x^2 + 1 (CCSDS 231.0-B-4 section 3.2, section
    from memory; the same polynomial verified in CCSDS 201.0-B-3 section 3.3.2);
  - systematic code: the 56 information bits i_0 .. i_55 (i_0 sent first) are the
    coefficients of x^62 .. x^7 of the code word; the 7 parity bits are the remainder of
    i(x) x^7 divided by g(x), sent highest power first;
  - the codeblock's last octet holds the COMPLEMENTS of the 7 parity bits followed by one
    filler bit 0 (CCSDS 201.0-B-3 page 3-1, figure 3-1, verified; CCSDS 231.0-B-4 section 3.2, from
    memory).
The division is done the long way over GF(2) on a list of coefficients, one bit at a time.

The library's codeblocks come from `test_ccsds --print-codeblocks` (tests/test_ccsds.c): the
all-zero and all-one information words, each of the 56 single-bit words, then random words;
200 codeblocks in all, and this test asserts that exactly 200 were compared.
"""
import os
import subprocess
import sys

N_EXPECTED = 200  # ULK_PRINT_CODEBLOCKS in tests/test_ccsds.c

# g(x) coefficients, highest power first: x^7 x^6 x^5 x^4 x^3 x^2 x^1 x^0
G = [1, 1, 0, 0, 0, 1, 0, 1]


def fail(msg):
    print("FAIL: " + msg)
    sys.exit(1)


def bits_of(octets):
    return [(o >> (7 - k)) & 1 for o in octets for k in range(8)]


def octets_of(bits):
    return bytes(sum(b << (7 - k) for k, b in enumerate(bits[i:i + 8])) for i in range(0, len(bits), 8))


def remainder(dividend, divisor):
    """Remainder of GF(2) polynomial long division, coefficient lists highest power first."""
    r = list(dividend)
    for i in range(len(r) - len(divisor) + 1):
        if r[i]:
            for j, g in enumerate(divisor):
                r[i + j] ^= g
    return r[-(len(divisor) - 1):]


def encode(info):
    i_bits = bits_of(info)
    if len(i_bits) != 56:
        raise ValueError("a codeblock carries 56 information bits")
    parity = remainder(i_bits + [0] * 7, G)  # i(x) x^7 mod g(x), x^6 first
    return octets_of(i_bits + [1 - p for p in parity] + [0])


def self_check():
    # Every code word (parity uncomplemented, filler dropped) is a multiple of g(x).
    for info in (bytes(7), bytes([0xFF] * 7), bytes(range(1, 8))):
        cb = bits_of(encode(info))
        word = cb[:56] + [1 - b for b in cb[56:63]]
        if any(remainder(word, G)):
            fail("reference encoder: %s does not give a multiple of g(x)" % info.hex())
    # All-zero information: parity 0000000, sent complemented, filler 0 -> last octet FE.
    if encode(bytes(7))[7] != 0xFE:
        fail("reference encoder: all-zero codeblock does not end in FE")
    # g(x) divides x^63 + 1 and no x^n + 1 with 7 < n < 63 (a cyclic code of length 63).
    for n in range(8, 64):
        r = remainder([1] + [0] * (n - 1) + [1], G)
        if (n == 63) != (not any(r)):
            fail("reference g(x): x^%d + 1 %s divisible" % (n, "not" if n == 63 else "is"))


def main():
    self_check()
    bindir = os.environ.get("ULK_BINARY_DIR")
    if not bindir:
        fail("ULK_BINARY_DIR is not set (run through ctest)")
    prog = os.path.join(bindir, "test_ccsds")
    if not os.path.exists(prog):
        fail(prog + " was not built")
    out = subprocess.run([prog, "--print-codeblocks"], capture_output=True, text=True, check=False)
    if out.returncode != 0:
        fail("test_ccsds --print-codeblocks exited with %d: %s" % (out.returncode, out.stderr))
    n = n_nonzero = 0
    for line in out.stdout.splitlines():
        parts = line.split()
        if len(parts) != 3 or parts[0] != "cb":
            fail("unexpected line: " + line[:80])
        info, cb = bytes.fromhex(parts[1]), bytes.fromhex(parts[2])
        want = encode(info)
        if cb != want:
            fail("information %s: library codeblock %s, reference %s" % (info.hex(), cb.hex(), want.hex()))
        n += 1
        n_nonzero += any(info)
    if n != N_EXPECTED:
        fail("compared %d codeblocks, expected exactly %d" % (n, N_EXPECTED))
    if n_nonzero != N_EXPECTED - 1:
        fail("%d non-zero information words, expected %d" % (n_nonzero, N_EXPECTED - 1))
    print("ok: %d codeblocks (%d with non-zero information) agree with the polynomial-division encoder"
          % (n, n_nonzero))


if __name__ == "__main__":
    main()
