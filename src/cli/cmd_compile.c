/* src/cli/cmd_compile.c - `ulk compile --dict DICT LIST -o UPLOAD` (LIST "-": standard input;
 * UPLOAD "-": standard output).
 * Exit 0 written; 1 the dictionary or the list has errors (nothing written); 2 usage or I/O. */
#include <stdio.h>
#include <string.h>

#include "cli.h"
#include "ulk/cmdlist.h"
#include "ulk/dict.h"
#include "ulk/upload.h"

static void usage(FILE *out)
{
    fprintf(out,
            "usage: ulk compile --dict DICT LIST -o UPLOAD\n"
            "\n"
            "Compiles the command list LIST with dictionary DICT into the upload file UPLOAD\n"
            "(docs/upload-format.md). Every error of the list is reported as file:line:col; on\n"
            "any error nothing is written. Critical commands need 'confirm' on their line.\n"
            "\n"
            "options:\n"
            "  LIST            the command list; - reads it from standard input\n"
            "  --dict DICT     command dictionary (YAML or JSON)\n"
            "  -o, --output F  upload file to write (atomically; - for standard output); it may\n"
            "                  not be the dictionary or the list\n"
            "  -q, --quiet     no summary\n"
            "  -h, --help      this text\n"
            "\nexit: 0 written, 1 errors in the dictionary or the list, 2 usage or I/O error\n");
}

enum { O_DICT = CLI_LONG, O_OUTPUT = 'o', O_QUIET = 'q' };
static const struct option opts[] = {{"dict", required_argument, NULL, O_DICT},
                                     {"output", required_argument, NULL, O_OUTPUT},
                                     {"quiet", no_argument, NULL, O_QUIET},
                                     {"help", no_argument, NULL, 'h'},
                                     {0, 0, 0, 0}};
static const cli_command command = {"compile", opts, usage};

typedef struct {
    const char *dict_path, *out_path;
    int quiet;
} args;

static int on_opt(int v, const char *arg, void *ctx)
{
    args *a = ctx;
    if (v == O_DICT) a->dict_path = arg;
    else if (v == O_OUTPUT) a->out_path = arg;
    else if (v == O_QUIET) a->quiet = 1;
    return 0;
}

int cmd_compile(int argc, char **argv)
{
    args a = {0};
    int first, r = cli_parse(&command, argc, argv, on_opt, &a, &first);
    if (r >= 0) return r;
    const char *dict_path = a.dict_path, *out_path = a.out_path, *list_path = first < argc ? argv[first] : NULL;
    if (argc - first > 1) {
        fprintf(stderr, "ulk compile: more than one command list ('%s' and '%s')\n", argv[first], argv[first + 1]);
        return CLI_EXIT_USAGE_IO;
    }
    if (!dict_path || !list_path || !out_path) {
        fprintf(stderr, "ulk compile: %s is required\n", !dict_path ? "--dict DICT" : !list_path ? "LIST" : "-o UPLOAD");
        usage(stderr);
        return CLI_EXIT_USAGE_IO;
    }
    const char *ins[] = {dict_path, list_path}, *what[] = {"dictionary", "command list"};
    if ((r = cli_refuse_overwrite("compile", out_path, ins, what, 2))) return r;
    /* the upload on standard output: the summary goes to standard error */
    FILE *say = cli_is_std(out_path) ? stderr : stdout;
    int quiet = a.quiet;
    ulk_diag *diag = ulk_diag_create();
    if (!diag) { fprintf(stderr, "ulk compile: out of memory\n"); return 2; }
    ulk_dict *dict = NULL;
    ulk_cmdlist *list = NULL;
    ulk_upload *up = NULL;
    int exit_code = 0;

    if ((exit_code = cli_load_dict("compile", dict_path, &dict))) {
        fprintf(stderr, "ulk compile: no upload written\n");
        goto done;
    }
    int rc = ulk_cmdlist_load(list_path, &list, diag);
    if (!list) {
        ulk_diag_print(diag, stderr);
        fprintf(stderr, "ulk compile: no upload written\n");
        exit_code = cli_exit_for(rc);
        goto done;
    }
    if (rc < 0 && list->n_items == 0) { /* nothing readable: the list's own refusal is the message */
        ulk_diag_print(diag, stderr);
        fprintf(stderr, "ulk compile: no upload written\n");
        exit_code = cli_exit_for(rc);
        goto done;
    }
    rc = ulk_compile(dict, list, &up, diag);
    ulk_diag_sort(diag);
    ulk_diag_print(diag, stderr);
    if (rc < 0 || !up) {
        fprintf(stderr, "ulk compile: %zu error%s in %s; no upload written\n", ulk_diag_errors(diag),
                ulk_diag_errors(diag) == 1 ? "" : "s", list_path);
        exit_code = rc == ULK_ENOMEM ? CLI_EXIT_USAGE_IO : CLI_EXIT_REFUSED;
        goto done;
    }
    ulk_diag_clear(diag);
    if ((rc = ulk_upload_write(up, out_path, diag)) < 0) {
        ulk_diag_print(diag, stderr);
        exit_code = cli_exit_for(rc);
        goto done;
    }
    if (!quiet) {
        uint64_t n_sub = ulk_upload_n_subbits(up);
        char rb[64];
        ulk_ratio_format(up->link.bit_rate, rb, sizeof rb);
        fprintf(say, "compiled %s with %s %s -> %s\n", list_path, dict->name, dict->version, out_path);
        fprintf(say, "  commands  %zu\n", up->n_cmds);
        if (up->link.profile == ULK_PROFILE_CCSDS_TC) {
            size_t oct = 0;
            for (size_t i = 0; i < up->n_cmds; i++) oct += up->cmds[i].n_cltu;
            fprintf(say, "  CLTUs     %zu (%zu octets; one packet per frame per CLTU)\n", up->n_cmds, oct);
            fprintf(say, "  channel   %llu bits (acquisition, CLTUs, idle)\n", (unsigned long long)n_sub);
        } else {
            fprintf(say, "  words     %zu x %d bits (check %s)\n", up->n_cmds, up->link.word_bits, ulk_check_name(up->link.check));
            fprintf(say, "  sub-bits  %llu (%d per bit)\n", (unsigned long long)n_sub, up->link.n_subbits);
        }
        fprintf(say, "  duration  %.6f s at %s bit/s\n", ulk_upload_duration_s(up), rb);
        size_t n_crit = 0;
        for (size_t i = 0; i < up->n_cmds; i++) n_crit += up->cmds[i].critical != 0;
        fprintf(say, "  critical  %zu\n", n_crit);
        for (size_t i = 0; i < up->n_cmds; i++)
            if (up->cmds[i].critical)
                fprintf(say, "    line %d: %s (word %zu)\n", up->cmds[i].line, up->cmds[i].mnemonic, i + 1);
    }
done:
    ulk_upload_destroy(up);
    ulk_cmdlist_destroy(list);
    ulk_dict_destroy(dict);
    ulk_diag_destroy(diag);
    return exit_code;
}
