#!/usr/bin/python3
"""test_envelope_demod - the operating envelope beyond the blind demodulator's present limits:
the lowest sample rates, fs = 2 (f_sc + R_s) (R_s the sub-bit rate; the channel bit rate for
CCSDS), and clock error to +-1000 ppm, for every profile, on captures from the independent
numpy generator (gen_capture.py) with long lead-ins, real and complex.

These rows measure the demodulator's front end (src/demod.c: rates down to 2 (f_sc + R_s),
a +-1250 ppm clock search, pattern alignment from many words); before it, the demodulator
refused rates below 2.5 (f_sc + R_s) and searched +-700 ppm, and these rows failed.

Rows:
  sub-bit demo, real, 30 kHz (the lowest), -1000 ppm, 60 s lead-in, 12 dB: 21 words;
  sub-bit demo, real, 192 kHz, +1000 ppm: 21 words;
  the n = 7 set (zero 1110010, one 0001101, idle 1010101, 62.5 bit/s, sine at 4 R_s),
    inverted, 44.1 kHz, -200 ppm, 12 dB: every word (a clean word was refused as
    "ambiguous alignment"); and at 4375 Hz (the lowest), +1000 ppm, 60 s lead-in;
  CCSDS demo (16 kHz sine, 2000 bit/s) at 44.1 kHz: 18 CLTUs, none rejected; and at 36 kHz
    (the lowest), -1000 ppm, 60 s lead-in;
  complex (mode "command"), 30 kHz, -1000 ppm, 60 s lead-in: 21 words;
  statistics as in test_envelope_stats.py (binomial bounds, 99.95 % each side, allowed loss
    0.5 dB): the n = 7 set at 4375 Hz, +1000 ppm, inverted, 10 s lead-in; CCSDS at 36 kHz,
    -1000 ppm.
"""
import json
import os
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
import gen_capture as gc  # noqa: E402
import ref_subbit as ref  # noqa: E402
import test_envelope_lead as lead  # noqa: E402
import test_envelope_stats as stats  # noqa: E402

SRC = lead.SRC
ULK = lead.ULK


def n7_dictionary(tmp):
    """The demo dictionary with the n = 7 link (the rest, commands and carrier, unchanged)."""
    with open(lead.DSUB, encoding="utf-8") as f:
        t = f.read()
    for a, b in (("bit_rate: 1000", "bit_rate: 62.5"), ('zero: "00111"', 'zero: "1110010"'),
                 ('one: "11000"', 'one: "0001101"'), ('idle: "01010"', 'idle: "1010101"'),
                 ("frequency: 10000", "frequency: 1750")):
        assert a in t, "demo dictionary changed: %s not found" % a
        t = t.replace(a, b)
    p = os.path.join(tmp, "n7.yaml")
    with open(p, "w", encoding="utf-8") as f:
        f.write(t)
    return p


def words_case(tmp, dict_path, fs, ppm, lead_s, label, invert=False, complex_=False):
    d = ref.load_dictionary(dict_path)
    st = lead.subbit_words(d)
    tol = 0.5 / float(d.link.subbit_rate)
    if complex_:
        x, _, fse = gc.make_complex_capture(d.link, st.subbits, fs, 1.1, ebn0_db=12, ppm=ppm, delay_s=str(lead_s),
                                            tail_s="0.5", offset_hz=-2345.6, phase_rad=2.0, seed=31)
        cap = os.path.join(tmp, "c.cf32")
        gc.write_cf32(cap, x, fs, mode="command")
        rc, j, err = lead.decode(dict_path, cap)
    else:
        x, _, fse = gc.make_bits_capture(d.link, st.subbits, fs, ebn0_db=12, ppm=ppm, delay_s=str(lead_s),
                                         tail_s="0.5", invert=invert, seed=32)
        cap = os.path.join(tmp, "r.f32")
        gc.write_capture(cap, x, fs)
        rc, j, err = lead.decode(dict_path, cap, "--rate", str(fs), "--format", "f32")
    good, other = lead.match(j["words"], lead.word_times(d, st, lead_s, fse, fs), tol)
    n = len(st.words)
    lead.check(rc == 0 and good == n and other == 0, "%s: %d of %d words accepted, %d other (rc %d %s)"
               % (label, good, n, other, rc, err.strip()[:200]))


def ccsds_case(tmp, fs, ppm, lead_s, label):
    upl = os.path.join(tmp, "cc.upl")
    rc, out, err = lead.run("compile", "--dict", lead.DCC, os.path.join(SRC, "dictionaries", "demo-ccsds.cmd"),
                            "-o", upl)
    with open(upl) as f:
        up = json.load(f)
    bits, starts = gc.ccsds_stream(up)
    lk = gc.TcLink(up["link"]["bit_rate"], 16000, "sine", 0.9, "nrz-l")
    x, _, fse = gc.make_bits_capture(lk, bits, fs, ebn0_db=12, ppm=ppm, delay_s=str(lead_s), tail_s="0.5", seed=33)
    cap = os.path.join(tmp, "cc.f32")
    gc.write_capture(cap, x, fs)
    rc, j, err = lead.decode(lead.DCC, cap, "--rate", str(fs), "--format", "f32")
    sc = float(fs / fse)
    acc = [w for w in j["words"] if w.get("status") == "accepted"]
    rej = [w for w in j["words"] if w.get("status") != "accepted"]
    ok = sum(any(abs(w["start_s"] - (lead_s + b0 / float(lk.bit_rate) / sc)) < 0.5 / float(lk.bit_rate) and
                 w.get("sequence_count") == u[0] and w.get("frame_sequence") == u[1] for w in acc) for b0, u in starts)
    lead.check(rc == 0 and ok == 18 and len(acc) == 18 and not rej,
               "%s: %d of 18 CLTUs accepted at their time, %d accepted, %d rejected entries (rc %d %s)"
               % (label, ok, len(acc), len(rej), rc, err.strip()[:200]))


def main():
    if not ULK:
        print("ULK is not set")
        return 1
    with tempfile.TemporaryDirectory() as tmp:
        n7 = n7_dictionary(tmp)
        words_case(tmp, lead.DSUB, 30000, "-1000", 60, "sub-bit demo, 30 kHz, -1000 ppm, 60 s lead-in")
        words_case(tmp, lead.DSUB, 192000, "1000", 0.2, "sub-bit demo, 192 kHz, +1000 ppm")
        words_case(tmp, n7, 44100, "-200", 1, "n = 7 set, inverted, 44.1 kHz, -200 ppm", invert=True)
        words_case(tmp, n7, 4375, "1000", 60, "n = 7 set, 4375 Hz, +1000 ppm, 60 s lead-in")
        ccsds_case(tmp, 44100, "0", 1, "ccsds demo, 44.1 kHz")
        ccsds_case(tmp, 36000, "-1000", 60, "ccsds demo, 36 kHz, -1000 ppm, 60 s lead-in")
        words_case(tmp, lead.DSUB, 30000, "-1000", 60, "complex, 30 kHz, -1000 ppm, 60 s lead-in", complex_=True)
        stats.words_row(tmp, n7, 4375, "1000", 10, 20, True, "n = 7 set, inverted")
        stats.cltu_row(tmp, 36000, "-1000", 10, 24)
    fails = lead.failures + stats.failures
    print("%d failures" % len(fails))
    return 1 if fails else 0


if __name__ == "__main__":
    sys.exit(main())
