#!/usr/bin/python3
"""Complex captures at the edge of the envelope, from the independent numpy generator
(gen_capture.make_complex_capture, written from docs/spec/carrier.md section 1 and
docs/spec/subbit.md section 4, not from the C code), decoded by `ulk decode`: 192 kHz (the
receiver decimates before the carrier recovery, and the loop runs in blocks; one row at
48 kHz), clock error +-1000 ppm, no lead-in (the transmission starts at the first sample, or
after 0.05 s of noise as in bench_envelope's composite cells), the carrier starting at half a
cycle, and a start that falls between the decimator's output samples. E_b/N_0 12 dB, data-only
mode "command" (index 1.1 rad).

Every row: all 21 words of the demo list accepted, nothing else accepted, each start time within
one sample of the truth (the decimator's delay is removed exactly).
"""
import os
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
import gen_capture as gc  # noqa: E402
import test_envelope_lead as tl  # noqa: E402  (decode, match, word times: the same helpers)

# The half-cycle rows failed before the coarse acquisition measured the line's phase: the loop
# started at phase 0 whatever the carrier's, so a carrier at phase pi put it at the phase
# detector's unstable point and the first word (0.032 s after the start) was lost, at every
# rate (20 of 21 words at 192, 96 and 48 kHz).
ROWS = [
    # (what, rate, ppm, delay_s, offset_hz, phase_rad, seed)
    ("-1000 ppm, no lead-in, +1234.5 Hz", 192000, "-1000", "0", 1234.5, 0.4, 21),
    ("-1000 ppm, 0.05 s of noise first, +1234.5 Hz", 192000, "-1000", "0.05", 1234.5, 0.4, 22),
    ("+1000 ppm, no lead-in, +4700 Hz", 192000, "1000", "0", 4700.0, -1.3, 23),
    ("-1000 ppm, no lead-in, carrier from half a cycle (phase pi), -2718.3 Hz", 192000, "-1000", "0", -2718.3,
     3.14159265, 24),
    ("+1000 ppm, no lead-in, carrier at phase -3.1, +1234.5 Hz", 192000, "1000", "0", 1234.5, -3.1, 26),
    ("+1000 ppm, no lead-in, carrier from half a cycle, -2718.3 Hz", 48000, "1000", "0", -2718.3, 3.14159265, 27),
    ("-1000 ppm, start 7 samples in (between decimated outputs), -300 Hz", 192000, "-1000", "0.000036458333", -300.0,
     1.0, 25),
]


def main():
    if not tl.ULK:
        print("ULK is not set")
        return 1
    d = tl.ref.load_dictionary(tl.DSUB)
    st = tl.subbit_words(d)
    tol = 0.5 / float(d.link.subbit_rate)
    with tempfile.TemporaryDirectory() as tmp:
        for what, fs, ppm, delay, fo, ph, seed in ROWS:
            x, _, fse = gc.make_complex_capture(d.link, st.subbits, fs, 1.1, ebn0_db=12, ppm=ppm, delay_s=delay,
                                                tail_s="0.3", offset_hz=fo, phase_rad=ph, seed=seed)
            cap = os.path.join(tmp, "edge.cf32")
            gc.write_cf32(cap, x, fs, mode="command")
            rc, j, err = tl.decode(tl.DSUB, cap)
            truth = tl.word_times(d, st, float(delay), fse, fs)
            good, other = tl.match(j["words"], truth, tol)
            tl.check(rc == 0 and good == 21 and other == 0,
                     "%g kHz, %s: %d of 21 words accepted, %d other (rc %d %s)" % (fs / 1000, what, good, other, rc,
                                                                                 err.strip()[:200]))
            off = [min(abs(w["start_s"] - t) for t, _ in truth) for w in j["words"] if w.get("status") == "accepted"]
            tl.check(off and max(off) < 1.0 / fs,
                     "%g kHz, %s: start times within one sample (largest %.1f us)"
                     % (fs / 1000, what, 1e6 * max(off) if off else -1))
    print("%d failures" % len(tl.failures))
    return 1 if tl.failures else 0


if __name__ == "__main__":
    sys.exit(main())
