# dictionary: dictionaries/demo-subbit.yaml
# Values of every type (docs/spec/command-list.md section 5).
OBC_SET_TIME seconds=0x1F2E3D4C               # hexadecimal, no unit allowed after it
OBC_SET_TIME seconds=0b101                    # binary
OBC_SET_TIME seconds=1e3s                     # exponent and the argument's unit
OBC_DUMP_MEMORY address=4096                  # length takes its default (16)
PWR_SWITCH channel=HEATERS state=on           # enum label (case-sensitive), boolean word
PWR_SWITCH state=0 channel=CAMERA             # any order; boolean 0
THERM_SETPOINT zone=BATTERY setpoint=20.25degC   # tie between raw 120 (20.0) and 121 (20.5): smaller raw
THERM_HEATER zone=OPTICS enable=YES duty=35%  # booleans ignore case; unit '%'
PWR_ARRAY_ANGLE angle=-12.5deg                # signed, calibrated: raw -1250
COMM_TUNE offset=-2.5kHz                      # SI prefix k: -2500 Hz
ADCS_SLEW axis=Z rate=-750mdeg/s duration=90s # SI prefix m on a compound unit
THERM_LOOP_GAIN gain=-0                       # float32 keeps the sign of zero
ADCS_SET_GAIN kp=0.1                          # float32 rounded once to nearest-even
