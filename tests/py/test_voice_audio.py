#!/usr/bin/python3
"""The voice channel's audio from a WAV file (docs/spec/carrier.md section 1: the voice is
sin(2 pi f_v t + 2 pi Delta integral_0^t a(u) du), a(t) of peak 1; docs/carrier.md).

A 16-bit mono WAV tone (f_a = 1234.5 Hz, amplitude 0.4, 11025 Hz: a rate that does not divide
the output's 96 kHz) written here with Python's wave module, shorter than the capture, is the
audio of the demo dictionary's voice channel (`audio: tone.wav`), copied with a voice-only
mode added.
 (a) `ulk modulate --carrier` of the voice-only mode against an independent numpy/scipy
     computation of the formula: a(t) = samples / peak, linear interpolation at i * f_in / fs
     (exact integer positions), silence after the end, scipy.integrate.cumulative_trapezoid;
     max |phase difference| < 5e-6 rad (measured 1.13e-06; over the file and the silent tail).
 (b) `ulk decode --voice` of the full mode (data, voice, ranging) recovers f_a within 2e-3 Hz
     (measured 4.2e-04).
 (c) --voice-audio overrides the section (a stereo WAV: refused without --voice-channel,
     with --voice-channel 1 equal to the mono capture); a silent WAV is refused, nothing
     written.
"""
import os
import subprocess
import sys
import tempfile
import wave

import numpy as np
from scipy.integrate import cumulative_trapezoid
from scipy.io import wavfile

ULK = os.environ.get("ULK", "ulk")
SRC = os.environ.get("ULK_SOURCE_DIR") or os.path.normpath(
    os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", ".."))
TMPROOT = os.environ.get("ULK_BINARY_DIR")
FS = 96000            # 2.5 x (f_v + Delta + 3400 Hz audio bandwidth) = 89.75 kHz
FIN = 11025
FA = 1234.5
FV, DEV, M_V = 28500, 4000, 0.9
failed = 0


TONE_TOL_HZ = 2e-3  # decoded voice tone frequency; measured error 4.2e-04 Hz

def check(ok, what, detail=""):
    global failed
    print(("ok   " if ok else "FAIL ") + what + ("" if ok else " " + detail))
    if not ok:
        failed += 1


def run(*args):
    p = subprocess.run([ULK] + [str(a) for a in args], capture_output=True, text=True)
    return p.returncode, p.stdout, p.stderr


def write_wav(path, chans, rate=FIN):
    """chans: list of int16 arrays, one per channel."""
    x = np.stack(chans, axis=1).astype("<i2")
    with wave.open(path, "wb") as w:
        w.setnchannels(len(chans))
        w.setsampwidth(2)
        w.setframerate(rate)
        w.writeframes(x.tobytes())


def reference(samples, n):
    """The voice-only capture from the formula, independently of ulk."""
    a_in = samples.astype(np.float64)
    a_in = np.concatenate([a_in / np.max(np.abs(a_in)), [0.0, 0.0]])   # silence after the end
    i = np.arange(n, dtype=np.int64)
    pos = i * FIN                       # position * FS, exact integers
    k = np.minimum(pos // FS, len(a_in) - 2)
    frac = (pos % FS) / FS
    frac[pos // FS > len(a_in) - 2] = 0.0
    a = a_in[k] + frac * (a_in[k + 1] - a_in[k])
    integral = cumulative_trapezoid(a, dx=1.0 / FS, initial=0.0)
    th = 2 * np.pi * ((i * FV) % FS) / FS + 2 * np.pi * DEV * integral
    return np.exp(1j * M_V * np.sin(th)), a


def tone_of(wav_path, t0, t1):
    """Strongest line between t0 and t1 s: Hann window, 8x zero padding, parabola on log |X|."""
    rate, a = wavfile.read(wav_path)
    a = np.asarray(a, dtype=np.float64)[int(t0 * rate):int(t1 * rate)]
    w = np.hanning(len(a))
    nn = 8 * len(a)
    X = np.abs(np.fft.rfft(a * w, nn))
    k = int(np.argmax(X[1:])) + 1
    l0, l1, l2 = np.log(X[k - 1:k + 2])
    return (k + 0.5 * (l0 - l2) / (l0 - 2 * l1 + l2)) * rate / nn, 2 * X[k] / np.sum(w)


def main():
    with tempfile.TemporaryDirectory(dir=TMPROOT) as tmp:
        with open(os.path.join(SRC, "dictionaries", "demo-subbit.yaml"), encoding="utf-8") as f:
            t = f.read()
        assert "    tone_hz: 1000" in t and "    full: {" in t, \
            "demo-subbit.yaml no longer has the tone_hz and full: lines this test edits"
        t = t.replace("    tone_hz: 1000", "    audio: tone.wav")
        t = t.replace("    full: {", "    speech: {voice: %g}\n    full: {" % M_V)
        dct = os.path.join(tmp, "d.yaml")
        with open(dct, "w", encoding="utf-8") as f:
            f.write(t)
        up = os.path.join(tmp, "u.upl")
        rc, out, err = run("compile", "--dict", dct, os.path.join(SRC, "dictionaries", "demo-subbit.cmd"), "-o", up)
        check(rc == 0, "compile with the audio dictionary", err)
        if rc:
            return 1
        # the tone lasts 1 s, shorter than the capture (silence after it)
        n_in = FIN
        tone = np.round(0.4 * 32767 * np.sin(2 * np.pi * FA * np.arange(n_in) / FIN)).astype(np.int16)
        write_wav(os.path.join(tmp, "tone.wav"), [tone])

        # (a) voice only, against the formula
        cap = os.path.join(tmp, "speech.cf32")
        rc, out, err = run("modulate", up, "--carrier", "--mode", "speech", "--dict", dct, "-o", cap, "--rate", FS)
        check(rc == 0, "modulate --carrier speech (voice from tone.wav)", err)
        x = np.fromfile(cap, dtype="<f4").astype(np.float64)
        x = x[0::2] + 1j * x[1::2]
        n = len(x)
        check(n > 1.3 * FS, "capture %.2f s outlasts the 1 s audio" % (n / FS))
        ref, a = reference(tone, n)
        check(abs(np.max(np.abs(a)) - 1) < 1e-3, "reference audio peak %.5f ~ 1" % np.max(np.abs(a)))
        d = np.abs(np.angle(x * np.conj(ref)))
        end = int(np.ceil(n_in * FS / FIN)) + 1
        # measured 1.13e-06 rad (float32 samples, phase accumulated in double); limit ~4x that
        check(np.max(d) < 5e-6, "phase vs numpy formula: max |diff| %.3g rad (limit 5e-6), over the audio %.3g, "
              "after its end %.3g" % (np.max(d), np.max(d[:end]), np.max(d[end:])))
        # the same check would fail for a rectangular-rule integral or an unnormalised audio
        alt = np.exp(1j * M_V * np.sin(2 * np.pi * ((np.arange(n) * FV) % FS) / FS +
                                        2 * np.pi * DEV * np.cumsum(a) / FS))
        check(np.max(np.abs(np.angle(x * np.conj(alt)))) > 1e-2, "a rectangular-rule integral differs (> 1e-2 rad)")

        # (b) full mode, decoded
        full = os.path.join(tmp, "full.cf32")
        rc, out, err = run("modulate", up, "--carrier", "--mode", "full", "--dict", dct, "-o", full, "--rate", FS)
        check(rc == 0, "modulate --carrier full", err)
        vw = os.path.join(tmp, "voice.wav")
        rc, out, err = run("decode", "--dict", dct, full, "--voice", vw)
        check(rc == 0, "decode --voice exit 0", err)
        if rc == 0:
            f, amp = tone_of(vw, 0.2, 0.95)
            check(abs(f - FA) < TONE_TOL_HZ, "decoded voice tone %.5f Hz, sent %.1f Hz, error %.2g Hz (limit %g Hz)"
                  % (f, FA, f - FA, TONE_TOL_HZ))
            # the file's 0.4 normalised to 1, times the linear interpolator's response at f_a,
            # sinc^2(f_a / f_in) (the interpolator is a triangle kernel; common practice)
            want = np.sinc(FA / FIN) ** 2
            check(abs(amp / want - 1) < 0.01, "decoded tone amplitude %.4f, expected %.4f = sinc^2(f_a/f_in) "
                  "(peak 1 after normalisation; limit 1 %%)" % (amp, want))
            rate, v = wavfile.read(vw)
            tail = np.asarray(v, dtype=np.float64)[int(1.1 * rate):int((n / FS - 0.05) * rate)]
            w = np.hanning(len(tail))
            at_fa = 2 * abs(np.sum(tail * w * np.exp(-2j * np.pi * FA * np.arange(len(tail)) / rate))) / np.sum(w)
            check(at_fa < 0.01, "after the audio's end: no tone (%.2g at f_a; silence after the end)" % at_fa)

        # (c) --voice-audio: stereo needs a channel; silent refused
        st = os.path.join(tmp, "stereo.wav")
        other = np.round(0.7 * 32767 * np.sin(2 * np.pi * 543.0 * np.arange(n_in) / FIN)).astype(np.int16)
        write_wav(st, [other, tone])
        o2 = os.path.join(tmp, "o2.cf32")
        rc, out, err = run("modulate", up, "--carrier", "--mode", "speech", "--dict", dct, "-o", o2, "--rate", FS,
                           "--voice-audio", st)
        check(rc != 0 and "stereo.wav" in err and not os.path.exists(o2),
              "two-channel audio without --voice-channel: refused, names the file, nothing written", err)
        rc, out, err = run("modulate", up, "--carrier", "--mode", "speech", "--dict", dct, "-o", o2, "--rate", FS,
                           "--voice-audio", st, "--voice-channel", 1)
        same = rc == 0 and np.array_equal(np.fromfile(o2, dtype="<f4"), np.fromfile(cap, dtype="<f4"))
        check(same, "--voice-audio stereo.wav --voice-channel 1 equals the section's mono tone.wav", err)
        rc, out, err = run("modulate", up, "--carrier", "--mode", "speech", "--dict", dct, "-o", o2, "--rate", FS,
                           "--voice-audio", st, "--voice-channel", 0)
        check(rc == 0 and not np.array_equal(np.fromfile(o2, dtype="<f4"), np.fromfile(cap, dtype="<f4")),
              "--voice-channel 0 takes the other channel", err)
        sil = os.path.join(tmp, "silent.wav")
        write_wav(sil, [np.zeros(1000, dtype=np.int16)])
        o3 = os.path.join(tmp, "o3.cf32")
        rc, out, err = run("modulate", up, "--carrier", "--mode", "speech", "--dict", dct, "-o", o3, "--rate", FS,
                           "--voice-audio", sil)
        check(rc != 0 and "silent" in err and not os.path.exists(o3), "silent audio refused, nothing written", err)
        rc, out, err = run("modulate", up, "--carrier", "--mode", "command", "--dict", dct, "-o", o3, "--rate", FS,
                           "--voice-audio", os.path.join(tmp, "tone.wav"))
        check(rc == 1 and not os.path.exists(o3), "--voice-audio in a mode without voice refused", err)
        # both tone and audio in the section
        bad = os.path.join(tmp, "bad.yaml")
        with open(bad, "w", encoding="utf-8") as f:
            f.write(t.replace("    audio: tone.wav", "    audio: tone.wav\n    tone_hz: 1000"))
        # the JSON Schema (python3-jsonschema) takes either key, not both
        import json
        import jsonschema
        import yaml
        with open(os.path.join(SRC, "dictionaries", "dictionary.schema.json"), encoding="utf-8") as f:
            sv = jsonschema.validators.validator_for(json.load(f))
        with open(os.path.join(SRC, "dictionaries", "dictionary.schema.json"), encoding="utf-8") as f:
            sv = sv(json.load(f))
        check(not list(sv.iter_errors(yaml.safe_load(t))), "schema accepts 'audio: tone.wav'")
        with open(bad, encoding="utf-8") as f:
            check(list(sv.iter_errors(yaml.safe_load(f))), "schema refuses tone_hz with audio")
        rc, out, err = run("validate", bad)
        check(rc != 0 and "not both" in out + err and "bad.yaml:53:" in out + err, "tone_hz and audio together refused",
              out + err)
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
