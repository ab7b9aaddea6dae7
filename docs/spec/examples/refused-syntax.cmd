# dictionary: dictionaries/demo-subbit.yaml
# refused: every mistake of the list is reported in one run.
OBC_SET_MODE mode = STANDBY
OBC_SET_MODE mode="STANDBY"
wait 2S
THERM_SETPOINT zone=BATTERY setpoint=100degC
obc_noop
