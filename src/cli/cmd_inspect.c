/* src/cli/cmd_inspect.c - `ulk inspect UPLOAD [--json | --list]`: every word with its fields
 * named, hex, binary, sub-bits and start time; or the upload printed back as a command list.
 * Exit 0 shown; 1 the file is not a valid upload (changed, inconsistent, wrong version);
 * 2 usage or I/O. */
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "cli.h"
#include "ulk/profile.h"
#include "ulk/upload.h"
#include "util.h"

static void usage(FILE *out)
{
    fprintf(out,
            "usage: ulk inspect UPLOAD [--json | --list]\n"
            "\n"
            "Shows every word of an upload file: its fields (vehicle, system, opcode and\n"
            "mnemonic, each argument raw and in engineering units, check), the word in hex and\n"
            "binary, its sub-bits and start time, and the totals. The file's digest and every\n"
            "word's fields are checked first. For a ccsds-tc upload: every CLTU with its frame\n"
            "and packet header fields by name, opcode and arguments, FECF, frame hex and CLTU hex.\n"
            "\n"
            "options:\n"
            "  --json      the same as JSON (each word's \"hex\" is its W-bit value right-aligned\n"
            "              in ceil(W/4) digits)\n"
            "  --list      print the upload back as a command list (waits, confirm on critical\n"
            "              commands; each command on its source line), ready for ulk compile\n"
            "  -h, --help  this text\n"
            "\nexit: 0 shown, 1 not a valid upload, 2 usage or I/O error\n");
}


static const struct option opts[] = {{"json", no_argument, NULL, 'j'},
                                     {"list", no_argument, NULL, 'l'},
                                     {"help", no_argument, NULL, 'h'},
                                     {0, 0, 0, 0}};
static const cli_command command = {"inspect", opts, usage};

static int on_opt(int v, const char *arg, void *ctx)
{
    int *mode = ctx; /* bit 0 --json, bit 1 --list */
    *mode |= v == 'j' ? 1 : 2;
    return 0;
}

int cmd_inspect(int argc, char **argv)
{
    int mode = 0, first;
    int r = cli_parse(&command, argc, argv, on_opt, &mode, &first);
    if (r >= 0) return r;
    int json = mode & 1, list = (mode & 2) != 0;
    const char *path = first < argc ? argv[first] : NULL;
    if (argc - first > 1) { fprintf(stderr, "ulk inspect: one upload file at a time\n"); return CLI_EXIT_USAGE_IO; }
    if (!path || (json && list)) {
        fprintf(stderr, "ulk inspect: %s\n", !path ? "UPLOAD is required" : "--json and --list exclude each other");
        usage(stderr);
        return CLI_EXIT_USAGE_IO;
    }
    ulk_diag *diag = ulk_diag_create();
    if (!diag) { fprintf(stderr, "ulk inspect: out of memory\n"); return 2; }
    ulk_upload *u = NULL;
    int rc = ulk_upload_read(path, &u, diag);
    if (rc < 0) {
        ulk_diag_print(diag, stderr);
        ulk_diag_destroy(diag);
        return cli_exit_for(rc);
    }
    int code;
    if (list) code = ulk_upload_print_list(u, stdout) < 0 ? 2 : 0;
    else if (json) code = ulk_profile_of(&u->link)->inspect_json(stdout, u) < 0 ? 2 : 0;
    else code = ulk_profile_of(&u->link)->inspect_text(stdout, cli_is_std(path) ? "<stdin>" : path, u) < 0 ? 2 : 0;
    ulk_upload_destroy(u);
    ulk_diag_destroy(diag);
    return code;
}
