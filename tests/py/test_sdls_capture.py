#!/usr/bin/python3
"""Authenticated commanding end to end through captures (ulk compile, modulate, impair,
decode, verify with --keys / --state).

With the secured demo (dictionaries/demo-ccsds-sec.yaml) and a demo key:
  - the capture decoded with the right key: every frame accepted and authenticated, exit 0;
  - with another key: every frame rejected, "authentication failed", exit 1;
  - a second time with the receive state of the first: every frame "replayed", exit 1;
  - a capture of an upload with one bit of one frame's MAC flipped (the CLTU rebuilt with the
    independent CCSDS 231.0-B-4 (sections 3, 5, 6, from memory) construction of test_ccsds_pipeline.py, so the frame reaches the
    MAC check): that frame alone "authentication failed";
  - without --keys: secured, not authenticated (the commands shown for authentication,
    nothing readable under authenticated-encryption);
  - verify with the key: exit 0; after the bit flip: exit 1.
Frame layout: CCSDS 355.0-B-1 sections 3.2 and 3.3 (from memory of its figure); FECF CCSDS 232.0-B-4 section 4.1.4 (from memory; crcmod).
"""
import json
import os
import subprocess
import sys
import tempfile

import crcmod.predefined

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import test_ccsds_pipeline as ref  # noqa: E402  (the independent CLTU construction)

ULK = os.environ.get("ULK")
SRC = os.environ.get("ULK_SOURCE_DIR") or os.path.normpath(
    os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", ".."))
failures = []
checks = 0
crc16 = crcmod.predefined.mkCrcFun("crc-ccitt-false")

KEY_HEX = "5361 6c74 6d65 7265 2064 656d 6f20 6b65 7920 6f6e 6c79 2121 2121 2121 2121 2121".replace(" ", "")
OTHER_HEX = "ff" * 32
N = 18  # CLTUs of dictionaries/demo-ccsds.cmd


def check(cond, what):
    global checks
    checks += 1
    if not cond:
        failures.append(what)
        print("FAIL:", what)


def run(*args):
    p = subprocess.run([ULK] + list(args), capture_output=True, text=True)
    return p.returncode, p.stdout, p.stderr


def write_key(path, hexkey):
    with open(path, "w", encoding="utf-8") as f:
        f.write("# demo key for tests only: never for a real vehicle\nharrowick3-uplink %s\n" % hexkey)
    os.chmod(path, 0o600)


def decode(dpath, wav, *extra):
    rc, out, err = run("decode", "--dict", dpath, wav, "--json", *extra)
    try:
        words = json.loads(out)["words"]
    except (ValueError, KeyError):
        words = []
    return rc, words, err


def main():
    if not ULK:
        print("ULK is not set")
        return 2
    dict_path = os.path.join(SRC, "dictionaries", "demo-ccsds-sec.yaml")
    cmd_path = os.path.join(SRC, "dictionaries", "demo-ccsds.cmd")
    with tempfile.TemporaryDirectory() as tmp:
        keys, other = os.path.join(tmp, "demo.keys"), os.path.join(tmp, "other.keys")
        write_key(keys, KEY_HEX)
        write_key(other, OTHER_HEX)
        tx = os.path.join(tmp, "tx.state")
        up = os.path.join(tmp, "sec.ulku")
        rc, out, err = run("compile", "-q", "--dict", dict_path, cmd_path, "-o", up, "--keys", keys, "--state", tx)
        check(rc == 0 and "starts at IV counter 1" in err, "compile with a new state: exit %d %s" % (rc, err))
        wav, rx_wav = os.path.join(tmp, "sec.wav"), os.path.join(tmp, "sec-rx.wav")
        rc, _, err = run("modulate", up, "-o", wav, "--rate", "48000")
        check(rc == 0, "modulate: %s" % err)
        # a realistic capture: noise, clock error, delay, inversion (fixed seed)
        rc, _, err = run("impair", wav, rx_wav, "--dict", dict_path, "--ebn0", "14", "--ppm", "80", "--delay", "0.2",
                         "--invert", "--seed", "16")
        check(rc == 0, "impair: %s" % err)

        # right key: all accepted and authenticated; the receive state records counter 18
        rxs = os.path.join(tmp, "rx.state")
        rc, w, err = decode(dict_path, rx_wav, "--keys", keys, "--state", rxs)
        acc = [x for x in w if x["status"] == "accepted" and x.get("security", {}).get("verdict") == "authenticated"]
        check(rc == 0 and len(w) == N and len(acc) == N, "right key: %d of %d accepted and authenticated (exit %d) %s"
              % (len(acc), len(w), rc, err[-300:]))
        check([x["security"]["iv_counter"] for x in acc] == list(range(1, N + 1)), "right key: counters 1..18 in order")
        with open(rxs, encoding="utf-8") as f:
            check("spi 257 last 18" in f.read(), "the receive state holds the last accepted counter 18")

        # another key: every frame fails authentication, decode exits 1
        rc, w, err = decode(dict_path, rx_wav, "--keys", other)
        bad = [x for x in w if x["status"] == "rejected" and "authentication failed" in x["reason"]]
        check(rc == 1 and len(w) == N and len(bad) == N, "another key: %d of %d rejected as authentication failed (exit %d)"
              % (len(bad), len(w), rc))

        # the same capture again with the first decode's state: every frame replayed
        rc, w, err = decode(dict_path, rx_wav, "--keys", keys, "--state", rxs)
        rep = [x for x in w if x["status"] == "rejected" and x["reason"].startswith("replayed")]
        check(rc == 1 and len(w) == N and len(rep) == N, "second decode with the state: %d of %d replayed (exit %d)"
              % (len(rep), len(w), rc))
        with open(rxs, encoding="utf-8") as f:
            check("spi 257 last 18" in f.read(), "replayed frames do not move the window")

        # without keys: secured, not authenticated; the commands are shown (authentication service)
        rc, w, err = decode(dict_path, rx_wav)
        na = [x for x in w if x["status"] == "accepted" and x["security"]["verdict"] == "not authenticated"]
        check(rc == 0 and len(na) == N, "no keys: %d of %d secured, not authenticated" % (len(na), len(w)))
        rc, out, err = run("decode", "--dict", dict_path, rx_wav)
        check("NOT authenticated" in out, "no keys: the text report says NOT authenticated")

        # verify with the key
        rc, out, err = run("verify", "--dict", dict_path, "--upload", up, rx_wav, "--keys", keys)
        check(rc == 0 and "VERIFIED" in out, "verify with the key: exit %d %s" % (rc, out[-300:]))

        # one bit of one frame's MAC flipped; FECF and CLTU rebuilt independently, digest redone
        with open(up, encoding="utf-8") as f:
            text = f.read()
        doc = json.loads(text)
        tc = doc["link"]["tc"]
        k = 4
        c = doc["commands"][k]
        fr = bytearray.fromhex(c["frame"])
        mac_at = len(fr) - 2 - 16
        fr[mac_at + 3] ^= 0x10
        crc = crc16(bytes(fr[:-2]))
        fr[-2:] = bytes([crc >> 8, crc & 0xFF])
        new_cltu = ref.cltu(tc, bytes(fr))
        check(new_cltu.hex().upper() != c["cltu"].upper(), "the tampered CLTU differs")
        old_cltu_text = '"cltu": "%s"' % c["cltu"]
        old_frame_text = '"frame": "%s"' % c["frame"]
        check(text.count(old_cltu_text) == 1 and text.count(old_frame_text) == 1, "tamper: fields found once")
        t2 = text.replace(old_frame_text, '"frame": "%s"' % bytes(fr).hex().upper())
        t2 = t2.replace(old_cltu_text, '"cltu": "%s"' % new_cltu.hex().upper())
        t2 = ref.redigest(t2)
        up2 = os.path.join(tmp, "tampered.ulku")
        with open(up2, "w", encoding="utf-8") as f:
            f.write(t2)
        wav2 = os.path.join(tmp, "tampered.wav")
        rc, _, err = run("modulate", up2, "-o", wav2, "--rate", "48000")
        check(rc == 0, "the tampered upload (MAC not checkable without the key) still modulates: %s" % err)
        rc, w, err = decode(dict_path, wav2, "--keys", keys)
        st = [(x["status"], x.get("reason", "")) for x in w]
        good = [i for i, s in enumerate(st) if s[0] == "accepted"]
        check(len(w) == N and good == [i for i in range(N) if i != k] and "authentication failed" in st[k][1],
              "bit flip in frame %d: that frame alone fails authentication: %s" % (k + 1, st[k]))
        rc, out, err = run("verify", "--dict", dict_path, "--upload", up, wav2, "--keys", keys)
        check(rc == 1, "verify after the bit flip: exit %d" % rc)

        # authenticated-encryption: decrypted with the key, unreadable without it
        with open(dict_path, encoding="utf-8") as f:
            ae = f.read().replace("service: authentication\n", "service: authenticated-encryption\n")
        dae = os.path.join(tmp, "ae.yaml")
        with open(dae, "w", encoding="utf-8") as f:
            f.write(ae)
        upae, wae = os.path.join(tmp, "ae.ulku"), os.path.join(tmp, "ae.wav")
        rc, _, err = run("compile", "-q", "--dict", dae, cmd_path, "-o", upae, "--keys", keys, "--state", tx)
        check(rc == 0, "compile authenticated-encryption: %s" % err)
        run("modulate", upae, "-o", wae, "--rate", "48000")
        rc, w, err = decode(dae, wae, "--keys", keys)
        acc = [x for x in w if x["status"] == "accepted"]
        check(rc == 0 and len(acc) == N and acc[0]["security"]["iv_counter"] == N + 1,
              "authenticated-encryption with the key: %d accepted, counters from 19" % len(acc))
        rc, out, err = run("verify", "--dict", dae, "--upload", upae, wae, "--keys", keys)
        check(rc == 0, "verify authenticated-encryption: exit %d" % rc)
        rc, w, err = decode(dae, wae)
        check(rc == 1 and len(w) == N and all(x["status"] == "rejected" and "not authenticated" in x["reason"] for x in w),
              "authenticated-encryption without keys: nothing readable, exit %d" % rc)

        # a state of the wrong side and a state without keys are refused
        rc, w, err = decode(dict_path, rx_wav, "--keys", keys, "--state", tx)
        check(rc == 2 and "send-side" in err, "decode refuses a send-side state: %s" % err)
        rc, w, err = decode(dict_path, rx_wav, "--state", rxs)
        check(rc == 2 and "--state needs --keys" in err, "decode refuses --state without --keys: %s" % err)
    print("%d checks, %d failed" % (checks, len(failures)))
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
