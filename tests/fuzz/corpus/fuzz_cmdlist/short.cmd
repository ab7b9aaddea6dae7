OBC_NOOP
wait 1s
PROP_ARM arm=true key=0xA5C3 confirm
