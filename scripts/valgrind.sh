#!/usr/bin/env bash
# scripts/valgrind.sh - the whole ctest suite under valgrind memcheck (plain build).
#   bash scripts/valgrind.sh [BUILD_DIR] [-R REGEX] [-E REGEX]
# BUILD_DIR (default build-valgrind) is configured and built without sanitizers. Every test
# that ctest knows is run with its own command, environment and working folder (read from
# `ctest --show-only=json-v1`):
#   - cmocka programs run under valgrind themselves;
#   - Python and shell tests run as they are, with ULK pointing at a wrapper that runs the real
#     ulk under valgrind, so every ulk invocation of those tests is checked.
# valgrind: --leak-check=full --errors-for-leak-kinds=definite,indirect --error-exitcode=97,
# one log per process under BUILD_DIR/valgrind/. -R runs only the tests matching REGEX, -E leaves
# out those matching REGEX (default: sh_test_ccsds_alloc, an allocation sweep that cannot be
# thinned and would take most of an hour under valgrind; the ASan pass runs it). Printed per test: its verdict, valgrind
# processes, errors; at the end the totals. Exits 1 when any test fails or any process reports
# an error or a definite/indirect leak. The allocation sweep is thinned (ALLOC_SWEEP_DENSE,
# ALLOC_SWEEP_DIV) because each of its runs costs a second under valgrind.
# Takes tens of minutes on 2 cores: not part of CI; run it before a release.
set -uo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
cd "$here"
bdir=build-valgrind
regex=""
exclude="^sh_test_ccsds_alloc$"
while [ $# -gt 0 ]; do
  case $1 in
    -R) regex=$2; shift 2 ;;
    -E) exclude=$2; shift 2 ;;
    -h|--help) sed -n '2,20p' "$0"; exit 0 ;;
    *) bdir=$1; shift ;;
  esac
done
command -v valgrind >/dev/null || { echo "valgrind.sh: valgrind is not installed (apt-get install valgrind)" >&2; exit 2; }
case $bdir in /*) ;; *) bdir=$here/$bdir ;; esac

echo "== plain build in $bdir"
cmake -S . -B "$bdir" -DCMAKE_BUILD_TYPE=RelWithDebInfo -DULK_SANITIZE=OFF >/dev/null &&
  cmake --build "$bdir" -j"$(nproc 2>/dev/null || echo 2)" >/dev/null || { echo "valgrind.sh: build failed" >&2; exit 1; }

logs=$bdir/valgrind
rm -rf "$logs"; mkdir -p "$logs"
# The hostile-input test runs some ulk commands as 'nobody': the logs folder must take their logs.
chmod 1777 "$logs"
VG="valgrind --suppressions=$here/scripts/valgrind.supp --error-exitcode=97 --leak-check=full --errors-for-leak-kinds=definite,indirect --show-leak-kinds=definite,indirect --num-callers=30"
wrap=$logs/ulk-under-valgrind
# Every command runs under valgrind, compile included: argument values are decided in exact
# rationals (src/exact.h), so valgrind's emulation of x87 long double no longer matters.
cat >"$wrap" <<EOF
#!/bin/sh
exec $VG --log-file="$logs/ulk.%p.log" "$bdir/ulk" "\$@"
EOF
chmod 755 "$wrap"

ctest --test-dir "$bdir" --show-only=json-v1 >"$logs/tests.json" || exit 1
VG="$VG" WRAP="$wrap" LOGS="$logs" REGEX="$regex" EXCLUDE="$exclude" /usr/bin/python3 - <<'EOF'
import glob, json, os, re, subprocess, sys, time

logs, wrap, vg = os.environ["LOGS"], os.environ["WRAP"], os.environ["VG"].split()
regex = re.compile(os.environ["REGEX"]) if os.environ["REGEX"] else None
exclude = re.compile(os.environ["EXCLUDE"]) if os.environ["EXCLUDE"] else None
tests = json.load(open(os.path.join(logs, "tests.json")))["tests"]

def scan(pattern):
    """(processes, errors, logs with errors) over the valgrind logs matching pattern. With
    --errors-for-leak-kinds=definite,indirect the ERROR SUMMARY counts those leaks too."""
    n = errs = 0
    bad = []
    for p in glob.glob(pattern):
        n += 1
        text = open(p, errors="replace").read()
        m = re.findall(r"ERROR SUMMARY: ([0-9,]+) errors", text)
        # no summary: the process died under valgrind (or was killed by a test's time limit)
        e = int(m[-1].replace(",", "")) if m else 0
        if not m and "Process terminating" in text:
            e = 1
        if e:
            errs += e
            bad.append(p)
    return n, errs, bad

total_fail = total_err = total_proc = 0
err_in_passing = 0
t_start = time.time()
for t in tests:
    name = t["name"]
    if (regex and not regex.search(name)) or (exclude and exclude.search(name)):
        continue
    props = {p["name"]: p["value"] for p in t.get("properties", [])}
    env = dict(os.environ)
    for kv in props.get("ENVIRONMENT", []):
        k, _, v = kv.partition("=")
        env[k] = v
    cmd = list(t["command"])
    tdir = os.path.join(logs, name)
    os.makedirs(tdir, exist_ok=True)
    os.chmod(tdir, 0o1777)
    if "ULK" in env:
        # the wrapper's logs land in the common folder; move them per test afterwards
        env["ULK"] = wrap
        env["ALLOC_SWEEP_DENSE"] = "30"
        env["ALLOC_SWEEP_DIV"] = "5"
        env["ALLOC_SWEEP_TAIL"] = "40"
    if cmd[0] not in ("/usr/bin/python3", "/usr/bin/bash", "/bin/bash", "bash"):
        cmd = vg + ["--log-file=" + os.path.join(tdir, "prog.%p.log")] + cmd
    t0 = time.time()
    try:
        r = subprocess.run(cmd, cwd=props.get("WORKING_DIRECTORY"), env=env, stdout=subprocess.PIPE,
                           stderr=subprocess.STDOUT, timeout=7200)
        rc, out = r.returncode, r.stdout.decode(errors="replace")
    except subprocess.TimeoutExpired:
        rc, out = -1, "timeout after 7200 s"
    for p in glob.glob(os.path.join(logs, "ulk.*.log")):
        os.replace(p, os.path.join(tdir, os.path.basename(p)))
    n, errs, bad = scan(os.path.join(tdir, "*.log"))
    total_proc += n
    total_err += errs
    verdict = "ok" if rc == 0 and errs == 0 else "FAIL"
    if rc == 0:
        err_in_passing += errs
    if verdict == "FAIL":
        total_fail += 1
    print(f"{verdict:4} {name:32} exit {rc:3}  {n:5} processes under valgrind  {errs:3} errors  {time.time() - t0:7.1f} s", flush=True)
    if rc != 0:
        print("     | " + "\n     | ".join(out.strip().splitlines()[-8:]))
    for p in bad[:3]:
        print(f"     log: {p}")
        lines = [l for l in open(p, errors="replace").read().splitlines() if l.startswith("==")]
        start = next((i for i, l in enumerate(lines) if re.search(r"Invalid|uninit|lost in|Mismatched|Syscall|Process terminating", l)), 0)
        print("     | " + "\n     | ".join(lines[start:start + 14]))
print(f"valgrind: {total_proc} processes, {total_err} errors (incl. definite/indirect leaks), "
      f"{err_in_passing} of them in tests that passed, {total_fail} failing tests, {time.time() - t_start:.0f} s")
sys.exit(1 if total_fail or total_err else 0)
EOF
