# Demo pass plan for the fictional probe Orrel-2 (dictionary demo-subbit.yaml).
# Wake the probe, set the clock, prepare a survey image and a small attitude trim.

OBC_NOOP                                   # link check: the counter must step by one
OBC_SET_TIME seconds=0x1F2E3D4C            # mission elapsed time, hex
wait 500ms
OBC_SET_MODE mode=STANDBY
PWR_SWITCH channel=HEATERS state=on
THERM_SETPOINT zone=BATTERY setpoint=21.5degC
THERM_HEATER zone=OPTICS enable=yes duty=35%
PWR_CHARGE voltage=29.4V rate=C_10
COMM_TUNE offset=-2.5kHz                   # SI prefix: -2500 Hz
COMM_BEACON enable=false period=60s
wait 2s
ADCS_SET_MODE mode=SUN_POINT
ADCS_SLEW axis=Z rate=-0.75deg/s duration=90s
ADCS_SET_GAIN kp=2.5e-2
ADCS_MAGNETORQUE enable=1 x=0.35 y=-0.2A*m2
wait 1.5s
PROP_ARM arm=true key=0xA5C3 confirm        # critical: the operator confirms
PROP_FIRE thruster=T2 pulse=120ms count=4 confirm
PROP_ARM arm=false key=0b1010010111000011 confirm
wait 0.1min
CAM_CONFIG gain=HIGH binning=2 compress=off
CAM_EXPOSURE exposure=12.5ms
CAM_CAPTURE images=10 interval=1500ms
OBC_WATCHDOG timeout=45s
OBC_SET_MODE mode=SURVEY
