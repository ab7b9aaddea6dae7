/* src/cli/cmd_inspect.c - placeholder until the stage lands; refuses with exit 2. */
#include <stdio.h>
#include "cli.h"
int cmd_inspect(int argc, char **argv)
{
    (void)argc; (void)argv;
    fprintf(stderr, "ulk inspect: not available in this build\n");
    return 2;
}
