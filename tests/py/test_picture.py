#!/usr/bin/python3
"""The pictures' palette and formats, checked outside the C code with Debian's numpy.

- Palette: the colours ulk draws with (read back from an SVG picture of `ulk plan`) are the
  six of src/picture.h -- OKLCH hue 25 + 60 k degrees, chroma 0.12, lightness cycling 0.75,
  0.60, 0.40 -- converted here independently: OKLab by the forward matrices of B. Ottosson,
  "A perceptual color space for image processing" (2020), inverted with numpy (the C code
  carries the published inverse), and the sRGB transfer function of IEC 61966-2-1.
- Colour-blind readers: every pair of the six stays at least 0.10 apart in OKLab (0.119
  measured when the palette was chosen) for normal vision and under simulated protanopia,
  deuteranopia and tritanopia, severity 1, by the matrices of G. M. Machado, M. M. Oliveira
  and L. A. F. Fernandes, "A Physiologically-based Model for Simulation of Color Vision
  Deficiency", IEEE TVCG 15(6), 2009 (values from memory), applied in linear sRGB.
- None of the colours of two well-known default colour cycles of other software (values from
  memory) is drawn or written in the picture code.
- Formats: .png gives a PNG, .svg an SVG (for plan, spectrum and decode), an upper-case
  extension is accepted, and any other name is refused (exit 2) before any work, with no file.
"""
import itertools
import os
import re
import subprocess
import sys
import tempfile
import xml.etree.ElementTree as ET

import numpy as np

ULK = os.environ.get("ULK", "ulk")
SRC = os.environ.get("ULK_SOURCE_DIR") or os.path.normpath(
    os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", ".."))
TMPROOT = os.environ.get("ULK_BINARY_DIR")
DICT = os.path.join(SRC, "dictionaries", "demo-subbit.yaml")
failed = 0


def check(ok, what, detail=""):
    global failed
    print(("ok   " if ok else "FAIL ") + what + ("" if ok else " " + detail))
    if not ok:
        failed += 1


# Under LeakSanitizer, fontconfig's process-lifetime cache (reached through cairo's text) is
# suppressed by library name, nothing else (as in test_carrier_scipy.py and test_spectrum.py).
SUPP = None


def run(*args):
    env = dict(os.environ)
    if SUPP:
        env["LSAN_OPTIONS"] = "suppressions=" + SUPP
    p = subprocess.run([ULK] + [str(a) for a in args], capture_output=True, text=True, env=env)
    return p.returncode, p.stdout, p.stderr


# OKLab forward matrices (Ottosson 2020): linear sRGB -> LMS, cube root, -> Lab.
M1 = np.array([[0.4122214708, 0.5363325363, 0.0514459929],
               [0.2119034982, 0.6806995451, 0.1073969566],
               [0.0883024619, 0.2817188376, 0.6299787005]])
M2 = np.array([[0.2104542553, 0.7936177850, -0.0040720468],
               [1.9779984951, -2.4285922050, 0.4505937099],
               [0.0259040371, 0.7827717662, -0.8086757660]])


def oklab_from_linear(rgb):
    return M2 @ np.cbrt(M1 @ rgb)


def linear_from_oklab(lab):
    return np.linalg.solve(M1, np.linalg.solve(M2, lab) ** 3)


def encode(c):  # IEC 61966-2-1
    c = np.clip(c, 0, 1)
    return np.where(c <= 0.0031308, 12.92 * c, 1.055 * c ** (1 / 2.4) - 0.055)


def decode(c):
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def palette():
    out = []
    for k in range(6):
        h = np.radians(25 + 60 * k)
        lab = np.array([(0.75, 0.60, 0.40)[k % 3], 0.12 * np.cos(h), 0.12 * np.sin(h)])
        lin = linear_from_oklab(lab)
        check(np.all(lin >= -1e-9) and np.all(lin <= 1 + 1e-9), "palette colour %d is inside sRGB" % k, str(lin))
        out.append(encode(lin))
    return np.array(out)


# Machado et al. 2009, severity 1.0 (from memory).
CVD = {
    "protanopia": np.array([[0.152286, 1.052583, -0.204868], [0.114503, 0.786281, 0.099216],
                            [-0.003882, -0.048116, 1.051998]]),
    "deuteranopia": np.array([[0.367322, 0.860646, -0.227968], [0.280085, 0.672501, 0.047413],
                              [-0.011820, 0.042940, 0.968881]]),
    "tritanopia": np.array([[1.255528, -0.076749, -0.178779], [-0.078411, 0.930809, 0.147602],
                            [0.004733, 0.691367, 0.303900]]),
    "normal vision": np.eye(3),
}

# Two default colour cycles of other software (from memory), as 0..1 triples to 2 decimals.
FOREIGN = [(0.12, 0.47, 0.71), (1.00, 0.50, 0.05), (0.17, 0.63, 0.17), (0.84, 0.15, 0.16), (0.58, 0.40, 0.74),
           (0.00, 0.45, 0.74), (0.85, 0.33, 0.10), (0.93, 0.69, 0.13), (0.49, 0.18, 0.56), (0.47, 0.67, 0.19),
           (0.30, 0.75, 0.93)]


def svg_colours(path):
    text = open(path, encoding="utf-8").read()
    cols = set()
    for m in re.finditer(r"rgb\(([\d.]+)%,\s*([\d.]+)%,\s*([\d.]+)%\)", text):
        cols.add(tuple(round(float(v) / 100, 6) for v in m.groups()))
    return cols


def main():
    pal = palette()
    # colour-blind separation
    worst = 9.0
    for name, M in CVD.items():
        labs = [oklab_from_linear(np.clip(M @ decode(c), 0, 1)) for c in pal]
        d = min(np.linalg.norm(a - b) for a, b in itertools.combinations(labs, 2))
        check(d >= 0.10, "%s: closest pair of the six colours %.3f apart in OKLab (>= 0.10)" % (name, d))
        worst = min(worst, d)
    print("smallest OKLab distance over the four simulations: %.4f" % worst)

    global SUPP
    with tempfile.TemporaryDirectory(dir=TMPROOT) as tmp:
        SUPP = os.path.join(tmp, "lsan.supp")
        with open(SUPP, "w") as f:
            f.write("leak:libfontconfig\n")
        svg = os.path.join(tmp, "plan.svg")
        rc, out, err = run("plan", DICT, "--mode", "full", "--plot", svg, "-q")
        check(rc == 0, "plan --plot plan.svg", err)
        check(ET.parse(svg).getroot().tag.endswith("svg"), ".svg gives SVG")
        cols = [c for c in svg_colours(svg) if not (c[0] == c[1] == c[2])]  # greys: grid, text
        for c in cols:
            d = np.min(np.max(np.abs(pal - np.array(c)), axis=1))
            check(d < 0.005, "colour %s drawn is one of the palette (off by %.4f)" % (c, d))
        check(len(cols) >= 4, "the plan picture uses at least four palette colours (%d)" % len(cols))
        for c in cols:
            for f in FOREIGN:
                check(max(abs(a - b) for a, b in zip(c, f)) > 0.02, "colour %s is not a default cycle's %s" % (c, f))
        # the picture code carries no default cycle either
        for name in ("io/picture.c", "io/plot.c", "io/carrier_plot.c", "dsp/spectrum.c"):
            text = open(os.path.join(SRC, "src", name), encoding="utf-8").read()
            nums = re.findall(r"\{\s*([01]\.\d+)\s*,\s*([01]\.\d+)\s*,\s*([01]\.\d+)\s*\}", text)
            bad = [t for t in nums if tuple(round(float(v), 2) for v in t) in FOREIGN]
            check(not bad, "src/%s holds no default-cycle colour" % name, str(bad))

        png = os.path.join(tmp, "plan.PNG")
        rc, out, err = run("plan", DICT, "--plot", png, "-q")
        check(rc == 0 and open(png, "rb").read(8) == b"\x89PNG\r\n\x1a\n", ".PNG (upper case) gives PNG", err)
        for bad in ("plan.txt", "plan", "plan.svg.gz"):
            p = os.path.join(tmp, bad)
            rc, out, err = run("plan", DICT, "--plot", p)
            check(rc == 2 and not os.path.exists(p) and ".png or .svg" in err and out == "",
                  "plan --plot %s refused before any work, nothing written" % bad, "rc %d out %r err %r" % (rc, out[:80], err))

        # spectrum and decode pictures: a capture of the demo upload
        up = os.path.join(tmp, "d.ulku")
        wav = os.path.join(tmp, "d.wav")
        rc, _, err = run("compile", "--dict", DICT, os.path.join(SRC, "dictionaries", "demo-subbit.cmd"), "-o", up, "-q")
        check(rc == 0, "compile the demo", err)
        rc, _, err = run("modulate", up, "-o", wav, "--rate", 48000, "-q")
        check(rc == 0, "modulate the demo", err)
        for ext in ("svg", "png"):
            p = os.path.join(tmp, "s." + ext)
            rc, _, err = run("spectrum", wav, "--dict", DICT, "-o", p)
            head = open(p, "rb").read(200) if os.path.exists(p) else b""
            ok = (b"<svg" in head) if ext == "svg" else head.startswith(b"\x89PNG")
            check(rc == 0 and ok, "spectrum -o s.%s gives %s" % (ext, ext.upper()), err)
            p = os.path.join(tmp, "dp." + ext)
            rc, _, err = run("decode", "--dict", DICT, wav, "--plot", p)
            head = open(p, "rb").read(200) if os.path.exists(p) else b""
            ok = (b"<svg" in head) if ext == "svg" else head.startswith(b"\x89PNG")
            check(rc == 0 and ok, "decode --plot dp.%s gives %s" % (ext, ext.upper()), err)
        p = os.path.join(tmp, "s.txt")
        rc, out, err = run("spectrum", wav, "-o", p)
        check(rc == 2 and not os.path.exists(p) and ".png or .svg" in err, "spectrum -o s.txt refused", err)
        p = os.path.join(tmp, "dp.txt")
        rc, out, err = run("decode", "--dict", DICT, wav, "--plot", p)
        check(rc == 2 and not os.path.exists(p) and ".png or .svg" in err, "decode --plot dp.txt refused", err)

    print("%s" % ("all checks passed" if not failed else "%d checks failed" % failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
