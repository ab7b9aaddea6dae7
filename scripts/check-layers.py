#!/usr/bin/python3
"""scripts/check-layers.py - the include structure of libulk is a straight pipeline.

Every library source sits in one layer folder under src/, and every public header
include/ulk/X.h belongs to one layer (the table below: the layer whose model it declares).
A file may include headers of its own layer or of a layer below it; an include that points
up the order is a back-edge and fails the check. DEVELOPERS.md "Layout" documents the order.

    /usr/bin/python3 scripts/check-layers.py [SOURCE_DIR]     exit 0 clean, 1 back-edges found
"""
import os
import re
import sys

# the order, lowest first; src/cli is the program over the library
LAYERS = ["core", "dict", "encode", "io", "dsp", "profiles", "cli"]

# public headers: the layer whose model each one declares
PUBLIC = {
    "error.h": "core", "limits.h": "core",
    "link.h": "dict", "dict.h": "dict", "carrier.h": "dict", "profile.h": "dict",
    "cmdlist.h": "encode", "word.h": "encode", "upload.h": "encode",
    "subbit.h": "encode",
    "sampleio.h": "io", "plot.h": "io",
    "mod.h": "dsp", "demod.h": "dsp", "decode.h": "dsp", "impair.h": "dsp",
    "spectrum.h": "dsp", "rx.h": "dsp", "verify.h": "dsp",
    "ccsds.h": "profiles", "sdls.h": "profiles", "tc_decode.h": "profiles",
}

# Back-edges that remain while the per-profile branches move behind the profile table
# (include/ulk/profile.h; DEVELOPERS.md "How to add a link profile" lists what is left). Each
# is (file, included header); the check fails on a back-edge not listed here, and on a listed
# one that is gone (so the list only shrinks).
KNOWN = {
}

INCLUDE = re.compile(r'^[ \t]*#[ \t]*include[ \t]+"([^"]+)"', re.M)


def layer_of_src(rel):
    """rel: a path under src/ such as dsp/rx.c or profiles/ccsds/sdls.c"""
    top = rel.split("/")[0]
    return top if top in LAYERS else None


def main():
    root = os.path.abspath(sys.argv[1] if len(sys.argv) > 1 else
                           os.path.join(os.path.dirname(__file__), ".."))
    src = os.path.join(root, "src")
    inc = os.path.join(root, "include", "ulk")
    problems = []
    private = {}      # header name -> layer, for the private headers under src/
    files = []        # (display path, layer, text)
    for d, _, names in os.walk(src):
        for n in sorted(names):
            if not n.endswith((".c", ".h")):
                continue
            rel = os.path.relpath(os.path.join(d, n), src)
            lay = layer_of_src(rel)
            if lay is None:
                problems.append("src/%s: not in a layer folder (%s)" % (rel, ", ".join(LAYERS)))
                continue
            if n.endswith(".h") and lay != "cli":
                if n in private:
                    problems.append("src/%s: a second private header named %s" % (rel, n))
                private[n] = lay
            files.append(("src/" + rel, lay, open(os.path.join(d, n), encoding="utf-8").read()))
    for n in sorted(os.listdir(inc)):
        if not n.endswith(".h"):
            continue
        if n not in PUBLIC:
            problems.append("include/ulk/%s: no layer in scripts/check-layers.py's table" % n)
            continue
        files.append(("include/ulk/" + n, PUBLIC[n], open(os.path.join(inc, n), encoding="utf-8").read()))
    rank = {l: i for i, l in enumerate(LAYERS)}
    n_edges = 0
    seen_known = set()
    for path, lay, text in files:
        for m in INCLUDE.finditer(text):
            name = m.group(1)
            line = text.count("\n", 0, m.start()) + 1
            if name.startswith("ulk/"):
                to = PUBLIC.get(name[4:])
            elif lay == "cli" and os.path.exists(os.path.join(src, "cli", name)):
                to = "cli"
            else:
                to = private.get(name)
            if to is None:
                problems.append("%s:%d: includes \"%s\", which is in no layer" % (path, line, name))
                continue
            n_edges += 1
            if rank[to] > rank[lay]:
                if (path, name) in KNOWN:
                    seen_known.add((path, name))
                    continue
                problems.append("%s:%d: back-edge: %s (layer %s) includes \"%s\" (layer %s)"
                                % (path, line, path, lay, name, to))
    for k in sorted(set(KNOWN) - seen_known):
        problems.append("%s: the known back-edge to \"%s\" is gone: remove it from KNOWN" % k)
    for k in sorted(seen_known):
        print("known back-edge (profile table to come): %s includes \"%s\": %s" % (k[0], k[1], KNOWN[k]))
    for p in problems:
        print(p)
    print("check-layers: %d files, %d includes, %d known back-edges, %d problems (order %s)"
          % (len(files), n_edges, len(seen_known), len(problems), " < ".join(LAYERS)))
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
