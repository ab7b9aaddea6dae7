#!/usr/bin/python3
"""Checks dictionaries/dictionary.schema.json with Debian's python3-jsonschema.

Every bundled dictionary (dictionaries/*.yaml, *.yml, *.json) must validate against the
schema under Draft 2020-12, the schema must itself be a valid Draft 2020-12 schema, and a
set of broken dictionaries written below must each be rejected, at the tree path named
in the case (so a case cannot pass by failing for an unrelated reason).

YAML is read with python3-yaml, with the implicit types reduced to the YAML 1.2 core
schema (docs/spec/subbit.md section 7: `on` is a string, `010` is ten), plus 0b binary
integers (docs/spec/dictionary.md).

Run: /usr/bin/python3 tests/py/test_schema.py   (exit 0 when everything passed)
"""
import copy
import glob
import json
import os
import re
import sys

import jsonschema
import yaml

SRC = os.environ.get("ULK_SOURCE_DIR") or os.path.normpath(
    os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", ".."))
SCHEMA_PATH = os.path.join(SRC, "dictionaries", "dictionary.schema.json")


class CoreLoader(yaml.SafeLoader):
    """SafeLoader with YAML 1.2 core-schema implicit types (and 0b integers)."""


CoreLoader.yaml_implicit_resolvers = {}
CoreLoader.add_implicit_resolver(
    "tag:yaml.org,2002:bool", re.compile(r"^(?:true|True|TRUE|false|False|FALSE)$"), list("tTfF"))
CoreLoader.add_implicit_resolver(
    "tag:yaml.org,2002:null", re.compile(r"^(?:~|null|Null|NULL|)$"), ["~", "n", "N", ""])
CoreLoader.add_implicit_resolver(
    "tag:yaml.org,2002:int",
    re.compile(r"^(?:[-+]?[0-9]+|0o[0-7]+|[-+]?0x[0-9a-fA-F]+|[-+]?0b[01]+)$"),
    list("-+0123456789"))
CoreLoader.add_implicit_resolver(
    "tag:yaml.org,2002:float",
    re.compile(r"^(?:[-+]?(?:\.[0-9]+|[0-9]+(?:\.[0-9]*)?)(?:[eE][-+]?[0-9]+)?"
               r"|[-+]?\.(?:inf|Inf|INF)|\.(?:nan|NaN|NAN))$"),
    list("-+0123456789."))


def _core_int(loader, node):
    s = loader.construct_scalar(node)
    neg = s.startswith("-")
    t = s.lstrip("+-")
    base = {"0x": 16, "0b": 2, "0o": 8}.get(t[:2].lower(), 10)
    v = int(t[2:] if base != 10 else t, base)
    return -v if neg else v


CoreLoader.add_constructor("tag:yaml.org,2002:int", _core_int)


def load_yaml_text(text):
    return yaml.load(text, Loader=CoreLoader)


passed = 0
failed = 0


def report(ok, name, detail=""):
    global passed, failed
    if ok:
        passed += 1
        print("ok   %s" % name)
    else:
        failed += 1
        print("FAIL %s %s" % (name, detail))


def first_error_path(validator, doc):
    """All error paths (as 'a/b/0/c' strings), best-match first; [] when valid."""
    errs = list(validator.iter_errors(doc))
    if not errs:
        return []
    paths = []
    for e in errs:
        # descend into oneOf/anyOf contexts so the deepest path is also listed
        stack = [e]
        while stack:
            x = stack.pop()
            paths.append("/".join(str(p) for p in x.absolute_path))
            stack.extend(x.context or [])
    best = jsonschema.exceptions.best_match(errs)
    return ["/".join(str(p) for p in best.absolute_path)] + paths


def main():
    with open(SCHEMA_PATH, encoding="utf-8") as f:
        schema = json.load(f)
    try:
        jsonschema.Draft202012Validator.check_schema(schema)
        report(True, "schema is a valid Draft 2020-12 schema")
    except jsonschema.exceptions.SchemaError as e:
        report(False, "schema is a valid Draft 2020-12 schema", str(e).splitlines()[0])
        return
    v = jsonschema.Draft202012Validator(schema)

    bundled = sorted(glob.glob(os.path.join(SRC, "dictionaries", "*.yaml")) +
                     glob.glob(os.path.join(SRC, "dictionaries", "*.yml")) +
                     [p for p in glob.glob(os.path.join(SRC, "dictionaries", "*.json"))
                      if not p.endswith(".schema.json")])
    report(len(bundled) >= 2, "at least two bundled dictionaries found", str(bundled))
    docs = {}
    for path in bundled:
        name = os.path.relpath(path, SRC)
        try:
            with open(path, encoding="utf-8") as f:
                doc = json.load(f) if path.endswith(".json") else load_yaml_text(f.read())
        except (ValueError, yaml.YAMLError) as e:
            report(False, "load " + name, str(e))
            continue
        docs[path] = doc
        errs = sorted(v.iter_errors(doc), key=lambda e: list(e.absolute_path))
        report(not errs, "bundled " + name + " validates",
               "; ".join("%s: %s" % ("/".join(map(str, e.absolute_path)), e.message[:120])
                         for e in errs[:5]))

    # The YAML and JSON forms of the demo must be the same tree.
    y = os.path.join(SRC, "dictionaries", "demo-subbit.yaml")
    j = os.path.join(SRC, "dictionaries", "demo-subbit.json")
    if y in docs and j in docs:
        report(docs[y] == docs[j], "demo-subbit.yaml and demo-subbit.json hold the same tree")
    else:
        report(False, "demo-subbit.yaml and .json both present")

    # ---- broken dictionaries: each must be refused, at the path given ----
    base_yaml = """
dictionary: {name: t, version: "1"}
link:
  profile: subbit
  bit_rate: 1000
  subbits: {zero: "0011", one: "1100", idle: "0110"}
  subcarrier: {frequency: 8000, waveform: sine, amplitude: 0.8}
  framing: {preamble: 16, gap: 4, postamble: 4}
  word:
    vehicle_address: {bits: 4, value: 0x9}
    system_address_bits: 3
    opcode_bits: 5
    argument_bits: 16
    check: crc8
systems: [{name: A, address: 1}]
commands:
  - mnemonic: GO
    system: A
    opcode: 1
    arguments:
      - {name: n, type: unsigned, bits: 8}
      - {name: on_off, type: boolean}
      - {name: m, type: enum, bits: 2, values: {X: 0, Y: 1}}
"""
    base = load_yaml_text(base_yaml)
    report(not list(v.iter_errors(base)), "test base dictionary itself validates")

    def case(name, mutate, expect_path, from_yaml=None):
        doc = load_yaml_text(from_yaml) if from_yaml is not None else copy.deepcopy(base)
        if mutate:
            mutate(doc)
        paths = first_error_path(v, doc)
        if not paths:
            report(False, "refuses " + name, "(accepted)")
        elif expect_path not in paths:
            report(False, "refuses " + name, "at %r, expected %r" % (paths[0], expect_path))
        else:
            report(True, "refuses " + name)

    case("unquoted sub-bit pattern (YAML reads 0011 as the integer 11)", None,
         "link/subbits/zero", base_yaml.replace('zero: "0011"', "zero: 0011"))
    case("pattern with a character other than 0/1",
         lambda d: d["link"]["subbits"].__setitem__("one", "1102"), "link/subbits/one")
    case("misspelt key bit_rte",
         lambda d: d["link"].__setitem__("bit_rte", d["link"].pop("bit_rate")), "link")
    case("unknown check crc32",
         lambda d: d["link"]["word"].__setitem__("check", "crc32"), "link/word/check")
    case("amplitude above full scale",
         lambda d: d["link"]["subcarrier"].__setitem__("amplitude", 1.5),
         "link/subcarrier/amplitude")
    case("enum without values",
         lambda d: d["commands"][0]["arguments"][2].pop("values"), "commands/0/arguments/2")
    case("unknown argument type",
         lambda d: d["commands"][0]["arguments"][0].__setitem__("type", "uint"),
         "commands/0/arguments/0/type")
    case("negative width",
         lambda d: d["commands"][0]["arguments"][0].__setitem__("bits", -3),
         "commands/0/arguments/0/bits")
    case("calibration with both scale and polynomial",
         lambda d: d["commands"][0]["arguments"][0].__setitem__(
             "calibration", {"scale": 0.5, "polynomial": [0, 1]}),
         "commands/0/arguments/0/calibration")
    case("boolean with a calibration",
         lambda d: d["commands"][0]["arguments"][1].__setitem__("calibration", {"scale": 2}),
         "commands/0/arguments/1")
    case("float32 of 16 bits",
         lambda d: d["commands"][0]["arguments"].append(
             {"name": "f", "type": "float32", "bits": 16}), "commands/0/arguments/3/bits")
    case("system without address",
         lambda d: d["systems"][0].pop("address"), "systems/0")
    case("command key misspelt (opcod)",
         lambda d: d["commands"][0].__setitem__("opcod", d["commands"][0].pop("opcode")),
         "commands/0")
    case("hex address string that is not hex",
         lambda d: d["systems"][0].__setitem__("address", "0xZZ"), "systems/0/address")
    case("range with three members",
         lambda d: d["commands"][0]["arguments"][0].__setitem__("range", [0, 1, 2]),
         "commands/0/arguments/0/range")
    case("unknown profile",
         lambda d: d["link"].__setitem__("profile", "fsk"), "link/profile")
    case("critical given as the string 'yes'",
         lambda d: d["commands"][0].__setitem__("critical", "yes"), "commands/0/critical")
    case("zero bit rate",
         lambda d: d["link"].__setitem__("bit_rate", 0), "link/bit_rate")

    # Hex strings are accepted where JSON cannot write hex.
    doc = copy.deepcopy(base)
    doc["systems"][0]["address"] = "0x1"
    doc["link"]["word"]["vehicle_address"]["value"] = "0b1001"
    report(not list(v.iter_errors(doc)), "accepts 0x / 0b integer strings")


if __name__ == "__main__":
    try:
        main()
    except Exception:  # a crash is a failure, reported as such
        import traceback
        traceback.print_exc()
        failed += 1
    print("%d passed, %d failed" % (passed, failed))
    sys.exit(1 if failed else 0)
