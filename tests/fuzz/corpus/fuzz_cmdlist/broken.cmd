OBC_NOP
OBC_SET_MODE mode=STANDBYX
THERM_SETPOINT zone=BATTERY setpoint=1e999degC
wait 86401s
COMM_TUNE offset==
PROP_FIRE thruster=T2 pulse=120ms count=4
