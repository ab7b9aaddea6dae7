/* src/cli/cmd_verify.c - placeholder until the stage lands; refuses with exit 2. */
#include <stdio.h>
#include "cli.h"
int cmd_verify(int argc, char **argv)
{
    (void)argc; (void)argv;
    fprintf(stderr, "ulk verify: not available in this build\n");
    return 2;
}
