#!/usr/bin/python3
"""bench_mod_ref - a vectorised numpy reference of the modulator (docs/spec/subbit.md section 4),
timed, for tests/bench/bench_mod.c (which runs it and prints the ratio).

    bench_mod_ref.py --subbits FILE --rs R_S --fs F_S --fsc F_SC --wave sine|square --amp A
                     [--line nrz-l|nrz-m] [--fp F_P --ap A_P] [--head FILE.f32] [--chunk N]

FILE holds one byte (0/1) per sub-bit. The waveform is generated in chunks of N samples the
way one would write it in numpy: exact integer sub-bit index and phases on the sample index
(rates as fractions.Fraction), float64 sine, float32 result. Prints
`ref_msps X cpu_msps C maxdiff Y` (wall-clock and per CPU-second), where Y compares the first samples with --head (ulk's output).
"""
import argparse
import math
import time
from fractions import Fraction

import numpy as np


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--subbits", required=True)
    ap.add_argument("--head")
    ap.add_argument("--rs", required=True)
    ap.add_argument("--fs", required=True)
    ap.add_argument("--fsc", required=True)
    ap.add_argument("--wave", default="sine")
    ap.add_argument("--amp", type=float, required=True)
    ap.add_argument("--line", default="nrz-l")
    ap.add_argument("--fp")
    ap.add_argument("--ap", type=float, default=0.0)
    ap.add_argument("--chunk", type=int, default=1 << 20)
    a = ap.parse_args()

    sb = np.fromfile(a.subbits, dtype=np.uint8)
    fs, rs = Fraction(a.fs), Fraction(a.rs)
    t0, c0 = time.perf_counter(), time.process_time()
    if a.line == "nrz-m":   # d_{-1} = +1; a 1 flips the level
        lv = np.where(np.cumsum(sb, dtype=np.int64) % 2 == 1, -1.0, 1.0)
    else:
        lv = np.where(sb == 1, 1.0, -1.0)
    lv *= a.amp
    n = math.ceil(len(sb) * fs / rs)
    q = rs / fs
    pc = Fraction(a.fsc) / fs
    pp = Fraction(a.fp) / fs if a.fp else None
    out = np.empty(a.chunk, dtype=np.float32)
    head = None
    for i0 in range(0, n, a.chunk):
        i = np.arange(i0, min(n, i0 + a.chunk), dtype=np.int64)
        j = (i * q.numerator) // q.denominator
        r = (i * pc.numerator) % pc.denominator
        if a.wave == "square":
            c = np.where(2 * r < pc.denominator, 1.0, -1.0)
        else:
            c = np.sin((2 * np.pi / pc.denominator) * r)
        s = lv[j] * c
        if pp is not None:
            rp = (i * pp.numerator) % pp.denominator
            s += a.ap * np.sin((2 * np.pi / pp.denominator) * rp)
        m = len(i)
        out[:m] = s
        if head is None:
            head = out[:m].copy()
    dt, dc = time.perf_counter() - t0, time.process_time() - c0
    maxdiff = -1.0
    if a.head:
        h = np.fromfile(a.head, dtype="<f4")
        k = min(len(h), len(head))
        maxdiff = float(np.max(np.abs(h[:k].astype(np.float64) - head[:k].astype(np.float64))))
    print(f"ref_msps {n / dt / 1e6:.3f} cpu_msps {n / dc / 1e6:.3f} maxdiff {maxdiff:.3e}")


if __name__ == "__main__":
    main()
