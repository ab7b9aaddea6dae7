# dictionary: dictionaries/demo-subbit.yaml
# Line ends CR LF, tabs, blank lines and comments (docs/spec/command-list.md section 3).
# UTF-8 is welcome in comments: 20 °C, Ångström.

	OBC_NOOP		# leading and trailing blanks are ignored
   
OBC_SET_MODE	mode=STANDBY#a comment may touch the value
OBC_NOOP