# dictionary: dictionaries/demo-subbit.yaml
# Waits become idle patterns, exactly (docs/spec/command-list.md section 6).
# R_b = 1000 bit/s, preamble P = 32, gap G = 8, postamble T = 8 patterns.
wait 100ms          # before the first command: max(P, ceil(0.1 * 1000)) = 100
OBC_NOOP
OBC_NOOP            # no wait: the gap, 8
wait 2ms            # max(8, 2) = 8
OBC_NOOP
WAIT 1 s            # keyword in any case; number and unit may be two tokens
wait 0.5s           # consecutive waits add: 1.5 s -> 1500
OBC_NOOP
wait 10.5ms         # ceil(10.5) = 11
OBC_NOOP
wait 0.1min         # after the last command: the postamble becomes 6000
