# Demo pass plan for the fictional relay orbiter Harrowick-3 (dictionary demo-ccsds.yaml).
# Each command goes up as one Space Packet in one Type-AD frame in one CLTU.

OBC_PING                                        # link check: the counter steps by one
OBC_SET_TIME seconds=0x2B3C4D5E subseconds=500ms
wait 250ms
OBC_SET_MODE mode=STANDBY
PWR_SWITCH line=HEATER_A state=on
PWR_BATTERY_LIMIT voltage=32.8V current=2500mA  # SI prefix: 2.5 A
THRM_SETPOINT zone=TANK setpoint=-5.5degC
RF_SET_POWER level=27.5dBm
RF_BEACON enable=false
wait 1s
AOCS_SET_MODE mode=EARTH_POINT
AOCS_SLEW q0=0.7071 q1=0 q2=0 q3=0.7071 rate=0.25deg/s
AOCS_WHEEL_BIAS wheel=2 speed=-1500rpm
OBC_LOAD_TABLE table=7 offset=0x0100 w0=0xDEADBEEF w1=1 w2=0b1010 w3=4294967295
wait 0.5s
PROP_ARM arm=true key=0x5AA5 confirm            # critical: the operator confirms
PROP_BURN duration=12.5s thrust=80% confirm
PROP_ARM arm=false key=0x5AA5 confirm
RELAY_SCHEDULE start=3600s length=1200s band=X
RELAY_STOP
OBC_SET_MODE mode=RELAY
