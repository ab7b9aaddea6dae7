# dictionary: dictionaries/demo-subbit.yaml
# refused: a critical command without 'confirm' (exit 1, nothing written).
PROP_ARM arm=true key=0xA5C3
