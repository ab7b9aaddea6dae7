/* src/cli/cmd_impair.c - placeholder until the stage lands; refuses with exit 2. */
#include <stdio.h>
#include "cli.h"
int cmd_impair(int argc, char **argv)
{
    (void)argc; (void)argv;
    fprintf(stderr, "ulk impair: not available in this build\n");
    return 2;
}
