#!/usr/bin/env bash
# scripts/demo.sh ULK - the whole job on the bundled demo: validate, compile, inspect,
# modulate (samples and timing table), impair (noise, clock error, delay, inversion),
# decode and verify; then the same on the ccsds-tc demo (dictionaries/demo-ccsds.*) and on its
# authenticated variant (dictionaries/demo-ccsds-sec.*, with a demo key file made here).
# Outputs go to out/demo/. Exits non-zero when any step fails.
set -euo pipefail
ulk=${1:-build/ulk}
here=$(cd "$(dirname "$0")/.." && pwd)
cd "$here"
out=out/demo
mkdir -p "$out"
dict=dictionaries/demo-subbit.yaml
list=dictionaries/demo-subbit.cmd
# q WORD: WORD quoted for the shell (spaces and quotes in a checkout path stay pasteable).
q() { printf '%q' "$1"; }
# step TITLE COMMAND: prints COMMAND exactly as it can be pasted into a shell started in the
# repository's folder, then runs that same text (without pipefail, as an interactive shell
# would: `| head` must not fail the step).
step() { printf '\n== %s\n$ %s\n' "$1" "$2"; (set +o pipefail; eval "$2"); }
u=$(q "$ulk")
echo "(each command below runs in $(q "$here"); paste it there to run it again)"

step "validate the demo dictionary (YAML and JSON)" "$u validate $dict dictionaries/demo-subbit.json"
step "compile the demo command list" "$u compile --dict $dict $list -o $out/demo.ulku"
step "inspect the upload (first words)" "$u inspect $out/demo.ulku | head -n 40"
step "modulate to a 48 kHz WAV and write the timing table" \
  "$u modulate $out/demo.ulku -o $out/demo.wav --rate 48000 --timing $out/demo-timing.csv"
step "impair: Eb/N0 12 dB, +150 ppm clock, 0.3 s leading noise, -20 dB level, inverted" \
  "$u impair $out/demo.wav -o $out/demo-rx.wav --dict $dict --ebn0 12 --ppm 150 --delay 0.3 --amplitude 0.1 --invert --seed 1"
step "decode the impaired capture blind" "$u decode --dict $dict $out/demo-rx.wav | head -n 40"
step "verify the capture against the upload" "$u verify --dict $dict --upload $out/demo.ulku $out/demo-rx.wav"

# The second link profile: the same commands and exit codes on CCSDS telecommand
# (dictionaries/demo-ccsds.yaml: one Space Packet per TC frame per CLTU).
tdict=dictionaries/demo-ccsds.yaml
tlist=dictionaries/demo-ccsds.cmd
step "ccsds-tc: validate the demo dictionary (YAML and JSON)" "$u validate $tdict dictionaries/demo-ccsds.json"
step "ccsds-tc: compile the demo command list" "$u compile --dict $tdict $tlist -o $out/demo-ccsds.ulku"
step "ccsds-tc: inspect the upload (first CLTUs)" "$u inspect $out/demo-ccsds.ulku | head -n 36"
step "ccsds-tc: modulate to a 48 kHz WAV and write the timing table" \
  "$u modulate $out/demo-ccsds.ulku -o $out/demo-ccsds.wav --rate 48000 --timing $out/demo-ccsds-timing.csv"
step "ccsds-tc: impair: Eb/N0 12 dB, -120 ppm clock, 0.2 s leading noise, inverted" \
  "$u impair $out/demo-ccsds.wav -o $out/demo-ccsds-rx.wav --dict $tdict --ebn0 12 --ppm -120 --delay 0.2 --invert --seed 2"
step "ccsds-tc: decode the impaired capture blind" "$u decode --dict $tdict $out/demo-ccsds-rx.wav | head -n 40"
step "ccsds-tc: verify the capture against the upload" \
  "$u verify --dict $tdict --upload $out/demo-ccsds.ulku $out/demo-ccsds-rx.wav"
# Authenticated commanding on the CCSDS profile (dictionaries/demo-ccsds-sec.yaml,
# docs/sdls.md): every frame carries SPI, IV and an AES-256-GCM MAC. The key file is a DEMO
# key made here from /dev/urandom, mode 0600, kept beside its counters in out/demo/.
sdict=dictionaries/demo-ccsds-sec.yaml
skeys=$out/demo-sec.keys
step "secured ccsds-tc: create a DEMO key file, mode 0600 (a demo key: never use it for a real vehicle)" \
  "test -f $skeys || (umask 077 && { echo '# DEMO KEY made by scripts/demo.sh for the fictional Harrowick-3 demo only.'; echo '# It protects nothing real: never use it for a real vehicle. NAME HEX (AES-256).'; printf 'harrowick3-uplink %s\\n' \"\$(od -An -tx1 -N32 /dev/urandom | tr -d ' \\n')\"; } >$skeys); chmod 600 $skeys; ls -l $skeys"
step "secured ccsds-tc: validate the dictionary (YAML and JSON)" "$u validate $sdict dictionaries/demo-ccsds-sec.json"
step "secured ccsds-tc: compile with the key; IV counters from the send-side state" \
  "$u compile --dict $sdict $tlist -o $out/demo-sec.ulku --keys $skeys --state $out/demo-sec-tx.state"
step "secured ccsds-tc: inspect (SPI, IV counter and MAC per frame)" "$u inspect $out/demo-sec.ulku | head -n 16"
step "secured ccsds-tc: modulate to a 48 kHz WAV" "$u modulate $out/demo-sec.ulku -o $out/demo-sec.wav --rate 48000"
step "secured ccsds-tc: impair: Eb/N0 12 dB, +60 ppm clock, 0.1 s leading noise, inverted" \
  "$u impair $out/demo-sec.wav -o $out/demo-sec-rx.wav --dict $sdict --ebn0 12 --ppm 60 --delay 0.1 --invert --seed 3"
rm -f "$out/demo-sec-rx.state"
step "secured ccsds-tc: decode with the key: every frame authenticated (receive state kept)" \
  "$u decode --dict $sdict $out/demo-sec-rx.wav --keys $skeys --state $out/demo-sec-rx.state | tail -n 6"
step "secured ccsds-tc: the same capture again with that state: every frame replayed (decode exits 1)" \
  "$u decode --dict $sdict $out/demo-sec-rx.wav --keys $skeys --state $out/demo-sec-rx.state | tail -n 4; test \${PIPESTATUS[0]} -eq 1"
step "secured ccsds-tc: verify the capture against the upload with the key" \
  "$u verify --dict $sdict --upload $out/demo-sec.ulku $out/demo-sec-rx.wav --keys $skeys"
step "composite carrier: power division and margins per mode" "$u plan $dict --plot $out/plan.svg"
step "composite carrier: complex baseband of mode 'full' (data, voice, ranging)" \
  "$u modulate $out/demo.ulku --carrier --mode full --dict $dict -o $out/demo-full.cf32 --rate 192000"
step "composite carrier: spectrum picture with the channels marked" \
  "$u spectrum $out/demo-full.cf32 --dict $dict -o $out/spectrum-full.png"
echo
echo "demo outputs are in $out/"
