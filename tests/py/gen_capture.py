#!/usr/bin/python3
"""gen_capture - impaired captures for the decoder's tests, made independently of the C tool.

The clean signal comes from the Python reference (ref_subbit.py), regenerated from the
contract (docs/spec/subbit.md section 4) rather than interpolated, so every impairment is
exact and known:

  clock error  contract time advances as tau_i = (i - i0) / (f_s (1 + ppm 1e-6)): the
               waveform is evaluated at the offset rate (exact rational phases);
  delay        i0 = delay_s * f_s samples (any exact decimal, fractional samples included)
               of noise only before the signal; tail_s of noise only after it;
  scale        amplitude factor on the signal (pilot included);
  polarity     invert multiplies the signal by -1 (a 180 degree phase ambiguity);
  noise        white Gaussian, sigma from E_b/N_0 by section 5 of the contract:
               E_b/N_0 = P_d f_s / (2 sigma^2 R_b), P_d = (g A)^2 / 2 for a sine subcarrier,
               (g A)^2 for a square one (g the scale; the pilot's power is not counted);
  DC offset    added last.

Seeded (numpy.random.default_rng(seed)), so a test reproduces its capture exactly.

Module use:
    import gen_capture as gc
    x, truth = gc.make_capture(d, items, 48000, ebn0_db=12, ppm=50, delay_s="0.1234", seed=7)
    gc.write_capture("cap.wav", x, 48000)     # .wav (16-bit PCM), .f32 or .s16 (raw LE)

CLI:
    gen_capture.py DICT LIST --rate FS -o OUT.{wav,f32,s16} [--ebn0-db X] [--ppm P]
        [--delay-s D] [--tail-s T] [--scale G] [--dc C] [--invert] [--seed N]
        [--lead-rms R] [--truth TRUTH.json]
The truth file records what a decoder should find: every word's hex and its start time in
the capture, the parameters and the noise sigma.

Envelope captures (module use only):
    make_bits_capture(link, subbits, fs, ...)   any link (sub-bit or a CCSDS channel-bit link,
                                                TcLink) from a given sub-bit/channel-bit list,
                                                real; long lead-ins, exact clock error
    ccsds_stream(upload_json)                   the channel bits of a ccsds-tc upload rebuilt
                                                from the standards (test_ccsds_pipeline.py)
                                                and where each CLTU starts
    make_complex_capture(link, subbits, fs, m_rad, ...)
                                                the composite carrier's complex baseband with the
                                                data channel only: x = exp(j m u(t)) with u the
                                                data signal over its peak, a carrier offset and
                                                phase, complex noise of the stated E_b/N_0 with
                                                P_d from Bessel functions (scipy), noise only in
                                                the lead-in; transmissions may be concatenated
    write_cf32(path, x, fs, mode)               .cf32 with its .sigmf-meta (complex, the mode)
"""
import argparse
import json
import math
import os
import sys
import wave
from fractions import Fraction

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import ref_subbit as ref  # noqa: E402


def data_power(link, scale=1.0):
    """P_d of section 5 for data amplitude g A: (gA)^2/2 (sine) or (gA)^2 (square)."""
    a2 = (scale * link.amplitude) ** 2
    return a2 / 2 if link.waveform == "sine" else a2


def sigma_for_ebn0(link, fs, ebn0_db, scale=1.0):
    """Per-sample noise sigma giving E_b/N_0 = ebn0_db at sample rate fs (section 5)."""
    # E_b/N_0 = P_d f_s / (2 sigma^2 R_b): common practice: real samples at rate f_s carry a two-sided density N_0/2 over f_s, so
    # sigma^2 = N_0 f_s / 2 and E_b = P_d / R_b (e.g. Proakis, Digital Communications, 4th ed.,
    # chapter 5, from memory; docs/spec/subbit.md section 5)
    ebn0 = 10.0 ** (ebn0_db / 10.0)
    return math.sqrt(data_power(link, scale) * float(fs) / (2.0 * ebn0 * float(link.bit_rate)))


def ebn0_db_for_sigma(link, fs, sigma, scale=1.0):
    """Inverse of sigma_for_ebn0."""
    return 10 * math.log10(data_power(link, scale) * float(fs) / (2 * sigma ** 2 * float(link.bit_rate)))


def make_capture(d, items, fs, ebn0_db=None, ppm=0, delay_s=0, tail_s=0, scale=1.0, dc=0.0,
                 invert=False, seed=0, lead_rms=None, stream=None):
    """Impaired capture of command list items (parsed by ref.parse_command_list) for
    Dictionary d at sample rate fs. ppm, delay_s and tail_s are taken exactly (pass decimal
    strings to keep them exact). Returns (x float64 array, truth dict)."""
    fs = Fraction(fs)
    link = d.link
    st = stream if stream is not None else ref.build_stream(d, items)
    eps = Fraction(str(ppm)) / 10 ** 6
    fs_eff = fs * (1 + eps)                         # tau_i = (i - i0) / fs_eff
    i0 = Fraction(str(delay_s)) * fs
    dur_contract = Fraction(len(st.subbits)) / link.subbit_rate
    end = i0 + dur_contract * fs_eff                # sample position where the stream ends
    count = ref._ceil(end + Fraction(str(tail_s)) * fs)
    # capture time t = i / fs; contract time tau = (t - delay) / (1 + eps) = (i - i0) / fs_eff
    clean = ref.samples(link, st.subbits, fs_eff, count=count, i0=i0, gate=True)
    g = -scale if invert else scale
    x = g * clean
    rng = np.random.default_rng(seed)
    sigma = 0.0 if ebn0_db is None else sigma_for_ebn0(link, fs, ebn0_db, scale)
    if sigma > 0:
        x = x + rng.normal(0.0, sigma, count)
    first = ref._ceil(i0)
    if lead_rms is not None and lead_rms > 0 and sigma == 0:
        # noise-only lead and tail even when the signal itself is clean
        outside = np.ones(count, dtype=bool)
        outside[first:ref._ceil(end)] = False
        x[outside] += rng.normal(0.0, lead_rms, int(outside.sum()))
    x = x + dc
    words = []
    for k, w in enumerate(st.words):
        j0 = int(np.argmax(st.word == k + 1))   # first sub-bit of word k+1
        t_start = Fraction(str(delay_s)) + Fraction(j0) / link.subbit_rate * (1 + eps)
        words.append({"mnemonic": w.mnemonic, "hex": w.hex, "line": w.line,
                      "start_s": float(t_start)})
    truth = {
        "fs_hz": float(fs), "ppm": float(eps * 10 ** 6), "delay_s": float(Fraction(str(delay_s))),
        "tail_s": float(Fraction(str(tail_s))), "scale": scale, "invert": bool(invert), "dc": dc,
        "ebn0_db": ebn0_db, "sigma": sigma, "seed": seed, "n_samples": int(count),
        "first_signal_sample": int(first), "signal_end_sample": float(end),
        "n_subbits": int(len(st.subbits)), "words": words,
    }
    return x, truth


class TcLink:
    """The channel-bit link of a ccsds-tc dictionary as ref_subbit.samples() needs it: one
    symbol per channel bit (R_s = R)."""

    def __init__(self, bit_rate, fsc, waveform="sine", amplitude=1.0, line_code="nrz-l"):
        self.bit_rate = Fraction(bit_rate)
        self.subbit_rate = Fraction(bit_rate)
        self.fsc = Fraction(fsc)
        self.waveform = waveform
        self.amplitude = amplitude
        self.line_code = line_code
        self.has_pilot = False


def make_bits_capture(link, subbits, fs, ebn0_db=None, ppm=0, delay_s=0, tail_s=0, invert=False, seed=0,
                      rng=None):
    """Real capture of the given sub-bits (or channel bits) for link: clock error ppm and
    delay_s exact, noise from E_b/N_0 (section 5, P_d of the link's amplitude). Returns
    (x, first_sample, fs_eff) with fs_eff = fs (1 + ppm 1e-6): as in make_capture, contract
    time is (i - i0) / fs_eff, so sub-bit j starts at delay_s + j (1 + eps) / R_s seconds."""
    fs = Fraction(fs)
    eps = Fraction(str(ppm)) / 10 ** 6
    fs_eff = fs * (1 + eps)
    i0 = Fraction(str(delay_s)) * fs
    end = i0 + Fraction(len(subbits)) / link.subbit_rate * fs_eff
    count = ref._ceil(end + Fraction(str(tail_s)) * fs)
    x = ref.samples(link, subbits, fs_eff, count=count, i0=i0, gate=True)
    if invert:
        x = -x
    rng = rng if rng is not None else np.random.default_rng(seed)
    if ebn0_db is not None:
        x = x + rng.normal(0.0, sigma_for_ebn0(link, fs, ebn0_db), count)
    return x, ref._ceil(i0), fs_eff


def ccsds_stream(upload_json):
    """(channel bits, [(bit index of the CLTU's start, unit)]) of a ccsds-tc upload (the parsed
    upload JSON), rebuilt independently from the standards by tests/py/test_ccsds_pipeline.py;
    unit = (packet count, N(S), frame octets, CLTU octets)."""
    import test_ccsds_pipeline as tcp
    rows, units = tcp.expected_stream(upload_json, None)
    bits = np.array([r[3] for r in rows], dtype=np.int64)
    starts = [j for j, r in enumerate(rows) if r[0] > 0 and r[1] == 0]
    return bits, list(zip(starts, units))


def data_power_fraction(m_rad, waveform):
    """Useful power of a data channel alone on the carrier, P_d / P_T: the first-order lines of
    exp(j m d sin(w t)) carry 2 J1(m)^2 (Jacobi-Anger expansion; Abramowitz and Stegun 9.1.42
    and 9.1.5, from memory), a binary (square) one sin(m)^2 (exp(j m d s) = cos m + j d s sin m)."""
    from scipy.special import j1
    return 2 * j1(m_rad) ** 2 if waveform == "sine" else math.sin(m_rad) ** 2


def make_complex_capture(link, subbits, fs, m_rad, ebn0_db=None, ppm=0, delay_s=0, tail_s=0, offset_hz=0,
                         phase_rad=0.0, seed=0, rng=None):
    """Complex baseband of the composite carrier with only the data channel on (index m_rad):
    x = exp(j (m u + 2 pi f_o t + phase)) while the transmitter is on, 0 before and after, plus
    complex noise of total variance sigma^2 = P_d f_s / (R_b E_b/N_0) (half in I, half in Q),
    u = s / A the data signal over its peak. Returns (x complex128, first_sample, fs_eff)."""
    fs = Fraction(fs)
    eps = Fraction(str(ppm)) / 10 ** 6
    fs_eff = fs * (1 + eps)
    i0 = Fraction(str(delay_s)) * fs
    end = i0 + Fraction(len(subbits)) / link.subbit_rate * fs_eff
    count = ref._ceil(end + Fraction(str(tail_s)) * fs)
    u = ref.samples(link, subbits, fs_eff, count=count, i0=i0, gate=True) / link.amplitude
    i = np.arange(count)
    on = (i >= ref._ceil(i0)) & (i < ref._ceil(end))
    ph = m_rad * u + 2 * np.pi * ((offset_hz * i / float(fs)) % 1.0) + phase_rad
    x = np.where(on, np.exp(1j * ph), 0)
    rng = rng if rng is not None else np.random.default_rng(seed)
    if ebn0_db is not None:
        pd = data_power_fraction(m_rad, link.waveform)
        s2 = pd * float(fs) / (float(link.bit_rate) * 10 ** (ebn0_db / 10))
        x = x + rng.normal(0, math.sqrt(s2 / 2), count) + 1j * rng.normal(0, math.sqrt(s2 / 2), count)
    return x, ref._ceil(i0), fs_eff


def write_cf32(path, x, fs, mode=None):
    """Interleaved little-endian float32 I, Q and a SigMF metadata file beside it
    (core:datatype cf32_le, the sample rate, and ulk:carrier.mode when given)."""
    x = np.asarray(x)
    iq = np.empty(2 * len(x), dtype="<f4")
    iq[0::2] = x.real
    iq[1::2] = x.imag
    base = path[:-5] if path.endswith(".cf32") else path
    tmp = path + ".part"
    with open(tmp, "wb") as f:
        f.write(iq.tobytes())
    os.replace(tmp, path)
    glob = {"core:datatype": "cf32_le", "core:sample_rate": float(fs), "core:version": "1.0.0"}
    if mode:
        glob["ulk:carrier"] = {"mode": mode}
    with open(base + ".sigmf-meta", "w") as f:
        json.dump({"global": glob, "captures": [{"core:sample_start": 0}], "annotations": []}, f)


def write_capture(path, x, fs, fmt=None):
    """Writes x: '.wav' as 16-bit PCM mono (standard library wave), '.s16' / '.f32' raw
    little-endian (fmt overrides the extension for raw). Values beyond +-1 are clipped in
    16-bit output; returns the number of clipped samples. Written to a temporary name and
    renamed, so a failed run leaves no partial file."""
    x = np.asarray(x, dtype=np.float64)
    ext = os.path.splitext(path)[1].lower()
    kind = fmt or {".wav": "wav", ".s16": "s16", ".f32": "f32"}.get(ext, "f32")
    clipped = int(np.count_nonzero(np.abs(x) > 1.0)) if kind in ("wav", "s16") else 0
    tmp = path + ".part"
    if kind == "f32":
        with open(tmp, "wb") as f:
            f.write(np.asarray(x, dtype="<f4").tobytes())
    else:
        pcm = ref.to_s16(np.clip(x, -1.0, 1.0)).tobytes()
        if kind == "s16":
            with open(tmp, "wb") as f:
                f.write(pcm)
        else:
            fsr = Fraction(fs)
            if fsr.denominator != 1:
                raise ValueError("a WAV file needs a whole sample rate, not %s" % fs)
            with wave.open(tmp, "wb") as w:
                w.setnchannels(1)
                w.setsampwidth(2)
                w.setframerate(int(fsr))
                w.writeframes(pcm)
    os.replace(tmp, path)
    return clipped


def main(argv=None):
    ap = argparse.ArgumentParser(prog="gen_capture.py", description=__doc__.split("\n")[0])
    ap.add_argument("dict")
    ap.add_argument("list")
    ap.add_argument("--rate", required=True, help="capture sample rate f_s, Hz")
    ap.add_argument("-o", required=True, help="output .wav (16-bit), .f32 or .s16")
    ap.add_argument("--format", choices=["f32", "s16", "wav"])
    ap.add_argument("--ebn0-db", type=float, help="E_b/N_0 in dB (no noise when absent)")
    ap.add_argument("--ppm", default="0", help="clock error, ppm (exact decimal)")
    ap.add_argument("--delay-s", default="0", help="noise-only lead, seconds (exact decimal)")
    ap.add_argument("--tail-s", default="0", help="noise-only tail, seconds")
    ap.add_argument("--scale", type=float, default=1.0, help="amplitude factor")
    ap.add_argument("--dc", type=float, default=0.0, help="DC offset added last")
    ap.add_argument("--invert", action="store_true", help="polarity flip")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--lead-rms", type=float, help="noise rms in lead/tail when --ebn0-db is absent")
    ap.add_argument("--normalize", action="store_true",
                    help="scale the whole capture to a peak of 0.99 when it would clip "
                         "(a common gain leaves E_b/N_0 unchanged)")
    ap.add_argument("--truth", help="write the truth JSON here")
    a = ap.parse_args(argv)
    try:
        fs = Fraction(a.rate)
        for name in ("ppm", "delay_s", "tail_s"):
            Fraction(getattr(a, name))
        if fs <= 0:
            raise ValueError("--rate must be positive")
    except (ValueError, ZeroDivisionError) as e:
        print("gen_capture: bad number: %s" % e, file=sys.stderr)
        return 2
    try:
        d = ref.load_dictionary(a.dict)
        with open(a.list, encoding="utf-8") as f:
            items = ref.parse_command_list(d, f.read(), a.list)
        x, truth = make_capture(d, items, fs, a.ebn0_db, a.ppm, a.delay_s, a.tail_s, a.scale,
                                a.dc, a.invert, a.seed, a.lead_rms)
        peak = float(np.max(np.abs(x))) if len(x) else 0.0
        truth["output_gain"] = 1.0
        if a.normalize and peak > 1.0:
            truth["output_gain"] = 0.99 / peak
            x = x * truth["output_gain"]
        clipped = write_capture(a.o, x, fs, a.format)
    except (ref.RefError, OSError, ValueError) as e:
        print("gen_capture: %s" % e, file=sys.stderr)
        return 1
    if clipped:
        print("gen_capture: warning: %d samples clipped to full scale" % clipped, file=sys.stderr)
    truth["clipped"] = clipped
    if a.truth:
        with open(a.truth, "w") as f:
            json.dump(truth, f, indent=1)
    return 0


if __name__ == "__main__":
    sys.exit(main())
