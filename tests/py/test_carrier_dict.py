#!/usr/bin/python3
"""The dictionary's `carrier` section (docs/carrier.md): the demo dictionary pair carries
one, the dictionary loader checks it (findings once, with file:line:col), `ulk plan` reads
it from a whole dictionary, and the JSON Schema (checked with Debian's python3-jsonschema,
Draft 2020-12) refuses malformed carrier sections at the right tree path.
"""
import copy
import json
import os
import subprocess
import sys
import tempfile

import jsonschema

ULK = os.environ.get("ULK", "ulk")
SRC = os.environ.get("ULK_SOURCE_DIR") or os.path.normpath(
    os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", ".."))
DICT_Y = os.path.join(SRC, "dictionaries", "demo-subbit.yaml")
DICT_J = os.path.join(SRC, "dictionaries", "demo-subbit.json")
failed = 0


def check(ok, what, detail=""):
    global failed
    print(("ok   " if ok else "FAIL ") + what + ("" if ok else " " + detail))
    if not ok:
        failed += 1


def run(*args):
    p = subprocess.run([ULK] + list(args), capture_output=True, text=True)
    return p.returncode, p.stdout, p.stderr


# 1. `ulk plan` on both files of the pair: the same three modes and the same numbers.
plans = []
for path in (DICT_Y, DICT_J):
    rc, out, err = run("plan", path, "--json")
    check(rc == 0, "ulk plan %s exits 0" % os.path.basename(path), err)
    plans.append(json.loads(out) if rc == 0 else None)
if all(plans):
    names = [m["name"] for m in plans[0]["modes"]]
    check(names == ["acquisition", "command", "full"], "three demo modes", str(names))
    for p in plans:
        p.pop("file", None)
    strip = json.dumps(plans[0], sort_keys=True).replace(".yaml", "")
    check(strip == json.dumps(plans[1], sort_keys=True).replace(".json", ""), "YAML and JSON plans agree")

# 2. A broken carrier in a whole dictionary: x^4 + x^2 + 1 = (x^2 + x + 1)^2 over GF(2) is not
# primitive (period 6, not 15). Reported once by validate and once by plan, at its line.
with open(DICT_Y, encoding="utf-8") as f:
    text = f.read()
bad = text.replace("polynomial: [10, 3, 0]", "polynomial: [4, 2, 0]")
check(bad != text, "edit applies")
line = next(i + 1 for i, l in enumerate(bad.splitlines()) if "polynomial: [4, 2, 0]" in l)
with tempfile.TemporaryDirectory() as tmp:
    bp = os.path.join(tmp, "bad.yaml")
    with open(bp, "w", encoding="utf-8") as f:
        f.write(bad)
    for cmd in ("validate", "plan"):
        rc, out, err = run(cmd, bp)
        lines = [l for l in (out + err).splitlines() if "primitive" in l]
        check(rc != 0, "%s refuses a non-primitive polynomial" % cmd, "rc=%d" % rc)
        check(len(lines) == 1, "%s reports it once" % cmd, repr(out + err))
        check(bool(lines) and ("bad.yaml:%d:" % line) in lines[0], "%s names line %d" % (cmd, line), repr(lines))
    # A dictionary without a carrier section still validates; plan says there is none.
    nc = os.path.join(tmp, "nocarrier.yaml")
    start = text.index("\ncarrier:\n") + 1
    end = text.index("\nsystems:")
    with open(nc, "w", encoding="utf-8") as f:
        f.write(text[:start] + text[end:])
    rc, out, err = run("validate", nc)
    check(rc == 0, "dictionary without carrier validates", err)
    rc, out, err = run("plan", nc)
    check(rc != 0 and "carrier" in err, "plan without a carrier section refuses", repr(err))

# 3. The schema's carrier part: the demo passes, broken shapes fail at the right path.
with open(os.path.join(SRC, "dictionaries", "dictionary.schema.json"), encoding="utf-8") as f:
    v = jsonschema.Draft202012Validator(json.load(f))
with open(DICT_J, encoding="utf-8") as f:
    demo = json.load(f)
check(not list(v.iter_errors(demo)), "demo pair validates against the schema")
cases = [
    ("mode index above pi", lambda c: c["modes"]["full"].__setitem__("data", 3.5), "carrier/modes/full/data"),
    ("mode with no channel", lambda c: c["modes"].__setitem__("off", {}), "carrier/modes/off"),
    ("unknown channel in a mode", lambda c: c["modes"]["full"].__setitem__("video", 0.3), "carrier/modes/full"),
    ("unknown key", lambda c: c.__setitem__("colour", 1), "carrier"),
    ("zero chip rate", lambda c: c["ranging"].__setitem__("chip_rate", 0), "carrier/ranging/chip_rate"),
    ("voice without tone", lambda c: c["voice"].pop("tone_hz"), "carrier/voice"),
    ("repeated exponent", lambda c: c["ranging"].__setitem__("polynomial", [10, 3, 3]), "carrier/ranging/polynomial"),
    ("bounds of three", lambda c: c["data"].__setitem__("bounds", [0.1, 0.2, 0.3]), "carrier/data/bounds"),
    ("no modes", lambda c: c.pop("modes"), "carrier"),
]
for name, edit, path in cases:
    d = copy.deepcopy(demo)
    edit(d["carrier"])
    paths = ["/".join(str(p) for p in e.absolute_path) for e in v.iter_errors(d)]
    check(path in paths, "schema refuses " + name, str(paths))
for good in ("62.5", 1000):
    d = copy.deepcopy(demo)
    d["carrier"]["voice"]["tone_hz"] = good
    check(not list(v.iter_errors(d)), "schema accepts tone_hz %r" % (good,))

print("%s" % ("FAILED %d" % failed if failed else "all passed"))
sys.exit(1 if failed else 0)
