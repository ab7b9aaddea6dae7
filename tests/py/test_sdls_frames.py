#!/usr/bin/python3
"""Authenticated frames of the secured demo checked by an independent AES-GCM computation.

Outside references:
  - AES-GCM: python3-cryptography (Debian; OpenSSL underneath, but driven here through its own
    API from the standard's definitions, not through ulk). Its correctness on the AES-256 test
    cases 13-18 of McGrew & Viega, "The Galois/Counter Mode of Operation (GCM)", Appendix B
    (the values as quoted by several public test suites, which agree; the document itself was
    not at hand) is checked first, so a wrong reference cannot pass the frames.
  - frame layout: CCSDS 355.0-B-1 section 3.2, from memory (security header SPI 2 octets + IV after the primary header
    and segment header, MAC before the FECF; from memory of the standard's figure), CCSDS
    232.0-B (header fields, FECF = CRC-16/CCITT-FALSE via python3-crcmod).

Then, through the ulk binary: every frame of an upload compiled with a demo key is parsed
here field by field and its MAC verified (authentication: the whole frame before the MAC is
additional data; authenticated-encryption: the headers are, the data field is decrypted and
must be the packet the upload's fields describe); the counters of three compiles are all
distinct and contiguous; a failed compile leaves the state unchanged; a group-readable key
file and a secured dictionary without --keys are refused; no key material appears in the
upload, the state or any message.
"""
import fcntl
import json
import os
import re
import stat
import subprocess
import sys
import tempfile

import crcmod.predefined
from cryptography.exceptions import InvalidTag
from cryptography.hazmat.primitives.ciphers import Cipher, algorithms, modes

ULK = os.environ.get("ULK")
SRC = os.environ.get("ULK_SOURCE_DIR") or os.path.normpath(
    os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", ".."))
failures = []
checks = 0

crc16 = crcmod.predefined.mkCrcFun("crc-ccitt-false")  # CCSDS 232.0-B-4 section 4.1.4 FECF (from memory)

KEY_HEX = "4f72726568617272696b636b2d64656d6f2d6b65792d6e6f742d7265616c2121"
OTHER_HEX = "00" * 31 + "01"


def check(cond, what):
    global checks
    checks += 1
    if not cond:
        failures.append(what)
        print("FAIL:", what)


def gcm_seal(key, iv, aad, pt, tag_len=16):
    e = Cipher(algorithms.AES(key), modes.GCM(iv)).encryptor()
    e.authenticate_additional_data(aad)
    ct = e.update(pt) + e.finalize()
    return ct, e.tag[:tag_len]


def gcm_open(key, iv, aad, ct, tag):
    d = Cipher(algorithms.AES(key), modes.GCM(iv, tag, min_tag_length=len(tag))).decryptor()
    d.authenticate_additional_data(aad)
    try:
        return d.update(ct) + d.finalize()
    except InvalidTag:
        return None


# McGrew & Viega, GCM specification, Appendix B, test cases 13-18 (AES-256).
K0 = "00" * 32
KF = "feffe9928665731c6d6a8f9467308308" * 2
P64 = ("d9313225f88406e5a55909c5aff5269a86a7a9531534f7da2e4c303d8a318a72"
       "1c3c0c95956809532fcf0e2449a6b525b16aedf5aa0de657ba637b391aafd255")
P60 = P64[:120]
A20 = "feedfacedeadbeeffeedfacedeadbeefabaddad2"
GCM_CASES = [
    (13, K0, "00" * 12, "", "", "", "530f8afbc74536b9a963b4f1c4cb738b"),
    (14, K0, "00" * 12, "00" * 16, "", "cea7403d4d606b6e074ec5d3baf39d18", "d0d1c8a799996bf0265b98b5d48ab919"),
    (15, KF, "cafebabefacedbaddecaf888", P64, "",
     "522dc1f099567d07f47f37a32a84427d643a8cdcbfe5c0c97598a2bd2555d1aa"
     "8cb08e48590dbb3da7b08b1056828838c5f61e6393ba7a0abcc9f662898015ad", "b094dac5d93471bdec1a502270e3cc6c"),
    (16, KF, "cafebabefacedbaddecaf888", P60, A20,
     "522dc1f099567d07f47f37a32a84427d643a8cdcbfe5c0c97598a2bd2555d1aa"
     "8cb08e48590dbb3da7b08b1056828838c5f61e6393ba7a0abcc9f662", "76fc6ece0f4e1768cddf8853bb2d551b"),
    (17, KF, "cafebabefacedbad", P60, A20,
     "c3762df1ca787d32ae47c13bf19844cbaf1ae14d0b976afac52ff7d79bba9de0"
     "feb582d33934a4f0954cc2363bc73f7862ac430e64abe499f47c9b1f", "3a337dbf46a792c45e454913fe2ea8f2"),
    (18, KF, "9313225df88406e555909c5aff5269aa6a7a9538534f7da1e4c303d2a318a728"
             "c3c0c95156809539fcf0e2429a6b525416aedbf5a0de6a57a637b39b", P60, A20,
     "5a8def2f0c9e53f1f75d7853659e2a20eeb2b22aafde6419a058ab4f6f746bf4"
     "0fc0c3b780f244452da3ebf1c5d82cdea2418997200ef82e44ae7e3f", "a44a8266ee1c8eb0c8b5d4cf5ae9f19a"),
]


def run(*args):
    p = subprocess.run([ULK] + list(args), capture_output=True, text=True)
    return p.returncode, p.stdout, p.stderr


def write_key(path, name, hexkey, mode=0o600):
    with open(path, "w", encoding="utf-8") as f:
        f.write("# demo key for tests only: never for a real vehicle\n%s %s\n" % (name, hexkey))
    os.chmod(path, mode)


def check_frames(up, key, sa, tc, label):
    """Parses every frame of upload up and verifies it with the reference AES-GCM."""
    seg = 1 if tc.get("segment_header") else 0
    fecf = 2 if tc["fecf"] else 0
    ivn, macn = sa["iv_octets"], sa["mac_octets"]
    counters = []
    for i, c in enumerate(up["commands"]):
        f = bytes.fromhex(c["frame"])
        w0, w1 = f[0] << 8 | f[1], f[2] << 8 | f[3]
        check((w1 & 0x3FF) + 1 == len(f), "%s frame %d: the length field covers the whole frame" % (label, i))
        check(w0 & 0x3FF == tc["spacecraft_id"] and w1 >> 10 == tc["virtual_channel"],
              "%s frame %d: SCID and VCID" % (label, i))
        if fecf:
            check(crc16(f[:-2]) == (f[-2] << 8 | f[-1]), "%s frame %d: FECF (crcmod) over the secured frame" % (label, i))
        sh = 5 + seg
        spi = f[sh] << 8 | f[sh + 1]
        iv = f[sh + 2:sh + 2 + ivn]
        data_at = sh + 2 + ivn
        mac_at = len(f) - fecf - macn
        data, mac = f[data_at:mac_at], f[mac_at:mac_at + macn]
        check(spi == sa["spi"], "%s frame %d: SPI %d, expected %d" % (label, i, spi, sa["spi"]))
        check(iv[:ivn - 8] == bytes(ivn - 8), "%s frame %d: IV leading octets are 0" % (label, i))
        counters.append(int.from_bytes(iv[ivn - 8:], "big"))
        if sa["service"] == "authentication":
            pt = gcm_open(key, iv, f[:mac_at], b"", mac)
            check(pt == b"", "%s frame %d: the MAC verifies under the reference (GMAC over the frame)" % (label, i))
            packet = data
        else:
            packet = gcm_open(key, iv, f[:data_at], data, mac)
            check(packet is not None, "%s frame %d: the MAC verifies and decrypts under the reference" % (label, i))
            if packet is None:
                continue
        # the packet in the data field is the one the upload's fields describe
        apid = (packet[0] << 8 | packet[1]) & 0x7FF
        count = (packet[2] << 8 | packet[3]) & 0x3FFF
        check(apid == c["system_address"] and count == c["sequence_count"] and packet[6] == c["opcode"],
              "%s frame %d: packet APID/count/opcode match the upload's fields" % (label, i))
        check((packet[4] << 8 | packet[5]) + 7 == len(packet), "%s frame %d: packet length" % (label, i))
        # and a wrong key does not verify
        wrong = gcm_open(bytes.fromhex(OTHER_HEX), iv, f[:data_at] if sa["service"] != "authentication" else f[:mac_at],
                         data if sa["service"] != "authentication" else b"", mac)
        check(wrong is None, "%s frame %d: another key does not verify" % (label, i))
    return counters


def main():
    if not ULK:
        print("ULK is not set")
        return 2
    # ---- the reference first: GCM test cases 13-18
    for n, k, iv, p, a, c, t in GCM_CASES:
        ct, tag = gcm_seal(bytes.fromhex(k), bytes.fromhex(iv), bytes.fromhex(a), bytes.fromhex(p))
        check(ct.hex() == c and tag.hex() == t, "reference AES-GCM on test case %d" % n)

    key = bytes.fromhex(KEY_HEX)
    dict_path = os.path.join(SRC, "dictionaries", "demo-ccsds-sec.yaml")
    cmd_path = os.path.join(SRC, "dictionaries", "demo-ccsds.cmd")
    with open(dict_path, encoding="utf-8") as f:
        base = f.read()
    with tempfile.TemporaryDirectory() as tmp:
        keys = os.path.join(tmp, "demo.keys")
        write_key(keys, "harrowick3-uplink", KEY_HEX)
        state = os.path.join(tmp, "tx.state")
        all_counters = []
        outputs = ""
        for svc, ivn, macn in (("authentication", 12, 16), ("authenticated-encryption", 12, 16),
                               ("authenticated-encryption", 16, 12)):
            text = re.sub(r"service: authentication\n", "service: %s\n" % svc, base)
            text = re.sub(r"iv_octets: 12", "iv_octets: %d" % ivn, text)
            text = re.sub(r"mac_octets: 16", "mac_octets: %d" % macn, text)
            dpath = os.path.join(tmp, "sec-%s-%d-%d.yaml" % (svc, ivn, macn))
            with open(dpath, "w", encoding="utf-8") as f:
                f.write(text)
            upath = os.path.join(tmp, "up-%s-%d-%d.ulku" % (svc, ivn, macn))
            rc, out, err = run("compile", "--dict", dpath, cmd_path, "-o", upath, "--keys", keys, "--state", state)
            outputs += out + err
            check(rc == 0, "compile %s iv %d mac %d: exit %d %s" % (svc, ivn, macn, rc, err))
            if rc:
                continue
            with open(upath, encoding="utf-8") as f:
                utext = f.read()
            outputs += utext
            up = json.loads(utext)
            tc = up["link"]["tc"]
            sa = tc["security"]
            check(sa["service"] == svc and sa["spi"] == 257 and sa["key"] == "harrowick3-uplink",
                  "upload names the security association")
            label = "%s/%d/%d" % (svc, ivn, macn)
            cs = check_frames(up, key, sa, tc, label)
            check(cs == list(range(cs[0], cs[0] + len(cs))) if cs else False, "%s: counters contiguous" % label)
            all_counters += cs
            # ulk's own decoder agrees: inspect shows the same counters
            rc, out, _ = run("inspect", "--json", upath)
            check(rc == 0, "inspect %s" % label)
            outputs += out
        check(len(all_counters) == 54 and len(set(all_counters)) == 54 and min(all_counters) == 1 and max(all_counters) == 54,
              "three compiles hand out counters 1..54, each once (got %d distinct of %d)" % (len(set(all_counters)), len(all_counters)))
        with open(state, encoding="utf-8") as f:
            st = f.read()
        outputs += st
        check("spi 257 next 55" in st, "state says next 55: %r" % st)

        # a failed compile (an unknown command) hands out nothing: the state is unchanged
        bad = os.path.join(tmp, "bad.cmd")
        with open(bad, "w", encoding="utf-8") as f:
            f.write("OBC_PING\nNO_SUCH_COMMAND\n")
        rc, out, err = run("compile", "--dict", dict_path, bad, "-o", os.path.join(tmp, "bad.ulku"), "--keys", keys,
                           "--state", state)
        outputs += out + err
        with open(state, encoding="utf-8") as f:
            check(f.read() == st and rc == 1 and not os.path.exists(os.path.join(tmp, "bad.ulku")),
                  "a failed compile leaves the state and writes nothing (exit %d)" % rc)
        # an unwritable output: nothing written, the state unchanged (the output fails before the reservation)
        rc, out, err = run("compile", "--dict", dict_path, cmd_path, "-o", os.path.join(tmp, "no", "dir.ulku"),
                           "--keys", keys, "--state", state)
        outputs += out + err
        with open(state, encoding="utf-8") as f:
            check(f.read() == st and rc == 2, "an unwritable output leaves the state (exit %d) %s" % (rc, err))
        # a reservation whose upload never appeared (a compile that stopped between the state and
        # the rename) is reported and its counters skipped, not reused
        with open(state, "w", encoding="utf-8") as f:
            f.write("ulk-sdls-state 1 send\nspi 257 next 73\nreserved 257 55 72 %s\n" % os.path.join(tmp, "lost.ulku"))
        upath = os.path.join(tmp, "after.ulku")
        rc, out, err = run("compile", "--dict", dict_path, cmd_path, "-o", upath, "--keys", keys, "--state", state)
        outputs += out + err
        check(rc == 0 and "55..72" in err and "never used again" in err, "an unfinished reservation is reported: %s" % err)
        if rc == 0:
            with open(upath, encoding="utf-8") as f:
                up = json.load(f)
            cs = check_frames(up, key, up["link"]["tc"]["security"], up["link"]["tc"], "after")
            check(cs and cs[0] == 73, "after an unfinished reservation the counters go on at 73")
        # the state file is private
        check(stat.S_IMODE(os.stat(state).st_mode) == 0o600, "the state file is mode 0600")
        # two runs on one state would read the same counters: a second one is refused while
        # the first holds the state's lock (held here with flock, as ulk takes it)
        with open(state, encoding="utf-8") as f:
            before = f.read()
        lockf = open(state + ".lock", "a")
        fcntl.flock(lockf, fcntl.LOCK_EX | fcntl.LOCK_NB)
        busy = os.path.join(tmp, "busy.ulku")
        rc, out, err = run("compile", "--dict", dict_path, cmd_path, "-o", busy, "--keys", keys, "--state", state)
        fcntl.flock(lockf, fcntl.LOCK_UN)
        lockf.close()
        with open(state, encoding="utf-8") as f:
            check(rc == 2 and "in use by another ulk run" in err and f.read() == before and not os.path.exists(busy),
                  "a locked state is refused, nothing written (exit %d) %s" % (rc, err))
        rc, out, err = run("compile", "-q", "--dict", dict_path, cmd_path, "-o", busy, "--keys", keys, "--state", state)
        check(rc == 0, "after the lock is released compile runs: %s" % err)

        # refusals
        rc, out, err = run("compile", "--dict", dict_path, cmd_path, "-o", os.path.join(tmp, "x.ulku"))
        check(rc == 2 and "--keys FILE" in err and "SPI 257" in err and not os.path.exists(os.path.join(tmp, "x.ulku")),
              "a secured dictionary without --keys is refused: %s" % err)
        for mode in (0o640, 0o644, 0o604):
            gk = os.path.join(tmp, "group.keys")
            write_key(gk, "harrowick3-uplink", KEY_HEX, mode)
            rc, out, err = run("compile", "--dict", dict_path, cmd_path, "-o", os.path.join(tmp, "x.ulku"), "--keys", gk,
                               "--state", state)
            outputs += out + err
            check(rc == 2 and ("mode %04o" % mode) in err and "group or others" in err,
                  "key file mode %04o refused naming the mode: %s" % (mode, err))
            os.unlink(gk)
        wk = os.path.join(tmp, "wrong-name.keys")
        write_key(wk, "another-key", KEY_HEX)
        rc, out, err = run("compile", "--dict", dict_path, cmd_path, "-o", os.path.join(tmp, "x.ulku"), "--keys", wk,
                           "--state", state)
        outputs += out + err
        check(rc == 2 and "'harrowick3-uplink'" in err, "a key file without the dictionary's key is refused: %s" % err)
        short = os.path.join(tmp, "short.keys")
        write_key(short, "harrowick3-uplink", KEY_HEX[:60])
        rc, out, err = run("compile", "--dict", dict_path, cmd_path, "-o", os.path.join(tmp, "x.ulku"), "--keys", short,
                           "--state", state)
        outputs += out + err
        check(rc == 2 and "short.keys:2:" in err and "64 hex digits" in err, "a short key is refused with file:line: %s" % err)

        # no key material anywhere: uploads, inspect output, state, messages
        for k in (KEY_HEX, KEY_HEX.upper(), KEY_HEX[:16], KEY_HEX[:16].upper()):
            check(k not in outputs, "key material %s... appears in an output" % k[:8])
    print("%d checks, %d failed" % (checks, len(failures)))
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
