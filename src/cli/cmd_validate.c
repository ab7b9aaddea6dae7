/* src/cli/cmd_validate.c - placeholder until the stage lands; refuses with exit 2. */
#include <stdio.h>
#include "cli.h"
int cmd_validate(int argc, char **argv)
{
    (void)argc; (void)argv;
    fprintf(stderr, "ulk validate: not available in this build\n");
    return 2;
}
