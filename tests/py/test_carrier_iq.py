#!/usr/bin/python3
"""Complex composite-carrier output (`ulk modulate UPLOAD --carrier`), checked with Debian's
python3-numpy and python3-scipy against docs/spec/carrier.md:

- section 2's check: over a long capture the mean of x(t) tends to prod J0(m_k) over
  sinusoidal channels times prod cos(m_k) over binary ones. The expected P_c/P_T is computed
  here, independently of ulk's planner, with scipy.special.jv from the phase-modulation
  power split: exp(j m sin theta) = sum_n J_n(m) exp(j n theta) (Jacobi-Anger expansion;
  Abramowitz and Stegun, Handbook of Mathematical Functions, 1964, 9.1.41 to 9.1.45, from
  memory), so a sinusoidal channel of index m leaves a carrier line of amplitude J0(m); and
  exp(j m c) = cos m + j c sin m for c = +-1 exactly, so a binary channel leaves cos m. The
  indices are read from the dictionary's mode lines. |mean x|^2 must match within 1e-5 dB
  (measured 3.2e-07) in a data-only mode of the demo dictionary, and within 0.003 dB
  (measured 6.8e-04), with incommensurate frequencies as section 2 asks, in a three-channel
  mode. The planner (`ulk plan --json`) is then checked
  against the same scipy value.
- section 3's ranging delay: a capture that starts k0 samples into the ranging signal is a
  capture delayed by D = -k0 * chip_rate / f_s (mod N) chips; correlating its quadrature with
  a code generated here by an independent shift register (x^10 + x^3 + 1, a_{k+10} =
  a_{k+3} XOR a_k) must find D within 1e-6 chip (measured 1.1e-12; D is a whole number
  of samples);
- the file formats: .ci16 is round(32767 x) with halves away from zero of the .cf32 values,
  the two-channel WAV holds I left and Q right, SigMF says cf32_le / ci16_le;
- refusals: an upload compiled with another dictionary, an unknown mode, nothing left behind.
"""
import json
import os
import subprocess
import sys
import tempfile

import re

import numpy as np
from scipy.io import wavfile
from scipy.special import jv

ULK = os.environ.get("ULK", "ulk")
SRC = os.environ.get("ULK_SOURCE_DIR") or os.path.normpath(
    os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", ".."))
TMPROOT = os.environ.get("ULK_BINARY_DIR")
DICT = os.path.join(SRC, "dictionaries", "demo-subbit.yaml")
CMDS = os.path.join(SRC, "dictionaries", "demo-subbit.cmd")
failed = 0


def check(ok, what, detail=""):
    global failed
    print(("ok   " if ok else "FAIL ") + what + ("" if ok else " " + detail))
    if not ok:
        failed += 1


def run(*args):
    p = subprocess.run([ULK] + [str(a) for a in args], capture_output=True, text=True)
    return p.returncode, p.stdout, p.stderr


def planner_carrier(dict_path, mode):
    rc, out, err = run("plan", dict_path, "--mode", mode, "--json")
    if rc != 0:
        raise RuntimeError("ulk plan failed: " + err)
    return json.loads(out)["modes"][0]["fractions"]["carrier"]


# Channel kinds in the demo dictionary (docs/spec/carrier.md section 1): data on a sine
# subcarrier and the FM voice subcarrier are sinusoidal; ranging chips are binary.
KINDS = {"data": "sinusoidal", "voice": "sinusoidal", "ranging": "binary"}


def mode_indices(dict_text, mode):
    """{channel: m} from the dictionary's line '    MODE: {ch: m, ...}'."""
    g = re.search(r"^\s+%s:\s*\{([^}]*)\}" % re.escape(mode), dict_text, re.M)
    if not g:
        raise RuntimeError("mode %s not found in the dictionary" % mode)
    return {k.strip(): float(v) for k, v in (kv.split(":") for kv in g.group(1).split(","))}


def scipy_carrier(indices):
    """P_c/P_T = prod J0(m)^2 (sinusoidal) * prod cos(m)^2 (binary), with scipy.special.jv."""
    p = 1.0
    for ch, m in indices.items():
        p *= jv(0, m) ** 2 if KINDS[ch] == "sinusoidal" else np.cos(m) ** 2
    return p


def read_cf32(path):
    v = np.fromfile(path, dtype="<f4")
    return v[0::2].astype(np.float64) + 1j * v[1::2].astype(np.float64)


def mls_bits(degree, taps):
    """a_0..a_{r-1} = 1, a_{k+r} = XOR of a_{k+e} over taps e < r; one period."""
    n = 2 ** degree - 1
    a = [1] * degree
    while len(a) < n + degree:
        k = len(a) - degree
        v = 0
        for e in taps:
            v ^= a[k + e]
        a.append(v)
    return np.array(a[:n], dtype=np.int8)


def main():
    with tempfile.TemporaryDirectory(dir=TMPROOT) as tmp:
        upl = os.path.join(tmp, "demo.upl")
        rc, _, err = run("compile", "--dict", DICT, CMDS, "-o", upl)
        check(rc == 0, "compile the demo upload", err)
        if rc:
            return

        # --- 1. data only (command mode): mean of x against P_c/P_T ---
        fs = 200000
        cf = os.path.join(tmp, "cmd.cf32")
        rc, out, err = run("modulate", upl, "--carrier", "--mode", "command", "--dict", DICT, "-o", cf,
                           "--rate", fs)
        check(rc == 0, "modulate --carrier --mode command", err)
        check("CAUTION" in err, "caution text printed")
        x = read_cf32(cf)
        check(np.allclose(np.abs(x), 1.0, atol=1e-6), "constant envelope |x| = 1")
        with open(DICT, encoding="utf-8") as f:
            text = f.read()
        # the kinds above hold for the demo: a sine data subcarrier and no pilot
        check("waveform: sine" in text and "pilot" not in text, "demo data subcarrier is a sine without pilot")
        mi = mode_indices(text, "command")
        check(mi == {"data": 1.1}, "command mode indices read from the dictionary", str(mi))
        pc = scipy_carrier(mi)
        got = 10 * np.log10(abs(np.mean(x)) ** 2)
        want = 10 * np.log10(pc)
        print("   command mode: |mean x|^2 %.5f dB, scipy P_c/P_T %.5f dB, difference %.2g dB" % (got, want, got - want))
        # measured difference 3.2e-07 dB (a whole number of subcarrier cycles per sub-bit)
        check(abs(got - want) <= 1e-5, "command mode residual carrier within 1e-5 dB", "%.6f vs %.6f" % (got, want))
        pl = planner_carrier(DICT, "command")
        check(abs(pl - pc) <= 1e-9 * pc, "planner P_c/P_T equals the scipy value", "%.12g vs %.12g" % (pl, pc))
        with open(cf[:-5] + ".sigmf-meta", encoding="utf-8") as f:
            meta = json.load(f)
        g = meta["global"]
        check(g["core:datatype"] == "cf32_le" and g["core:sample_rate"] == fs and g["core:num_channels"] == 1,
              "SigMF cf32_le, rate, one complex channel", str(g))
        check(g["ulk:carrier"]["mode"] == "command", "SigMF names the mode")

        # --- 2. three channels with incommensurate lines (docs/spec/carrier.md section 2) ---
        inc = text.replace("subcarrier_hz: 28500", "subcarrier_hz: 31234.5").replace(
            "chip_rate: 2000", "chip_rate: 1789.3").replace("tone_hz: 1000", "tone_hz: 987.7")
        check(inc.count("31234.5") == 1 and inc.count("1789.3") == 1, "incommensurate edit applies")
        d2 = os.path.join(tmp, "inc.yaml")
        with open(d2, "w", encoding="utf-8") as f:
            f.write(inc)
        cf2 = os.path.join(tmp, "full.cf32")
        # the carrier section is part of the dictionary's hash: the edited dictionary needs
        # its own upload, and the demo upload is refused with it
        rc, _, err = run("modulate", upl, "--carrier", "--mode", "full", "--dict", d2, "-o", cf2, "--rate", fs)
        check(rc == 1 and "compiled with" in err and not os.path.exists(cf2),
              "carrier edit changes the dictionary hash: upload refused", err)
        upl2 = os.path.join(tmp, "inc.upl")
        rc, _, err = run("compile", "--dict", d2, CMDS, "-o", upl2)
        check(rc == 0, "compile with the edited dictionary", err)
        rc, out, err = run("modulate", upl2, "--carrier", "--mode", "full", "--dict", d2, "-o", cf2, "--rate", fs)
        check(rc == 0, "modulate --carrier --mode full (incommensurate)", err)
        if rc == 0:
            x2 = read_cf32(cf2)
            mi2 = mode_indices(inc, "full")
            check(mi2 == {"data": 0.9, "voice": 0.9, "ranging": 0.4}, "full mode indices read", str(mi2))
            pc2 = scipy_carrier(mi2)
            got2 = 10 * np.log10(abs(np.mean(x2)) ** 2)
            want2 = 10 * np.log10(pc2)
            print("   full mode: |mean x|^2 %.5f dB, scipy P_c/P_T %.5f dB, difference %.2g dB" % (got2, want2, got2 - want2))
            # measured difference 6.8e-04 dB (finite averaging of incommensurate lines)
            check(abs(got2 - want2) <= 0.003, "full mode residual carrier within 0.003 dB",
                  "%.5f vs %.5f" % (got2, want2))
            pl2 = planner_carrier(d2, "full")
            check(abs(pl2 - pc2) <= 1e-9 * pc2, "planner P_c/P_T equals the scipy value",
                  "%.12g vs %.12g" % (pl2, pc2))

        # --- 3. ranging code phase of a delayed capture ---
        fs_r = 48000  # 24 samples per chip at 2000 chips/s: chip edges fall between samples
        cr = os.path.join(tmp, "acq.cf32")
        rc, out, err = run("modulate", upl, "--carrier", "--mode", "acquisition", "--dict", DICT, "-o", cr,
                           "--rate", fs_r)
        check(rc == 0, "modulate --carrier --mode acquisition", err)
        if rc == 0:
            xr = read_cf32(cr)
            chip_rate, n_code = 2000.0, 1023
            for k0 in (0, 12345, 400001):
                y = xr[k0:k0 + 3 * int(n_code * fs_r / chip_rate)]
                check(len(y) == 3 * int(n_code * fs_r / chip_rate), "three code periods after sample %d" % k0)
                d_true = (-k0 * chip_rate / fs_r) % n_code
                d_meas = code_phase(y.imag, fs_r, chip_rate, mls_bits(10, [3, 0]))
                err_c = (d_meas - d_true + n_code / 2) % n_code - n_code / 2
                print("   start %d samples in: delay %.3f chips, measured %.3f, error %.2g chip" % (k0, d_true, d_meas, err_c))
                # the delays are whole samples (k0 / 24 chips), so the peak falls on a lag:
                # measured |error| at most 1.1e-12 chip
                check(abs(err_c) <= 1e-6, "code phase within 1e-6 chip (k0 = %d)" % k0,
                      "true %.4f measured %.4f" % (d_true, d_meas))

        # --- 4. ci16 and WAV against cf32 ---
        ci = os.path.join(tmp, "cmd.ci16")
        wv = os.path.join(tmp, "cmd.wav")
        rc1, _, e1 = run("modulate", upl, "--carrier", "--mode", "command", "--dict", DICT, "-o", ci, "--rate", fs)
        rc2, _, e2 = run("modulate", upl, "--carrier", "--mode", "command", "--dict", DICT, "-o", wv, "--rate", fs,
                         "--format", "s16")
        check(rc1 == 0 and rc2 == 0, "ci16 and s16 WAV written", e1 + e2)
        if rc1 == 0 and rc2 == 0:
            v = np.fromfile(cf, dtype="<f4").astype(np.float64)
            ref = np.sign(v) * np.floor(np.abs(32767.0 * v) + 0.5)  # halves away from zero
            q = np.fromfile(ci, dtype="<i2")
            check(q.shape == ref.shape and np.array_equal(q.astype(np.float64), ref), "ci16 = round(32767 x) of cf32")
            with open(ci[:-5] + ".sigmf-meta", encoding="utf-8") as f:
                check(json.load(f)["global"]["core:datatype"] == "ci16_le", "SigMF ci16_le")
            rate, w = wavfile.read(wv)
            check(rate == fs and w.ndim == 2 and w.shape[1] == 2, "WAV: two channels at f_s", str(w.shape))
            if w.ndim == 2:
                check(np.array_equal(w[:, 0], q[0::2]) and np.array_equal(w[:, 1], q[1::2]),
                      "WAV left = I, right = Q")

        # --- 5. refusals, nothing left behind ---
        bad = os.path.join(tmp, "bad.cf32")
        rc, _, err = run("modulate", upl, "--carrier", "--mode", "command", "--dict",
                         os.path.join(SRC, "dictionaries", "demo-ccsds.yaml"), "-o", bad, "--rate", fs)
        check(rc == 1 and "compiled with" in err, "another dictionary refused", err)
        rc, _, err = run("modulate", upl, "--carrier", "--mode", "comand", "--dict", DICT, "-o", bad, "--rate", fs)
        check(rc == 1 and "did you mean 'command'" in err, "unknown mode refused with a suggestion", err)
        rc, _, err = run("modulate", upl, "--carrier", "--mode", "full", "--dict", DICT, "-o", bad, "--rate", 50000)
        check(rc == 1 and "too low" in err, "rate below the mode's lines refused", err)
        rc, _, err = run("modulate", upl, "--carrier", "--mode", "full", "--dict", DICT, "-o",
                         os.path.join(tmp, "bad.f32"), "--rate", fs)
        check(rc == 2, "a real extension refused for complex output", err)
        if os.path.exists("/dev/full"):
            rc, _, err = run("modulate", upl, "--carrier", "--mode", "command", "--dict", DICT, "-o", "/dev/full",
                             "--rate", fs)
            check(rc == 2 and "No space" in err, "a full device: exit 2 with the reason", err)
        p = subprocess.run([ULK, "modulate", upl, "--carrier", "--mode", "command", "--dict", DICT, "-o",
                            "/dev/stdout", "--rate", str(fs), "-q"], capture_output=True)
        check(p.returncode == 0 and p.stdout == open(cf, "rb").read(), "a pipe gets the same raw I/Q as .cf32",
              "rc %d, %d bytes" % (p.returncode, len(p.stdout)))
        left = [n for n in os.listdir(tmp) if n.startswith("bad")]
        check(not left, "nothing left behind", str(left))


def code_phase(q, fs, chip_rate, bits):
    """Delay D in chips of the code in q, by circular correlation with the code sampled at
    fs, refined by a parabola through the peak and its neighbours."""
    n = len(q)
    t = np.arange(n)
    chips = 1 - 2 * bits.astype(np.float64)
    ref = chips[np.floor(t * chip_rate / fs).astype(np.int64) % len(bits)]
    # correlation over lags L (q[i] ~ ref[i - L]) for one code period of lags
    span = int(round(len(bits) * fs / chip_rate))
    nfft = 1 << int(np.ceil(np.log2(n + span)))
    corr = np.fft.irfft(np.fft.rfft(q, nfft) * np.conj(np.fft.rfft(ref, nfft)), nfft)
    # lag L >= 0 sits at corr[L]; lags (−span, 0) wrap to the end
    lags = np.concatenate([np.arange(0, span), np.arange(-span, 0)])
    vals = np.concatenate([corr[0:span], corr[nfft - span:]])
    i = int(np.argmax(vals))
    lag = float(lags[i])
    if 0 < i < len(vals) - 1 and lags[i - 1] == lags[i] - 1 and lags[i + 1] == lags[i] + 1:
        a, b, c = vals[i - 1], vals[i], vals[i + 1]
        den = a - 2 * b + c
        if den != 0:
            lag += 0.5 * (a - c) / den
    return (lag * chip_rate / fs) % len(bits)


if __name__ == "__main__":
    main()
    print("FAILED %d" % failed if failed else "all passed")
    sys.exit(1 if failed else 0)
