#!/usr/bin/python3
"""scripts/check-function-sizes.py - no function body grows past its limit.

Limits (issue 13 item 5): 100 lines for a function in src/cli/, 150 anywhere else in src/.
A function's length is counted from the line that holds its name to the line of its closing
brace, both included. The scanner strips comments, string and character literals and
preprocessor lines, then takes every brace block at file level whose head has a parameter
list and no '=' (a function definition; initialisers of tables and structs are not).

    /usr/bin/python3 scripts/check-function-sizes.py [SOURCE_DIR] [--list]
        exit 0 when every function is within its limit or listed in KNOWN at no more than
        its listed length; 1 otherwise (and when a KNOWN entry is gone or now fits: the list
        only shrinks). --list prints every function over 60 lines, longest first.
"""
import os
import re
import sys

LIMIT_CLI = 100
LIMIT_LIB = 150

# Functions over the limit when the check was written, with their length then: each may only
# shrink; split it and remove its line (DEVELOPERS.md "Function sizes").
KNOWN = {
}


def strip(text):
    """text with comments, literals and preprocessor lines blanked, newlines kept"""
    out = []
    i, n = 0, len(text)
    at_line_start = True
    while i < n:
        c = text[i]
        if at_line_start and c in " \t":
            out.append(c)
            i += 1
            continue
        if at_line_start and c == "#":
            # a preprocessor line, with its continuations
            while i < n and text[i] != "\n":
                if text[i] == "\\" and i + 1 < n and text[i + 1] == "\n":
                    out.append(" \n")
                    i += 2
                    continue
                out.append(" ")
                i += 1
            continue
        at_line_start = False
        if c == "\n":
            out.append(c)
            at_line_start = True
            i += 1
        elif text.startswith("/*", i):
            j = text.find("*/", i + 2)
            j = n if j < 0 else j + 2
            out.append(re.sub(r"[^\n]", " ", text[i:j]))
            i = j
        elif text.startswith("//", i):
            j = text.find("\n", i)
            j = n if j < 0 else j
            out.append(" " * (j - i))
            i = j
        elif c in "\"'":
            j = i + 1
            while j < n and text[j] != c:
                j += 2 if text[j] == "\\" else 1
            out.append(c + re.sub(r"[^\n]", " ", text[i + 1:j]) + c)
            i = j + 1
        else:
            out.append(c)
            i += 1
    return "".join(out)


def functions(text):
    """(name, first line, last line) of every function definition at file level"""
    s = strip(text)
    found = []
    depth = 0
    head_start = 0
    for i, c in enumerate(s):
        if c == "{":
            if depth == 0:
                head = s[head_start:i]
                m = re.search(r"([A-Za-z_][A-Za-z_0-9]*)\s*\([^;{}]*\)\s*$", head)
                if m and "=" not in head and not re.match(r"\s*(struct|union|enum|typedef)\b", head):
                    start = i
                    name_at = head_start + m.start(1)
                    open_at = i
                else:
                    name_at = None
            depth += 1
        elif c == "}":
            depth -= 1
            if depth == 0:
                if name_at is not None:
                    found.append((s[name_at:s.index("(", name_at)].strip(),
                                  s.count("\n", 0, name_at) + 1, s.count("\n", 0, i) + 1))
                name_at = None
                head_start = i + 1
        elif c == ";" and depth == 0:
            head_start = i + 1
    return found


def main():
    args = [a for a in sys.argv[1:] if not a.startswith("--")]
    show = "--list" in sys.argv
    root = os.path.abspath(args[0] if args else os.path.join(os.path.dirname(__file__), ".."))
    src = os.path.join(root, "src")
    problems, rows = [], []
    seen = set()
    for d, _, names in os.walk(src):
        for n in sorted(names):
            if not n.endswith(".c"):
                continue
            path = os.path.relpath(os.path.join(d, n), root)
            limit = LIMIT_CLI if path.startswith("src/cli/") else LIMIT_LIB
            for name, a, b in functions(open(os.path.join(d, n), encoding="utf-8").read()):
                lines = b - a + 1
                rows.append((lines, "%s:%d" % (path, a), name, limit))
                key = (path, name)
                if lines > limit:
                    if key in KNOWN:
                        seen.add(key)
                        if lines > KNOWN[key]:
                            problems.append("%s:%d: %s grew to %d lines (listed at %d, limit %d)"
                                            % (path, a, name, lines, KNOWN[key], limit))
                    else:
                        problems.append("%s:%d: %s has %d lines (limit %d)" % (path, a, name, lines, limit))
    for key in sorted(set(KNOWN) - seen):
        problems.append("%s: %s is within its limit now (or gone): remove it from KNOWN" % key)
    rows.sort(reverse=True)
    if show:
        for lines, where, name, limit in rows:
            if lines > 60:
                print("%5d  %-45s %s%s" % (lines, where, name, "  OVER %d" % limit if lines > limit else ""))
    for p in problems:
        print(p)
    over = sum(1 for r in rows if r[0] > r[3])
    print("check-function-sizes: %d functions, %d over their limit (%d listed in KNOWN), %d problems"
          % (len(rows), over, len(seen), len(problems)))
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
