# dictionary: dictionaries/demo-ccsds.yaml
# The same syntax on the CCSDS telecommand profile: one CLTU per command
# (docs/spec/ccsds-tc.md section 2.5).
OBC_PING
OBC_SET_MODE mode=STANDBY
wait 250ms
PWR_SWITCH line=HEATER_A state=on
