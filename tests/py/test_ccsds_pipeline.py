#!/usr/bin/python3
"""The ccsds-tc profile through `ulk compile`, `ulk inspect` and `ulk modulate --timing`,
against an independent construction written here from the standards (it shares no code
with ulk):

  - Space Packet primary header: CCSDS 133.0-B-2 section 4.1.3, from memory (version 000, type 1, secondary header
    flag 0, APID 11 bits, sequence flags 11, count 14 bits, data length = octets - 1).
  - TC Transfer Frame: CCSDS 232.0-B-4 sections 4.1.2 to 4.1.4, from memory (version 00, bypass, control command flag, spare,
    SCID 10 bits, VCID 6 bits, length 10 bits, N(S) 8 bits; segment header 11 + MAP ID;
    FECF CRC-16 computed with python3-crcmod's catalogued 'crc-ccitt-false', i.e.
    CRC-16/IBM-3740, whose published check value for "123456789" is 0x29B1).
  - Pseudo-randomizer: CCSDS 231.0-B-4 section 6 (from memory), h(x) = x^8+x^6+x^4+x^3+x^2+x+1, register all ones,
    first 40 bits FF 39 9E 5A 68 (checked below before use).
  - BCH(63,56): CCSDS 231.0-B-4 section 3 (from memory), g(x) = x^7+x^6+x^2+1, parity bits complemented, filler bit
    0; start sequence EB90, tail C5C5C5C5C5C5C579, fill octets 0x55.
  - The profile's choices: docs/spec/ccsds-tc.md sections 2 and 3 (command data field =
    opcode octet + arguments MSB first padded with zeros; per-APID counts from 0; N(S) =
    first_sequence + k; fill not randomized; acquisition and idle alternating bits starting
    with 0 on every run; waits as max(8 * idle_octets, ceil(t * R))).

The argument raw values are taken from the upload (their conversion from the operator's
values is the shared rule of docs/spec/subbit.md section 2, checked elsewhere); everything
from the raw values on is rebuilt here and compared bit for bit with the upload's frame
and CLTU and with the timing table, for the demo list under every combination of
randomizer, FECF, segment header and service. Then tampered uploads (digest recomputed)
must be refused.

Run: ULK=build/ulk ULK_SOURCE_DIR=. /usr/bin/python3 tests/py/test_ccsds_pipeline.py
"""
import csv
import fractions
import hashlib
import itertools
import json
import os
import re
import subprocess
import sys
import tempfile

import crcmod.predefined

ULK = os.environ.get("ULK")
SRC = os.environ.get("ULK_SOURCE_DIR") or os.path.normpath(
    os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", ".."))
failures = []
checks = 0


def check(cond, what):
    global checks
    checks += 1
    if not cond:
        failures.append(what)
        print("FAIL:", what)


# ---------------------------------------------------------------- the reference

crc16 = crcmod.predefined.mkCrcFun("crc-ccitt-false")


def randomizer_sequence(n):
    """CCSDS 231.0-B-4 section 6 (from memory) TC randomizer: x^8+x^6+x^4+x^3+x^2+x+1, all ones at start; output is
    the register's last stage, the feedback the XOR of the taps of h(x)."""
    reg = [1] * 8  # reg[0] is the stage that is output next
    out = []
    for _ in range(8 * n):
        out.append(reg[0])
        # h(x) as the recurrence a_{k+8} = a_{k+6} + a_{k+4} + a_{k+3} + a_{k+2} + a_{k+1} + a_k
        fb = reg[0] ^ reg[1] ^ reg[2] ^ reg[3] ^ reg[4] ^ reg[6]
        reg = reg[1:] + [fb]
    octets = []
    for i in range(n):
        v = 0
        for b in out[8 * i:8 * i + 8]:
            v = (v << 1) | b
        octets.append(v)
    return bytes(octets)


def bch_codeblock(info):
    """7 information octets -> 8-octet codeblock (CCSDS 231.0-B-4 section 3, from memory)."""
    bits = []
    for o in info:
        bits += [(o >> (7 - k)) & 1 for k in range(8)]
    g = [1, 1, 0, 0, 0, 1, 0, 1]  # x^7 + x^6 + x^2 + 1, highest degree first
    rem = bits + [0] * 7
    for i in range(56):
        if rem[i]:
            for j in range(8):
                rem[i + j] ^= g[j]
    parity = [1 - b for b in rem[56:]]
    allbits = bits + parity + [0]
    return bytes(int("".join(map(str, allbits[8 * k:8 * k + 8])), 2) for k in range(8))


def bits_to_octets(bits):
    bits = bits + [0] * (-len(bits) % 8)
    return bytes(int("".join(map(str, bits[i:i + 8])), 2) for i in range(0, len(bits), 8))


def packet(apid, count, data):
    hdr = (0 << 13) | (1 << 12) | (0 << 11) | apid
    return bytes([hdr >> 8, hdr & 0xFF, 0xC0 | (count >> 8), count & 0xFF,
                  (len(data) - 1) >> 8, (len(data) - 1) & 0xFF]) + data


def frame(tc, ns, pkt):
    seg = tc.get("segment_header")
    n = 5 + (1 if seg else 0) + len(pkt) + (2 if tc["fecf"] else 0)
    bypass = 1 if tc["service"] == "expedited" else 0
    w0 = (0 << 14) | (bypass << 13) | (0 << 12) | (0 << 10) | tc["spacecraft_id"]
    w1 = (tc["virtual_channel"] << 10) | (n - 1)
    f = bytes([w0 >> 8, w0 & 0xFF, w1 >> 8, w1 & 0xFF, ns if not bypass else 0])
    if seg:
        f += bytes([0xC0 | seg["map_id"]])
    f += pkt
    if tc["fecf"]:
        c = crc16(f)
        f += bytes([c >> 8, c & 0xFF])
    return f


def cltu(tc, fr):
    data = bytearray(fr)
    if tc["randomize"]:
        seq = randomizer_sequence(len(data))
        data = bytearray(a ^ b for a, b in zip(data, seq))
    data += b"\x55" * (-len(data) % 7)
    out = b"\xEB\x90"
    for i in range(0, len(data), 7):
        out += bch_codeblock(data[i:i + 7])
    return out + bytes.fromhex("C5C5C5C5C5C5C579")


def octet_bits(b):
    return [(o >> (7 - k)) & 1 for o in b for k in range(8)]


def expected_stream(up, dictionary):
    """(word, bit, bit_value, subbit) rows of the whole channel stream, and per command
    the frame and CLTU rebuilt here."""
    tc = up["link"]["tc"]
    rate = fractions.Fraction(up["link"]["bit_rate"])
    rows = []
    units = []
    seq = {}
    for k, c in enumerate(up["commands"]):
        wait = fractions.Fraction(c["wait_s"])
        base = 8 * (tc["acquisition_octets"] if k == 0 else tc["idle_octets"])
        need = -((-wait * rate).numerator // (wait * rate).denominator)  # ceil
        n_idle = max(base, need)
        rows += [(0, -1, -1, i & 1) for i in range(n_idle)]
        apid = c["system_address"]
        count = seq.get(apid, 0)
        seq[apid] = (count + 1) % 16384
        ns = (tc["first_sequence"] + k) % 256 if tc["service"] == "sequence-controlled" else 0
        arg_bits = []
        for a in c["args"]:
            raw = int(a["raw"], 16)
            arg_bits += [(raw >> (a["bits"] - 1 - i)) & 1 for i in range(a["bits"])]
        data = bytes([c["opcode"]]) + bits_to_octets(arg_bits)
        fr = frame(tc, ns, packet(apid, count, data))
        cl = cltu(tc, fr)
        units.append((count, ns, fr, cl))
        rows += [(k + 1, i, b, b) for i, b in enumerate(octet_bits(cl))]
    n_idle = 8 * tc["idle_octets"]
    wait = fractions.Fraction(up["wait_after_s"])
    need = -((-wait * rate).numerator // (wait * rate).denominator)
    rows += [(0, -1, -1, i & 1) for i in range(max(n_idle, need))]
    return rows, units


# ---------------------------------------------------------------- running ulk

def run(*args):
    p = subprocess.run([ULK] + list(args), capture_output=True, text=True)
    return p.returncode, p.stdout, p.stderr


def redigest(text):
    head = text[:text.rindex('  "digest": "sha256:')]
    return head + '  "digest": "sha256:%s"\n}\n' % hashlib.sha256(head.encode()).hexdigest()


def variant(base, randomize, fecf, seg, service):
    t = base
    t = re.sub(r"randomize: \w+", "randomize: %s" % ("true" if randomize else "false"), t)
    t = re.sub(r"fecf: \w+", "fecf: %s" % ("true" if fecf else "false"), t)
    t = re.sub(r"    segment_header: \{map_id: 3\}\n", "    segment_header: {map_id: 3}\n" if seg else "", t)
    t = re.sub(r"service: [\w-]+", "service: " + service, t)
    if service == "expedited":
        t = re.sub(r"first_sequence: \d+", "first_sequence: 0", t)
    return t


def main():
    if not ULK:
        print("ULK is not set")
        return 1
    # The reference's own anchors, before it is trusted.
    check(randomizer_sequence(5) == bytes.fromhex("FF399E5A68"), "randomizer starts FF 39 9E 5A 68 (CCSDS 231.0-B-4 section 6)")
    check(crc16(b"123456789") == 0x29B1, "CRC-16/IBM-3740 check value 0x29B1")
    check(bch_codeblock(bytes(7)) == bytes(7) + b"\xFE", "all-zero codeblock: parity complemented to ones, filler 0")

    with open(os.path.join(SRC, "dictionaries", "demo-ccsds.yaml"), encoding="utf-8") as f:
        base = f.read()
    # ulk validate: the demo pair is clean, same hash; its summary; a broken one exits 1 with line:col.
    rc, out, err = run("validate", "--json", os.path.join(SRC, "dictionaries", "demo-ccsds.yaml"),
                       os.path.join(SRC, "dictionaries", "demo-ccsds.json"))
    v = json.loads(out) if rc == 0 else {"dictionaries": []}
    sums = [d["summary"] for d in v["dictionaries"]]
    check(rc == 0 and len(sums) == 2 and sums[0]["sha256"] == sums[1]["sha256"] and
          all(d["warnings"] == 0 for d in v["dictionaries"]), "validate the demo pair: exit %d" % rc)
    if sums:
        # frame of the largest command: 5 + 1 + 6 + 1 + ceil(152/8) + 2 = 34 octets; CLTU 2 + 8*5 + 8
        check(sums[0]["profile"] == "ccsds-tc" and sums[0]["max_frame_octets"] == 34 and
              sums[0]["max_cltu_octets"] == 50 and sums[0]["tc"]["spacecraft_id"] == 0x1A7, "validate summary")
    with tempfile.TemporaryDirectory() as tmp:
        bad = os.path.join(tmp, "bad.yaml")
        with open(bad, "w", encoding="utf-8") as f:
            f.write(base.replace("address: 0x056", "address: 0x7FF"))
        rc, out, err = run("validate", bad)
        check(rc == 1 and re.search(r"bad.yaml:\d+:\d+: error: APID 0x7FF is reserved for idle packets", out),
              "validate refuses the idle APID with its position: exit %d %s" % (rc, out[:300]))
    cmd_list = os.path.join(SRC, "dictionaries", "demo-ccsds.cmd")
    with tempfile.TemporaryDirectory() as tmp:
        n_cases = 0
        for randomize, fecf, seg, service in itertools.product(
                (True, False), (True, False), (True, False), ("sequence-controlled", "expedited")):
            name = "r%d-f%d-s%d-%s" % (randomize, fecf, seg, service[:3])
            dpath = os.path.join(tmp, name + ".yaml")
            with open(dpath, "w", encoding="utf-8") as f:
                f.write(variant(base, randomize, fecf, seg, service))
            upath = os.path.join(tmp, name + ".upl")
            rc, out, err = run("compile", "-q", "--dict", dpath, cmd_list, "-o", upath)
            check(rc == 0, "%s: compile exit %d: %s" % (name, rc, err))
            if rc:
                continue
            with open(upath, encoding="utf-8") as f:
                up = json.load(f)
            rows, units = expected_stream(up, None)
            for k, (c, (count, ns, fr, cl)) in enumerate(zip(up["commands"], units)):
                check(c["sequence_count"] == count and c["frame_sequence"] == ns,
                      "%s: command %d counts %s/%s, want %d/%d" % (name, k, c["sequence_count"], c["frame_sequence"], count, ns))
                check(c["frame"] == fr.hex().upper(), "%s: command %d frame %s, want %s" % (name, k, c["frame"], fr.hex().upper()))
                check(c["cltu"] == cl.hex().upper(), "%s: command %d CLTU differs" % (name, k))
            tpath = os.path.join(tmp, name + ".csv")
            rc, out, err = run("modulate", upath, "-o", os.path.join(tmp, name + ".f32"), "--rate", "48000",
                               "--timing", tpath)
            check(rc == 0, "%s: modulate exit %d: %s" % (name, rc, err))
            if rc:
                continue
            with open(tpath, newline="") as f:
                got = [(int(r["word"]), int(r["bit"]), int(r["bit_value"]), int(r["subbit"])) for r in csv.DictReader(f)]
            check(len(got) == len(rows), "%s: timing table has %d rows, want %d" % (name, len(got), len(rows)))
            bad = next((i for i, (a, b) in enumerate(zip(got, rows)) if a != b), None)
            check(bad is None, "%s: timing row %s is %s, want %s" % (name, bad, got[bad] if bad is not None else "",
                                                                      rows[bad] if bad is not None else ""))
            # the samples file has ceil(L * fs / R) samples for L channel bits (section 4 with n = 1)
            n_samp = os.path.getsize(os.path.join(tmp, name + ".f32")) // 4
            want = -(-len(rows) * 48000 // int(up["link"]["bit_rate"]))
            check(n_samp == want, "%s: %d samples, want %d" % (name, n_samp, want))
            # SigMF: one annotation per CLTU over exactly its samples, ceil(j * fs / R) from its first bit
            with open(os.path.join(tmp, name + ".sigmf-meta"), encoding="utf-8") as f:
                meta = json.load(f)
            ann = meta.get("annotations", [])
            rate = fractions.Fraction(up["link"]["bit_rate"])
            starts = [i for i, r in enumerate(rows) if r[0] > 0 and r[1] == 0]
            first = lambda j: -((-j * 48000 * rate.denominator) // rate.numerator)
            want_ann = [(first(j), first(j + 8 * len(units[k][3])) - first(j)) for k, j in enumerate(starts)]
            got_ann = [(a["core:sample_start"], a["core:sample_count"]) for a in ann]
            check(got_ann == want_ann and all(a["core:label"] == c["mnemonic"] for a, c in zip(ann, up["commands"])),
                  "%s: SigMF annotations %s, want %s" % (name, got_ann[:3], want_ann[:3]))
            n_cases += 1
        check(n_cases == 16, "all 16 combinations ran (%d)" % n_cases)

        # The demo itself: inspect shows fields by name, and --list compiles back to the same upload.
        upath = os.path.join(tmp, "demo.upl")
        rc, out, err = run("compile", "-q", "--dict", os.path.join(SRC, "dictionaries", "demo-ccsds.yaml"), cmd_list,
                           "-o", upath)
        check(rc == 0, "demo compile: %s" % err)
        rc, out, err = run("inspect", upath)
        check(rc == 0 and "APID 0x050 = OBC" in out and "N(S) 200" in out and "MAP ID 3" in out and "CLTU hex  EB90" in out,
              "inspect shows packet and frame fields, CLTU hex")
        rc, out, err = run("inspect", "--json", upath)
        j = json.loads(out) if rc == 0 else {}
        check(len(j.get("cltus", [])) == 18 and j["cltus"][0]["packet"]["apid"] == 0x50 and
              j["cltus"][0]["frame"]["spacecraft_id"] == 0x1A7, "inspect --json fields")
        rc, out, err = run("inspect", "--list", upath)
        lpath = os.path.join(tmp, "demo-ccsds.cmd")
        with open(lpath, "w", encoding="utf-8") as f:
            f.write(out)
        u2 = os.path.join(tmp, "demo2.upl")
        rc, _, err = run("compile", "-q", "--dict", os.path.join(SRC, "dictionaries", "demo-ccsds.yaml"), lpath, "-o", u2)
        with open(upath, encoding="utf-8") as f1, open(u2, encoding="utf-8") as f2:
            check(rc == 0 and f1.read() == f2.read(), "inspect --list compiles back to the identical upload")

        # Tampered uploads with a recomputed digest are refused, naming the reason.
        with open(upath, encoding="utf-8") as f:
            text = f.read()
        up = json.loads(text)
        c0 = up["commands"][1]
        cases = [
            ("cltu", '"cltu": "%s"' % c0["cltu"], '"cltu": "%s"' % (c0["cltu"][:20] + ("0" if c0["cltu"][20] != "0" else "1") + c0["cltu"][21:]),
             "the CLTU is not the coding of its frame"),
            ("frame", '"frame": "%s"' % c0["frame"], '"frame": "%s"' % (c0["frame"][:-1] + ("0" if c0["frame"][-1] != "0" else "1")),
             "the frame is not the one its fields"),
            ("sequence_count", '"sequence_count": 1, "frame_sequence": 201', '"sequence_count": 2, "frame_sequence": 201',
             "the frame is not the one its fields"),
            ("raw", '"raw": "0x2b3c4d5e"', '"raw": "0x2b3c4d5f"', "the frame is not the one its fields"),
            ("idle", '"idles_before": 128', '"idles_before": 127', "below the acquisition sequence"),
        ]
        # A frame and CLTU rebuilt here with another count: each command is consistent in
        # itself, but the counts no longer run per APID from 0 (docs/spec/ccsds-tc.md s.2).
        tc = up["link"]["tc"]
        arg_bits = []
        for a in c0["args"]:
            raw = int(a["raw"], 16)
            arg_bits += [(raw >> (a["bits"] - 1 - i)) & 1 for i in range(a["bits"])]
        fr = frame(tc, 201, packet(c0["system_address"], 5, bytes([c0["opcode"]]) + bits_to_octets(arg_bits)))
        old_part = '"sequence_count": 1, "frame_sequence": 201,\n     "frame": "%s",\n     "cltu": "%s"' % (c0["frame"], c0["cltu"])
        new_part = '"sequence_count": 5, "frame_sequence": 201,\n     "frame": "%s",\n     "cltu": "%s"' % (
            fr.hex().upper(), cltu(tc, fr).hex().upper())
        cases.append(("count_order", old_part, new_part, "'sequence_count' 5 is not 1, the next count of APID 0x50"))
        fr = frame(tc, 7, packet(c0["system_address"], 1, bytes([c0["opcode"]]) + bits_to_octets(arg_bits)))
        new_part = '"sequence_count": 1, "frame_sequence": 7,\n     "frame": "%s",\n     "cltu": "%s"' % (
            fr.hex().upper(), cltu(tc, fr).hex().upper())
        cases.append(("ns_order", old_part, new_part, "'frame_sequence' 7 is not 201"))
        for what, old, new, msg in cases:
            check(old in text, "tamper %s: text present" % what)
            bad = redigest(text.replace(old, new, 1))
            p = os.path.join(tmp, "bad-%s.upl" % what)
            with open(p, "w", encoding="utf-8") as f:
                f.write(bad)
            rc, out, err = run("inspect", p)
            check(rc == 1 and msg in err, "tamper %s: exit %d, message %r" % (what, rc, err.strip()[:200]))

        # Blind decode and verify through the CLI: impaired capture (noise, clock error, delay,
        # inversion) of the demo upload.
        wav = os.path.join(tmp, "demo.wav")
        rx = os.path.join(tmp, "demo-rx.wav")
        ddict = os.path.join(SRC, "dictionaries", "demo-ccsds.yaml")
        rc, _, err = run("modulate", upath, "-o", wav, "--rate", "48000")
        check(rc == 0, "demo modulate: %s" % err)
        rc, _, err = run("impair", wav, rx, "--dict", ddict, "--ebn0", "12", "--ppm", "-150", "--delay", "0.25",
                         "--invert", "--seed", "7")
        check(rc == 0, "impair: %s" % err)
        rc, out, err = run("decode", "--dict", ddict, rx, "--json")
        check(rc == 0, "decode exit %d: %s" % (rc, err))
        dj = json.loads(out) if rc == 0 else {"words": []}
        acc = [w for w in dj["words"] if w["status"] == "accepted"]
        check(len(acc) == 18, "decode: %d accepted CLTUs, want 18" % len(acc))
        for w, c in zip(acc, up["commands"]):
            check(w["mnemonic"] == c["mnemonic"] and w["apid"] == c["system_address"] and
                  w["sequence_count"] == c["sequence_count"] and w["frame_sequence"] == c["frame_sequence"],
                  "decode: %s (APID %s count %s) for %s" % (w.get("mnemonic"), w.get("apid"), w.get("sequence_count"),
                                                            c["mnemonic"]))
            data = bytes([c["opcode"]]) + bits_to_octets(sum(([(int(a["raw"], 16) >> (a["bits"] - 1 - i)) & 1
                                                              for i in range(a["bits"])] for a in c["args"]), []))
            check(w["hex"] == data.hex().upper(), "decode: %s data field %s, want %s" % (c["mnemonic"], w["hex"],
                                                                                          data.hex().upper()))
        check(all(w.get("reason") for w in dj["words"] if w["status"] == "rejected"), "every rejection has a reason")
        rc, out, err = run("verify", "--dict", ddict, "--upload", upath, rx)
        check(rc == 0 and "VERIFIED" in out, "verify the capture against its upload: exit %d %s" % (rc, out[-300:]))
        # Another list (one command left out, one value changed): not verified, exit 1.
        with open(cmd_list, encoding="utf-8") as f:
            lst = f.read()
        other = lst.replace("RELAY_STOP\n", "").replace("speed=-1500rpm", "speed=-1400rpm")
        opath = os.path.join(tmp, "other.cmd")
        with open(opath, "w", encoding="utf-8") as f:
            f.write(other)
        oup = os.path.join(tmp, "other.upl")
        rc, _, err = run("compile", "-q", "--dict", ddict, opath, "-o", oup)
        check(rc == 0, "other compile: %s" % err)
        rc, out, err = run("verify", "--dict", ddict, "--upload", oup, rx)
        check(rc == 1 and "NOT VERIFIED" in out and "changed" in out and "speed: sent -1400rpm (raw 0xFA88), received -1500rpm (raw 0xFA24)" in out,
              "verify against another upload: exit %d %s" % (rc, out[-600:]))
        rc, out, err = run("verify", "--dict", os.path.join(SRC, "dictionaries", "demo-subbit.yaml"), "--upload", upath, rx)
        check(rc == 2, "verify with another dictionary: exit %d" % rc)

    print("%d checks, %d failed" % (checks, len(failures)))
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
