#!/usr/bin/python3
"""`ulk spectrum` against Debian's python3-scipy and python3-numpy:

- the whole Welch spectrum (--csv) of a real and of a complex capture against
  scipy.signal.welch with the same settings (periodic Hann window, nperseg = nfft, 50 %
  overlap, no detrending, scaling="spectrum": |X|^2 / (sum w)^2, one-sided for real data);
- the strongest line (--json) of a pure subcarrier capture (a sine at the demo dictionary's
  f_sc, written here as a WAV with a weaker second tone and noise) is at f_sc within half a
  bin, with the sine's power a^2/2 when f_sc is a bin centre;
- a complex tone at a negative frequency is found there (sign and ordering of the bins);
- the plot is a PNG, the dictionary's marks are listed, bad input is refused.
"""
import json
import os
import subprocess
import sys
import tempfile

import numpy as np
from scipy import signal
from scipy.io import wavfile

ULK = os.environ.get("ULK", "ulk")
SRC = os.environ.get("ULK_SOURCE_DIR") or os.path.normpath(
    os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", ".."))
TMPROOT = os.environ.get("ULK_BINARY_DIR")
DICT = os.path.join(SRC, "dictionaries", "demo-subbit.yaml")
F_SC = 10000.0  # the demo dictionary's link.subcarrier.frequency
failed = 0


def check(ok, what, detail=""):
    global failed
    print(("ok   " if ok else "FAIL ") + what + ("" if ok else " " + detail))
    if not ok:
        failed += 1


ENV = dict(os.environ)


def run(*args):
    p = subprocess.run([ULK] + [str(a) for a in args], capture_output=True, text=True, env=ENV)
    return p.returncode, p.stdout, p.stderr


def read_csv(path):
    d = np.loadtxt(path, delimiter=",", skiprows=1)
    return d[:, 0], d[:, 1]


def write_cf32(path, x, fs):
    v = np.empty(2 * len(x), dtype="<f4")
    v[0::2] = x.real
    v[1::2] = x.imag
    v.tofile(path)
    base = path[:-5]
    with open(base + ".sigmf-meta", "w", encoding="utf-8") as f:
        json.dump({"global": {"core:datatype": "cf32_le", "core:sample_rate": fs, "core:version": "1.0.0"},
                   "captures": [], "annotations": []}, f)


def main():
    rng = np.random.default_rng(20261202)
    with tempfile.TemporaryDirectory(dir=TMPROOT) as tmp:
        # Under LeakSanitizer, fontconfig's process-lifetime cache (reached through cairo's
        # text) is suppressed by library name, nothing else.
        supp = os.path.join(tmp, "lsan.supp")
        with open(supp, "w", encoding="utf-8") as f:
            f.write("leak:libfontconfig\n")
        ENV["LSAN_OPTIONS"] = "suppressions=" + supp
        # --- real: a pure subcarrier at f_sc (fs 40960 and nfft 4096 make 10 Hz bins, so f_sc is
        # bin 1000's centre), a weaker tone and noise ---
        fs = 40960
        n = fs * 4
        t = np.arange(n) / fs
        a = 0.6
        x = a * np.sin(2 * np.pi * F_SC * t) + 0.1 * np.sin(2 * np.pi * 3217.7 * t) + 0.01 * rng.standard_normal(n)
        wv = os.path.join(tmp, "sub.wav")
        wavfile.write(wv, fs, x.astype(np.float32))
        csv = os.path.join(tmp, "sub.csv")
        png = os.path.join(tmp, "sub.png")
        rc, out, err = run("spectrum", wv, "--nfft", 4096, "--csv", csv, "-o", png, "--dict", DICT, "--json")
        check(rc == 0, "spectrum of a real WAV", err)
        if rc == 0:
            s = json.loads(out)
            bin_hz = fs / 4096
            print("   real: strongest line %.3f Hz, %.3f dB (f_sc %.1f Hz, bin %.3f Hz)" % (s["peak_hz"], s["peak_db"],
                                                                                          F_SC, bin_hz))
            check(abs(s["peak_hz"] - F_SC) <= bin_hz / 2, "strongest line at f_sc within half a bin")
            want_db = 10 * np.log10(a * a / 2)
            check(abs(s["peak_db"] - want_db) <= 0.05, "its power a^2/2 within 0.05 dB",
                  "%.4f vs %.4f" % (s["peak_db"], want_db))
            check(not s["complex"] and s["segments"] == (n - 4096) // 2048 + 1, "real, segment count",
                  str(s["segments"]))
            labels = [m["label"] for m in s["marks"]]
            check("data" in labels and "voice" in labels and "ranging" in labels, "dictionary marks", str(labels))
            f, p = read_csv(csv)
            fr, pr = signal.welch(x.astype(np.float32).astype(np.float64), fs=fs, window="hann", nperseg=4096,
                                  noverlap=2048, detrend=False, scaling="spectrum", return_onesided=True)
            check(len(f) == len(fr) and np.allclose(f, fr), "real: same frequencies as scipy.signal.welch")
            if len(p) == len(pr):
                big = pr > 1e-9 * pr.max()
                rel = np.max(np.abs(p[big] - pr[big]) / pr[big])
                print("   real: worst relative difference to scipy.signal.welch %.2e" % rel)
                # measured 1.06e-05 (float32 input and FFT rounding); limit ~5x
                check(rel < 5e-5, "real: power matches scipy.signal.welch within 5e-5 (%.2e)" % rel)
            with open(png, "rb") as fh:
                check(fh.read(8) == b"\x89PNG\r\n\x1a\n", "the plot is a PNG")

        # --- complex: a tone at a negative frequency and the full spectrum against scipy ---
        fs2 = 96000
        n2 = 200000
        t2 = np.arange(n2) / fs2
        f_neg = -7321.3
        z = 0.8 * np.exp(2j * np.pi * f_neg * t2) + 0.2 * np.exp(2j * np.pi * 15000.0 * t2) + \
            0.005 * (rng.standard_normal(n2) + 1j * rng.standard_normal(n2))
        cf = os.path.join(tmp, "tone.cf32")
        write_cf32(cf, z, fs2)
        csv2 = os.path.join(tmp, "tone.csv")
        rc, out, err = run("spectrum", cf, "--nfft", 8192, "--csv", csv2, "--json")
        check(rc == 0, "spectrum of a complex .cf32", err)
        if rc == 0:
            s = json.loads(out)
            print("   complex: strongest line %.3f Hz (tone at %.1f Hz)" % (s["peak_hz"], f_neg))
            check(s["complex"], "complex capture recognised")
            check(abs(s["peak_hz"] - f_neg) <= fs2 / 8192 / 2, "negative-frequency tone found there")
            f, p = read_csv(csv2)
            zz = z.astype(np.complex64).astype(np.complex128)
            fr, pr = signal.welch(zz, fs=fs2, window="hann", nperseg=8192, noverlap=4096, detrend=False,
                                  scaling="spectrum", return_onesided=False)
            fr, pr = np.fft.fftshift(fr), np.fft.fftshift(pr)
            check(len(f) == len(fr) and np.allclose(f, fr), "complex: same frequencies as scipy (fftshifted)")
            if len(p) == len(pr):
                big = pr > 1e-9 * pr.max()
                rel = np.max(np.abs(p[big] - pr[big]) / pr[big])
                print("   complex: worst relative difference to scipy.signal.welch %.2e" % rel)
                # measured 9.24e-05 (float32 input and FFT rounding, deep bins); limit ~3x
                check(rel < 3e-4, "complex: power matches scipy.signal.welch within 3e-4 (%.2e)" % rel)

        # --- NaN and infinite samples: counted, taken as 0, the rest of the spectrum kept ---
        xn = (0.5 * np.sin(2 * np.pi * 2500.0 * np.arange(20000) / 8000)).astype(np.float32)
        xn[100], xn[200] = np.nan, np.inf
        nw = os.path.join(tmp, "nan.wav")
        wavfile.write(nw, 8000, xn)
        rc, out, err = run("spectrum", nw, "--nfft", 1024, "--json")
        s = json.loads(out) if rc == 0 else {}
        check(rc == 0 and s.get("non_finite_values") == 2 and "not finite" in err, "non-finite samples counted", err)
        check(rc == 0 and abs(s["peak_hz"] - 2500.0) <= 8000 / 1024 / 2, "tone still found beside NaN samples")

        # --- refusals ---
        rc, _, err = run("spectrum", wv, "--nfft", 1000)
        check(rc == 2, "nfft not a power of two refused", err)
        rc, _, err = run("spectrum", os.path.join(tmp, "missing.wav"))
        check(rc == 2 and "missing.wav" in err, "missing capture refused, named", err)
        short = os.path.join(tmp, "short.wav")
        wavfile.write(short, fs, np.zeros(100, dtype=np.float32))
        rc, _, err = run("spectrum", short, "--nfft", 4096, "-o", os.path.join(tmp, "short.png"))
        check(rc == 1 and not os.path.exists(os.path.join(tmp, "short.png")), "too short for a segment: refused, no plot",
              err)


if __name__ == "__main__":
    main()
    print("FAILED %d" % failed if failed else "all passed")
    sys.exit(1 if failed else 0)
