#!/usr/bin/python3
"""test_envelope_stats - the decoder's error rates against the ideal receiver, measured on
captures from the independent numpy generator (gen_capture.py), fixed seeds.

Claim, at two E_b/N_0 (E_c/N_0) points each: the number of units lost lies within binomial
bounds (scipy.stats) of the ideal receiver,
    lower:  the 0.05 % quantile of the ideal receiver at the point itself (a decoder cannot do
            better than ideal: fewer losses would mean the measurement is broken),
    upper:  the 99.95 % quantile of the ideal receiver 0.5 dB lower (the allowed loss),
so each bound holds with 99.95 % confidence when the claim is true (99.9 % two-sided).

Ideal receivers (written here independently of tests/ideal_rx.h):
  sub-bit words: p = Q(sqrt(2 (E_b/N_0) d / n)) per bit, WER = 1 - (1 - p)^W (coherent
    antipodal decisions: Proakis, Digital Communications, 4th ed., section 5.2, from memory;
    d the Hamming distance of Z and O, n sub-bits per bit, W bits per word);
  CCSDS CLTUs (nrz-l): q = Q(sqrt(2 E_c/N_0)) per channel bit; accepted when the start
    sequence has at most start_errors errors and each codeblock at most one among its 63 code
    bits (SEC; CCSDS 231.0-B-4 section 3 decoding, from memory; the filler bit outside the code); the CLTUs differ in
    length, so the number rejected is Poisson-binomial, computed exactly by convolution.

Rows (within the decoder's present limits; the lowest rates and +-1000 ppm are in
test_envelope_demod.py):
  sub-bit demo, 48 kHz, +300 ppm, 10 s of noise first; the demo list 60 times (1260 words) per
    point; points where the ideal WER is 3e-2 and 1e-2;
  CCSDS demo (nrz-l, 16 kHz sine, 2000 bit/s), 48 kHz, -300 ppm, 10 s lead-in; the demo
    list's 18 CLTUs 24 times (432) with two idle octets between them; points where the ideal
    rejection is 1e-1 and 2e-2; also: no rejected entry that is not a CLTU sent and lost.
"""
import json
import math
import os
import subprocess
import sys
import tempfile

import numpy as np
from scipy.stats import binom, norm

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
import gen_capture as gc  # noqa: E402
import ref_subbit as ref  # noqa: E402

ULK = os.environ.get("ULK")
SRC = os.environ.get("ULK_SOURCE_DIR") or os.path.normpath(os.path.join(HERE, "..", ".."))
DSUB = os.path.join(SRC, "dictionaries", "demo-subbit.yaml")
DCC = os.path.join(SRC, "dictionaries", "demo-ccsds.yaml")
LOSS_DB = 0.5
CONF = 0.9995
failures = []


def check(cond, what):
    print(("ok: " if cond else "FAIL: ") + what)
    if not cond:
        failures.append(what)


def run(*args):
    p = subprocess.run([ULK] + list(args), capture_output=True, text=True)
    return p.returncode, p.stdout, p.stderr


def Q(x):
    return norm.sf(x)


def ideal_wer(ebn0_db, d, n, W):
    p = Q(math.sqrt(2 * 10 ** (ebn0_db / 10) * d / n))
    return 1 - (1 - p) ** W


def ideal_cltu_reject(ecn0_db, n_cb, start_errors=1):
    q = Q(math.sqrt(2 * 10 ** (ecn0_db / 10)))
    ps = sum(binom.pmf(k, 16, q) for k in range(start_errors + 1))
    pc = binom.pmf(0, 63, q) + binom.pmf(1, 63, q)
    return 1 - ps * pc ** n_cb


def solve(f, target):
    lo, hi = -5.0, 30.0
    for _ in range(80):
        m = (lo + hi) / 2
        if f(m) > target:
            lo = m
        else:
            hi = m
    return (lo + hi) / 2


def poisson_binomial_quantile(ps, conf):
    pmf = np.array([1.0])
    for p in ps:
        pmf = np.convolve(pmf, [1 - p, p])
    return int(np.searchsorted(np.cumsum(pmf), conf))


def words_row(tmp, dict_path=DSUB, fs=48000, ppm="300", lead=10, reps=60, invert=False, label="sub-bit demo"):
    d = ref.load_dictionary(dict_path)
    with open(os.path.join(SRC, "dictionaries", "demo-subbit.cmd"), encoding="utf-8") as f:
        items = ref.parse_command_list(d, f.read(), "demo-subbit.cmd")
    st = ref.build_stream(d, items * reps)
    L = d.link
    dzo = sum(a != b for a, b in zip(L.zero, L.one))
    n, W = len(L.zero), L.word_bits
    pts = [solve(lambda e: ideal_wer(e, dzo, n, W), 3e-2), solve(lambda e: ideal_wer(e, dzo, n, W), 1e-2)]
    N = len(st.words)
    for k, e in enumerate(pts):
        x, _, fse = gc.make_bits_capture(L, st.subbits, fs, ebn0_db=e, ppm=ppm, delay_s=str(lead), tail_s="0.5",
                                         invert=invert, seed=100 + k)
        cap = os.path.join(tmp, "w%d.f32" % k)
        gc.write_capture(cap, x, fs)
        rc, out, err = run("decode", "--dict", dict_path, cap, "--rate", str(fs), "--format", "f32", "--json")
        words = json.loads(out)["words"] if rc in (0, 1) and out else []
        sc = float(fs / fse)
        acc = {}
        for w in words:
            if w.get("status") == "accepted":
                acc.setdefault(round(w["start_s"] * float(L.subbit_rate)), []).append(w["hex"].upper())
        lost = 0
        for i, w in enumerate(st.words):
            j0 = int(np.argmax(st.word == i + 1))
            t = lead + j0 / float(L.subbit_rate) / sc
            key = round(t * float(L.subbit_rate))
            if not any(w.hex.upper() in acc.get(key + dk, []) for dk in (-1, 0, 1)):
                lost += 1
        n_acc = sum(len(v) for v in acc.values())
        lo = int(binom.ppf(1 - CONF, N, ideal_wer(e, dzo, n, W)))
        hi = int(binom.ppf(CONF, N, ideal_wer(e - LOSS_DB, dzo, n, W)))
        check(rc == 0 and lo <= lost <= hi,
              "%s, %g Hz, %s ppm, %g s lead-in, %.2f dB (ideal WER %.1e): %d of %d words lost, bounds [%d, %d] "
              "(ideal %.1f expected; ideal at -0.5 dB %.1f)"
              % (label, fs, ppm, lead, e, ideal_wer(e, dzo, n, W), lost, N, lo, hi, N * ideal_wer(e, dzo, n, W),
                 N * ideal_wer(e - LOSS_DB, dzo, n, W)))
        check(n_acc == N - lost, "%s, %.2f dB: every accepted word was sent (%d accepted, %d found)"
              % (label, e, n_acc, N - lost))


def cltu_row(tmp, fs=48000, ppm="-300", lead=10, reps=24):
    upl = os.path.join(tmp, "cc.upl")
    rc, out, err = run("compile", "--dict", DCC, os.path.join(SRC, "dictionaries", "demo-ccsds.cmd"), "-o", upl)
    check(rc == 0, "ccsds demo compiles (%s)" % err.strip()[:200])
    with open(upl) as f:
        up = json.load(f)
    bits, starts = gc.ccsds_stream(up)
    tc = up["link"]["tc"]
    check(tc["start_errors"] == 1 and tc["correction"] == "sec", "demo: start_errors 1, SEC (the ideal below assumes it)")
    # acquisition, then every CLTU followed by two idle octets, 24 times
    cl_bits = []
    for b0, unit in starts:
        n_oct = len(unit[3])
        cl_bits.append(bits[b0:b0 + 8 * n_oct])
    idle = np.array([i & 1 for i in range(16)])
    seq = [np.array([i & 1 for i in range(128)])]
    where = []
    pos = 128
    for rep in range(reps):
        for k, cb in enumerate(cl_bits):
            where.append((pos, k))
            seq += [cb, idle]
            pos += len(cb) + 16
    stream = np.concatenate(seq)
    n_cb = [(len(u[3]) - 10) // 8 for _, u in starts]
    lk = gc.TcLink(up["link"]["bit_rate"], 16000, "sine", 0.9, "nrz-l")
    mean_rej = lambda e: float(np.mean([ideal_cltu_reject(e, n) for n in n_cb]))
    pts = [solve(mean_rej, 1e-1), solve(mean_rej, 2e-2)]
    for k, e in enumerate(pts):
        x, _, fse = gc.make_bits_capture(lk, stream, fs, ebn0_db=e, ppm=ppm, delay_s=str(lead), tail_s="0.3",
                                         seed=200 + k)
        cap = os.path.join(tmp, "c%d.f32" % k)
        gc.write_capture(cap, x, fs)
        rc, out, err = run("decode", "--dict", DCC, cap, "--rate", str(fs), "--format", "f32", "--json")
        entries = json.loads(out)["words"] if out else []
        sc = float(fs / fse)
        R = float(lk.bit_rate)
        acc = [w for w in entries if w.get("status") == "accepted"]
        rej = [w for w in entries if w.get("status") != "accepted"]
        found = set()
        wrong = 0
        for w in acc:
            b = (w["start_s"] - lead) * R * sc
            hit = [i for i, (p0, kk) in enumerate(where) if abs(p0 - b) < 0.5 and i not in found and
                   w.get("sequence_count") == starts[kk][1][0] and w.get("frame_sequence") == starts[kk][1][1]]
            if hit:
                found.add(hit[0])
            else:
                wrong += 1
        lost = len(where) - len(found)
        ps_e = [ideal_cltu_reject(e, n_cb[kk]) for _, kk in where]
        ps_l = [ideal_cltu_reject(e - LOSS_DB, n_cb[kk]) for _, kk in where]
        lo = poisson_binomial_quantile(ps_e, 1 - CONF)
        hi = poisson_binomial_quantile(ps_l, CONF)
        check(rc in (0, 1) and lo <= lost <= hi,
              "ccsds demo, %g Hz, %s ppm, %g s lead-in, %.2f dB (ideal rejection %.1e): %d of %d CLTUs lost, bounds "
              "[%d, %d] (ideal %.1f expected; at -0.5 dB %.1f)" % (fs, ppm, lead, e, mean_rej(e), lost, len(where), lo, hi, sum(ps_e), sum(ps_l)))
        check(wrong == 0, "ccsds demo, %.2f dB: every accepted CLTU was sent (%d not)" % (e, wrong))
        check(len(rej) <= lost, "ccsds demo, %.2f dB: %d rejected entries for %d CLTUs lost (no spurious rejection)"
              % (e, len(rej), lost))


def main():
    if not ULK:
        print("ULK is not set")
        return 1
    with tempfile.TemporaryDirectory() as tmp:
        words_row(tmp)
        cltu_row(tmp)
    print("%d failures" % len(failures))
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
