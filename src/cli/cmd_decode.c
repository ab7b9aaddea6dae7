/* src/cli/cmd_decode.c - placeholder until the stage lands; refuses with exit 2. */
#include <stdio.h>
#include "cli.h"
int cmd_decode(int argc, char **argv)
{
    (void)argc; (void)argv;
    fprintf(stderr, "ulk decode: not available in this build\n");
    return 2;
}
