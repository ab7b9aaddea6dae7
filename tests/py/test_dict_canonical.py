#!/usr/bin/python3
"""Checks `ulk validate` from outside: the dictionary hash, the canonical form, exit codes
and the --json document.

References outside the project:
  - hashlib.sha256 (Python standard library) recomputes the hash of the canonical text that
    `ulk validate --canonical` prints; it must equal the sha256 of `ulk validate --json`.
  - json (Python standard library): the canonical text must be exactly what
    json.dumps(obj, sort_keys=True, separators=(",", ":"), ensure_ascii=False) writes for
    the object it parses to (sorted keys, no white space, numbers in their shortest form).
  - python3-yaml with the YAML 1.2 core-schema resolvers (as tests/py/test_schema.py):
    the canonical content is rebuilt independently from the demo YAML by the rules of
    docs/dictionary.md (defaults aside, whose raw values follow the argument conversion
    rules tested elsewhere) and compared field by field.

Run: ULK=build/ulk ULK_SOURCE_DIR=. /usr/bin/python3 tests/py/test_dict_canonical.py
"""
import fractions
import hashlib
import json
import os
import re
import subprocess
import sys
import tempfile

import yaml

ULK = os.environ.get("ULK")
SRC = os.environ.get("ULK_SOURCE_DIR") or os.path.normpath(
    os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", ".."))
failures = []


def check(cond, what):
    if not cond:
        failures.append(what)
        print("FAIL:", what)


class CoreLoader(yaml.SafeLoader):
    """SafeLoader with YAML 1.2 core-schema implicit types (and 0b integers)."""


CoreLoader.yaml_implicit_resolvers = {}
CoreLoader.add_implicit_resolver(
    "tag:yaml.org,2002:bool", re.compile(r"^(?:true|True|TRUE|false|False|FALSE)$"), list("tTfF"))
CoreLoader.add_implicit_resolver(
    "tag:yaml.org,2002:null", re.compile(r"^(?:~|null|Null|NULL|)$"), ["~", "n", "N", ""])
CoreLoader.add_implicit_resolver(
    "tag:yaml.org,2002:int", re.compile(r"^(?:[-+]?[0-9]+|0o[0-7]+|0x[0-9a-fA-F]+|0b[01]+)$"),
    list("-+0123456789"))
CoreLoader.add_implicit_resolver(
    "tag:yaml.org,2002:float",
    re.compile(r"^(?:[-+]?(?:\.[0-9]+|[0-9]+(?:\.[0-9]*)?)(?:[eE][-+]?[0-9]+)?)$"), list("-+.0123456789"))


def core_int(loader, node):
    t = loader.construct_scalar(node)
    s = t.lstrip("+-")
    neg = t.startswith("-")
    v = int(s[2:], 16) if s[:2] in ("0x", "0X") else int(s[2:], 2) if s[:2] in ("0b", "0B") else \
        int(s[2:], 8) if s[:2] == "0o" else int(s, 10)
    return -v if neg else v


def core_float(loader, node):
    return float(loader.construct_scalar(node))


CoreLoader.add_constructor("tag:yaml.org,2002:int", core_int)
CoreLoader.add_constructor("tag:yaml.org,2002:float", core_float)


def run(*args):
    p = subprocess.run([ULK, "validate", *args], capture_output=True, text=True)
    return p.returncode, p.stdout, p.stderr


def ratio_text(v):
    """An exact rate as docs/dictionary.md writes it: a decimal when it is one, else n/d."""
    f = fractions.Fraction(str(v))
    d, k2, k5 = f.denominator, 0, 0
    while d % 2 == 0:
        d //= 2
        k2 += 1
    while d % 5 == 0:
        d //= 5
        k5 += 1
    if d != 1:
        return "%d/%d" % (f.numerator, f.denominator)
    digits = max(k2, k5)
    if digits == 0:
        return str(f.numerator)
    scaled = f * 10 ** digits
    s = str(abs(scaled.numerator))
    s = s.rjust(digits + 1, "0")
    return ("-" if f < 0 else "") + s[:-digits] + "." + s[-digits:]


def rebuild(src):
    """The canonical object of docs/dictionary.md, from the YAML tree, without defaults."""
    L = src["link"]
    w = L["word"]
    sc = L["subcarrier"]
    link = {
        "bit_rate": ratio_text(L["bit_rate"]),
        "framing": dict(L["framing"]),
        "line_code": L.get("line_code", "nrz-l"),
        "profile": "subbit",
        "subbits": dict(L["subbits"]),
        "subcarrier": {"amplitude": sc.get("amplitude", 1), "frequency": ratio_text(sc["frequency"]),
                       "waveform": sc.get("waveform", "sine")},
        "word": {"argument_bits": w["argument_bits"], "check": w["check"], "opcode_bits": w["opcode_bits"],
                 "system_address_bits": w["system_address_bits"],
                 "vehicle_address": {"bits": w["vehicle_address"]["bits"], "value": w["vehicle_address"]["value"]}},
    }
    if "pilot" in L:
        link["pilot"] = {"amplitude": L["pilot"]["amplitude"], "frequency": ratio_text(L["pilot"]["frequency"])}
    cmds = []
    for c in src["commands"]:
        args = []
        for a in c.get("arguments") or []:
            o = {"name": a["name"], "type": a["type"],
                 "bits": a.get("bits", 1 if a["type"] == "boolean" else 32)}
            cal = a.get("calibration")
            if cal and "polynomial" in cal:
                o["calibration"] = {"polynomial": cal["polynomial"]}
            elif cal:
                o["calibration"] = {"offset": cal.get("offset", 0), "scale": cal["scale"]}
            if "range" in a:
                o["range"] = a["range"]
            if "tolerance" in a:
                o["tolerance"] = a["tolerance"]
            if "units" in a:
                o["units"] = a["units"]
            if a["type"] == "enum":
                o["values"] = dict(a["values"])
            args.append(o)
        cmds.append({"arguments": args, "critical": bool(c.get("critical", False)),
                     "description": c.get("description", ""), "mnemonic": c["mnemonic"],
                     "opcode": c["opcode"], "system": c["system"]})
    return {"commands": cmds, "dictionary": dict(src["dictionary"]), "link": link,
            "systems": [{"address": s["address"], "name": s["name"]} for s in src["systems"]]}


def rebuild_carrier(src):
    """The canonical carrier object of docs/dictionary.md section 6, from the YAML tree: every
    rate as exact text, bounds with their default [0, 1.5], data's info_rate defaulting to
    the link's bit rate (sub-bit profile), modes as a mapping, exponents in decreasing order."""
    C = src["carrier"]
    out = {"modes": {name: dict(ix) for name, ix in C["modes"].items()},
           "offset_hz": ratio_text(C.get("offset_hz", 0))}
    if "budget" in C:
        out["budget"] = {"pt_n0_dbhz": C["budget"]["pt_n0_dbhz"]}
    if "loop" in C:
        out["loop"] = {"bandwidth_hz": C["loop"]["bandwidth_hz"], "required_snr_db": C["loop"]["required_snr_db"]}
    if "data" in C:
        d = C["data"]
        o = {"bounds": d.get("bounds", [0, 1.5]), "info_rate": ratio_text(d.get("info_rate", src["link"]["bit_rate"]))}
        if "required_ebn0_db" in d:
            o["required_ebn0_db"] = d["required_ebn0_db"]
        out["data"] = o
    if "voice" in C:
        v = C["voice"]
        o = {"bounds": v.get("bounds", [0, 1.5]), "deviation_hz": ratio_text(v["deviation_hz"]),
             "subcarrier_hz": ratio_text(v["subcarrier_hz"]), "tone_hz": ratio_text(v["tone_hz"])}
        if "required_pn0_dbhz" in v:
            o["required_pn0_dbhz"] = v["required_pn0_dbhz"]
        out["voice"] = o
    if "ranging" in C:
        r = C["ranging"]
        o = {"bounds": r.get("bounds", [0, 1.5]), "chip_rate": ratio_text(r["chip_rate"]),
             "polynomial": sorted(r["polynomial"], reverse=True)}
        if "required_pn0_dbhz" in r:
            o["required_pn0_dbhz"] = r["required_pn0_dbhz"]
        out["ranging"] = o
    return out


def numeq(a, b):
    """Structural equality, numbers compared by value (1 == 1.0)."""
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(numeq(a[k], b[k]) for k in a)
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(numeq(x, y) for x, y in zip(a, b))
    if isinstance(a, (int, float)) and isinstance(b, (int, float)) and not isinstance(a, bool):
        return a == b
    return a == b


def main():
    if not ULK:
        print("ULK is not set")
        return 2
    demo_y = os.path.join(SRC, "dictionaries", "demo-subbit.yaml")
    demo_j = os.path.join(SRC, "dictionaries", "demo-subbit.json")
    rc, out, err = run("--json", demo_y, demo_j)
    check(rc == 0, "validate demo: exit %d (%s)" % (rc, err))
    doc = json.loads(out)
    shas = [d["summary"]["sha256"] for d in doc["dictionaries"]]
    check(shas[0] == shas[1], "YAML and JSON demo hashes differ")
    rc, out, err = run("--canonical", demo_y, demo_j)
    check(rc == 0, "validate --canonical: exit %d" % rc)
    lines = out.split("\n")[:2]
    for text, sha, name in zip(lines, shas, ("yaml", "json")):
        check(hashlib.sha256(text.encode("utf-8")).hexdigest() == sha, "%s: hashlib digest differs" % name)
        obj = json.loads(text)
        again = json.dumps(obj, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
        check(again == text, "%s: canonical text is not json.dumps(sort_keys) of itself" % name)
    obj = json.loads(lines[0])
    with open(demo_y, encoding="utf-8") as f:
        src = yaml.load(f, Loader=CoreLoader)
    ref = rebuild(src)
    for c in obj["commands"]:
        for a in c["arguments"]:
            a.pop("default", None)
    for part in ("dictionary", "link", "systems", "commands"):
        check(numeq(obj[part], ref[part]), "canonical '%s' differs from the independent rebuild" % part)
    # The carrier section is part of the content when present (docs/dictionary.md section 6).
    check("carrier" in src and numeq(obj.get("carrier"), rebuild_carrier(src)),
          "canonical 'carrier' differs from the independent rebuild")
    check(set(obj) == {"carrier", "commands", "dictionary", "link", "systems"}, "canonical top-level keys")
    with tempfile.TemporaryDirectory() as tmp:
        # Without the section: the content is the one before carriers existed (no key), so
        # the hash of a dictionary without a carrier section did not move.
        plain = dict(src)
        del plain["carrier"]
        pj = os.path.join(tmp, "plain.json")
        with open(pj, "w", encoding="utf-8") as f:
            json.dump(plain, f)
        rc, out, err = run("--canonical", pj)
        pobj = json.loads(out.split("\n")[0]) if rc == 0 else {}
        check(rc == 0 and "carrier" not in pobj and numeq({k: pobj[k] for k in ("dictionary", "link", "systems")},
                                                           {k: ref[k] for k in ("dictionary", "link", "systems")}),
              "without a carrier section: no carrier key (exit %d, %s)" % (rc, err))
        # A carrier edit changes the hash; a reordering of modes and exponents does not.
        def sha_of(tree, name):
            path = os.path.join(tmp, name)
            with open(path, "w", encoding="utf-8") as f:
                json.dump(tree, f)
            r, o, e = run("--json", path)
            return json.loads(o)["dictionaries"][0]["summary"]["sha256"] if r == 0 else None
        base = sha_of(src, "base.json")
        check(base == shas[0], "demo as JSON: same hash as the YAML")
        edited = json.loads(json.dumps(src))
        edited["carrier"]["modes"]["full"]["voice"] = 0.8
        check(sha_of(edited, "edited.json") not in (None, base), "a carrier index edit changes the hash")
        edited = json.loads(json.dumps(src))
        edited["carrier"]["ranging"]["chip_rate"] = 2001
        check(sha_of(edited, "chip.json") not in (None, base), "a chip-rate edit changes the hash")
        shuffled = json.loads(json.dumps(src))
        shuffled["carrier"]["modes"] = dict(reversed(list(shuffled["carrier"]["modes"].items())))
        shuffled["carrier"]["ranging"]["polynomial"] = [0, 10, 3]
        check(sha_of(shuffled, "shuffled.json") == base, "mode order and exponent order do not change the hash")
        # A tolerance is content (it changes what compiles): in the canonical form as written.
        tol = json.loads(json.dumps(src))
        hit = [a for c in tol["commands"] for a in c.get("arguments") or [] if "calibration" in a]
        hit[0]["tolerance"] = 0.25
        check(sha_of(tol, "tol.json") not in (None, base), "a tolerance changes the hash")
        r, o, e = run("--canonical", os.path.join(tmp, "tol.json"))
        tobj = json.loads(o.split("\n")[0]) if r == 0 else {}
        for c in tobj.get("commands", []):
            for a in c["arguments"]:
                a.pop("default", None)
        check(r == 0 and numeq(tobj.get("commands"), rebuild(tol)["commands"]),
              "canonical commands with a tolerance agree with the independent rebuild (%s)" % e)
    # Summary figures against the link section: W, W / R_b, R_s = n R_b, k = f_sc / R_s.
    s = doc["dictionaries"][0]["summary"]
    L = src["link"]
    w = L["word"]
    cbits = {"none": 0, "parity-even": 1, "parity-odd": 1, "crc8": 8, "crc16": 16}[w["check"]]
    W = w["vehicle_address"]["bits"] + w["system_address_bits"] + w["opcode_bits"] + w["argument_bits"] + cbits
    n = len(L["subbits"]["zero"])
    rb = fractions.Fraction(str(L["bit_rate"]))
    check(s["word_bits"] == W, "word_bits %s != %d" % (s["word_bits"], W))
    check(fractions.Fraction(s["word_duration_exact_s"]) == W / rb, "word duration")
    check(fractions.Fraction(s["subbit_rate_exact"]) == n * rb, "R_s")
    check(fractions.Fraction(s["subcarrier_k_exact"]) == fractions.Fraction(str(L["subcarrier"]["frequency"])) / (n * rb), "k")
    check(sorted(s["critical"]) == sorted(c["mnemonic"] for c in src["commands"] if c.get("critical")), "critical list")

    # Exit codes and the JSON findings of a broken dictionary.
    with tempfile.TemporaryDirectory() as tmp:
        bad = os.path.join(tmp, "bad.yaml")
        with open(demo_y, encoding="utf-8") as f:
            text = f.read()
        text = text.replace("bit_rate: 1000", "bitrate: 1000", 1)
        with open(bad, "w", encoding="utf-8") as f:
            f.write(text)
        line = text[:text.index("bitrate:")].count("\n") + 1
        rc, out, err = run("--json", bad)
        check(rc == 1, "broken dictionary: exit %d, want 1" % rc)
        d = json.loads(out)["dictionaries"][0]
        check(d["summary"] is None and d["status"] == "invalid", "broken dictionary has a summary")
        hit = [x for x in d["findings"] if x["severity"] == "error" and "did you mean 'bit_rate'" in x["message"]]
        check(len(hit) == 1 and hit[0]["line"] == line and hit[0]["col"] == 3 and hit[0]["path"] == "link.bitrate"
              and hit[0]["file"] == bad, "did-you-mean finding: %r" % hit)
        rc, out, err = run(bad)
        check(rc == 1 and ("%s:%d:3: error: unknown key 'bitrate' in link" % (bad, line)) in out, "text finding")
        rc, out, err = run(os.path.join(tmp, "missing.yaml"))
        check(rc == 2 and "missing.yaml: cannot open" in err, "missing file: exit %d, %r" % (rc, err))
        rc, out, err = run()
        check(rc == 2, "no argument: exit %d" % rc)
        rc, out, err = run("--bogus", demo_y)
        check(rc == 2, "unknown option: exit %d" % rc)
        rc, out, err = run("--help")
        check(rc == 0 and "usage: ulk validate" in out, "--help")
        # Warnings alone keep exit 0.
        warn = os.path.join(tmp, "warn.yaml")
        with open(warn, "w", encoding="utf-8") as f:
            f.write(text.replace("bitrate: 1000", "bit_rate: 1000").replace("preamble: 32", "preamble: 8"))
        rc, out, err = run(warn)
        check(rc == 0 and "warning: preamble of 8 idle patterns" in out, "warning only: exit %d" % rc)
        # I/O outranks findings: a missing file among valid and broken ones gives 2.
        rc, out, err = run(demo_y, bad, os.path.join(tmp, "missing.yaml"))
        check(rc == 2, "mixed: exit %d, want 2" % rc)
    print("%d failures" % len(failures))
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
