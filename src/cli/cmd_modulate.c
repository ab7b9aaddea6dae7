/* src/cli/cmd_modulate.c - placeholder until the stage lands; refuses with exit 2. */
#include <stdio.h>
#include "cli.h"
int cmd_modulate(int argc, char **argv)
{
    (void)argc; (void)argv;
    fprintf(stderr, "ulk modulate: not available in this build\n");
    return 2;
}
