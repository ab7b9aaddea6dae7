# dictionary: dictionaries/demo-subbit.yaml
# Critical commands are sent only with 'confirm' on their own line
# (docs/spec/command-list.md section 7).
PROP_ARM arm=true key=0xA5C3 confirm
OBC_RESET image=SAFE_IMAGE CONFIRM delay=10s   # anywhere after the mnemonic, any case
