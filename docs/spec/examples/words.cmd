# dictionary: dictionaries/demo-subbit.yaml
# The two worked words of docs/spec/subbit.md section 2.3.
OBC_NOOP
OBC_SET_MODE mode=STANDBY
