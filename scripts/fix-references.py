#!/usr/bin/python3
"""Points every reference to the project's former design pages at the specification in
docs/spec/, and fails if any reference to a place outside the repository remains.

    python3 scripts/fix-references.py                  # the whole tree (tracked files)
    python3 scripts/fix-references.py docs README.md   # only these files / folders
    python3 scripts/fix-references.py --check [PATH...]   # change nothing, report only

Paths are relative to the repository root (the script finds it from its own place).
Every change is printed as `FILE:LINE: old -> new`. Running it twice changes nothing the
second time (the new names share no pattern with the old ones). Exit status: 0 when no
reference outside the repository remains in the files looked at, 1 when one does (each is
printed), 2 on a usage or I/O error.

The former pages were numbered so that docs/spec/ keeps their section numbers: section N
of the sub-bit page is section N of docs/spec/subbit.md, and likewise for the telecommand
and carrier pages; only the file name changes. The interface page was split by subject
(program, dictionary, command list, decode output), so its references are mapped by the
words around them. Debian python3 only; no other module.
"""
import os
import re
import subprocess
import sys

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))

# The four former page names, written so that this file does not itself match them.
SUB = r"subbit-profile\.md"
TC = r"ccsds-tc-profile\.md"
CAR = r"composite-carrier\.md"
IFC = r"interfaces\.md"
# Any folder prefix the old references carried: a design folder outside the repository,
# reached by a relative or absolute path.
DESIGN = r"shared/(?:design)"
PRE = r"(?:(?:(?:/|\.\./)?[\w.-]+/)*" + DESIGN + r"/|(?:\.\./)+)?"

# (regex, replacement): the first matching row wins at each position, so the rows for the
# split interface page come before its catch-all row.
TABLE = [
    # the interface page, by subject
    (PRE + IFC + r',\s*"Command list"', "docs/spec/command-list.md"),
    (PRE + IFC + r"(?=\s+syntax)", "docs/spec/command-list.md"),
    (r"(?<=Command list \()" + PRE + IFC, "docs/spec/command-list.md"),
    (r"(?<=dictionary tree of )" + PRE + IFC, "docs/spec/dictionary.md"),
    (r"(?<=integers \()" + PRE + IFC, "docs/spec/dictionary.md"),
    (r"(?<=JSON is the contract of `)" + PRE + IFC, "docs/spec/decode-output.md"),
    (r"(?<=and )" + PRE + IFC + r"(?= alone)",
     "docs/spec/dictionary.md and docs/spec/command-list.md"),
    (PRE + IFC, "docs/spec/cli.md"),
    # the three profile pages: same section numbers in their new place
    (PRE + SUB, "docs/spec/subbit.md"),
    (PRE + TC, "docs/spec/ccsds-tc.md"),
    (PRE + CAR, "docs/spec/carrier.md"),
    # a bare design folder
    (r"(?:(?:/|\.\./)?[\w.-]+/)*" + DESIGN + r"/?", "docs/spec/"),
    # the hostile table's note on where known bugs were listed while the team worked
    (r"\(/(?:work)/notes/bugs-\*\.md while the team", "(in the team's bug list while the team"),
]
COMPILED = [(re.compile(p), r) for p, r in TABLE]
ANY = re.compile("|".join("(?:%s)" % p for p, _ in TABLE))

# What must not remain: a former page name, a design folder, or an absolute path into a
# place that is not a standard system folder (temporary files, devices, /usr/bin/python3
# are fine; a user's or a build machine's folders are not). "nonexistent..." names a path
# that must not exist (tests of a missing file). A path right after a folder variable
# (`SOURCE_DIR "/dictionaries/..."`, `${CMAKE_SOURCE_DIR}/src`) is inside the repository.
OUTSIDE_NAMES = re.compile(r"(?:subbit-profile|ccsds-tc-profile|composite-carrier|interfaces)\.md|" + DESIGN)
ABS_PATH = re.compile(r"(?:^|(?<=[\s\"'`(=:,;<\[]))(?<!DIR \")/([A-Za-z][\w.-]*)/")
SYSTEM_DIRS = {"tmp", "dev", "usr", "proc", "sys", "etc", "bin", "sbin", "lib", "lib64", "var", "run"}
SKIP_FILES = {".gitignore"}  # its patterns are relative to the repository by definition


SPEC_REF = re.compile(r"docs/spec/([\w.-]+\.md)")


def outside_refs(line):
    """The references to places outside the repository in one line of text, and references
    into docs/spec/ that name no page there (a rewritten path must land on a real page)."""
    found = [m.group(0) for m in OUTSIDE_NAMES.finditer(line)]
    for m in SPEC_REF.finditer(line):
        if not os.path.isfile(os.path.join(ROOT, "docs", "spec", m.group(1))):
            found.append(m.group(0) + " (no such page)")
    for m in ABS_PATH.finditer(line):
        top = m.group(1)
        if top not in SYSTEM_DIRS and not top.startswith("nonexistent"):
            found.append(m.group(0))
    return found


def substitute(line):
    """line with every old reference replaced, and the list of (old, new) changes."""
    changes = []

    def repl(m):
        old = m.group(0)
        for rx, new in COMPILED:
            r = rx.match(line, m.start())
            if r and r.end() == m.end():
                changes.append((old, new))
                return new
        return old

    return ANY.sub(repl, line), changes


def tracked_files(paths):
    cmd = ["git", "-C", ROOT, "ls-files", "-z", "--"] + (paths or ["."])
    try:
        out = subprocess.run(cmd, check=True, stdout=subprocess.PIPE).stdout
    except (OSError, subprocess.CalledProcessError) as e:
        sys.exit("fix-references: cannot list the tracked files (%s)" % e)
    return [f for f in out.decode("utf-8", "surrogateescape").split("\0") if f]


def main(argv):
    check_only = False
    paths = []
    for a in argv:
        if a == "--check":
            check_only = True
        elif a in ("-h", "--help"):
            try:
                print(__doc__)
            except BrokenPipeError:
                pass
            return 0
        elif a.startswith("-"):
            print("fix-references: unknown option %r" % a, file=sys.stderr)
            return 2
        else:
            paths.append(a)
    n_changed = 0
    remaining = []
    for rel in tracked_files(paths):
        if os.path.basename(rel) in SKIP_FILES:
            continue
        full = os.path.join(ROOT, rel)
        try:
            with open(full, "rb") as f:
                data = f.read()
        except OSError as e:
            print("fix-references: %s: %s" % (rel, e.strerror), file=sys.stderr)
            return 2
        if b"\0" in data:
            continue  # binary (sample files, fuzz inputs)
        text = data.decode("utf-8", "surrogateescape")
        lines = text.split("\n")
        out = []
        for no, line in enumerate(lines, 1):
            new, changes = substitute(line)
            for old, rep in changes:
                print("%s:%d: %s -> %s" % (rel, no, old, rep))
                n_changed += 1
            for r in outside_refs(new):
                remaining.append("%s:%d: %s" % (rel, no, r))
            out.append(new)
        new_text = "\n".join(out)
        if new_text != text and not check_only:
            tmp = full + ".fixref.tmp"
            with open(tmp, "wb") as f:
                f.write(new_text.encode("utf-8", "surrogateescape"))
            os.chmod(tmp, os.stat(full).st_mode & 0o7777)
            os.replace(tmp, full)
    verb = "would change" if check_only else "changed"
    print("fix-references: %s %d reference%s" % (verb, n_changed, "" if n_changed == 1 else "s"))
    if remaining:
        print("fix-references: %d reference%s outside the repository remain%s:" %
              (len(remaining), "" if len(remaining) == 1 else "s", "" if len(remaining) != 1 else "s"),
              file=sys.stderr)
        for r in remaining:
            print("  " + r, file=sys.stderr)
        return 1
    if check_only and n_changed:
        return 1  # references listed above are still to be changed
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
