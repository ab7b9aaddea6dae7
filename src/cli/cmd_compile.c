/* src/cli/cmd_compile.c - `ulk compile --dict DICT LIST -o UPLOAD`.
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
            "  --dict DICT     command dictionary (YAML or JSON)\n"
            "  -o, --output F  upload file to write (atomically)\n"
            "  -q, --quiet     no summary\n"
            "  -h, --help      this text\n"
            "\nexit: 0 written, 1 errors in the dictionary or the list, 2 usage or I/O error\n");
}

int cmd_compile(int argc, char **argv)
{
    const char *dict_path = NULL, *list_path = NULL, *out_path = NULL;
    int quiet = 0;
    for (int i = 1; i < argc; i++) {
        const char *a = argv[i];
        if (!strcmp(a, "-h") || !strcmp(a, "--help")) { usage(stdout); return 0; }
        else if (!strcmp(a, "--dict") && i + 1 < argc) dict_path = argv[++i];
        else if (!strncmp(a, "--dict=", 7)) dict_path = a + 7;
        else if ((!strcmp(a, "-o") || !strcmp(a, "--output")) && i + 1 < argc) out_path = argv[++i];
        else if (!strncmp(a, "--output=", 9)) out_path = a + 9;
        else if (!strcmp(a, "-q") || !strcmp(a, "--quiet")) quiet = 1;
        else if (a[0] == '-' && a[1]) {
            fprintf(stderr, "ulk compile: unknown or incomplete option '%s'\n", a);
            usage(stderr);
            return 2;
        } else if (!list_path) list_path = a;
        else {
            fprintf(stderr, "ulk compile: more than one command list ('%s' and '%s')\n", list_path, a);
            return 2;
        }
    }
    if (!dict_path || !list_path || !out_path) {
        fprintf(stderr, "ulk compile: %s is required\n", !dict_path ? "--dict DICT" : !list_path ? "LIST" : "-o UPLOAD");
        usage(stderr);
        return 2;
    }
    ulk_diag *diag = ulk_diag_create();
    if (!diag) { fprintf(stderr, "ulk compile: out of memory\n"); return 2; }
    ulk_dict *dict = NULL;
    ulk_cmdlist *list = NULL;
    ulk_upload *up = NULL;
    int exit_code = 0;

    int rc = ulk_dict_load(dict_path, &dict, diag);
    if (rc < 0) {
        ulk_diag_print(diag, stderr);
        fprintf(stderr, "ulk compile: dictionary %s %s; no upload written\n", dict_path,
                rc == ULK_EPARSE ? "has errors" : "cannot be loaded");
        exit_code = rc == ULK_EPARSE ? 1 : 2;
        goto done;
    }
    rc = ulk_cmdlist_load(list_path, &list, diag);
    if (!list) {
        ulk_diag_print(diag, stderr);
        fprintf(stderr, "ulk compile: no upload written\n");
        exit_code = (rc == ULK_EIO || rc == ULK_ENOMEM) ? 2 : 1;
        goto done;
    }
    rc = ulk_compile(dict, list, &up, diag);
    ulk_diag_sort(diag);
    ulk_diag_print(diag, stderr);
    if (rc < 0 || !up) {
        fprintf(stderr, "ulk compile: %zu error%s in %s; no upload written\n", ulk_diag_errors(diag),
                ulk_diag_errors(diag) == 1 ? "" : "s", list_path);
        exit_code = rc == ULK_ENOMEM ? 2 : 1;
        goto done;
    }
    ulk_diag_clear(diag);
    if (ulk_upload_write(up, out_path, diag) < 0) {
        ulk_diag_print(diag, stderr);
        exit_code = 2;
        goto done;
    }
    if (!quiet) {
        uint64_t n_sub = ulk_upload_n_subbits(up);
        char rb[64];
        ulk_ratio_format(up->link.bit_rate, rb, sizeof rb);
        printf("compiled %s with %s %s -> %s\n", list_path, dict->name, dict->version, out_path);
        printf("  commands  %zu\n", up->n_cmds);
        if (up->link.profile == ULK_PROFILE_CCSDS_TC) {
            size_t oct = 0;
            for (size_t i = 0; i < up->n_cmds; i++) oct += up->cmds[i].n_cltu;
            printf("  CLTUs     %zu (%zu octets; one packet per frame per CLTU)\n", up->n_cmds, oct);
            printf("  channel   %llu bits (acquisition, CLTUs, idle)\n", (unsigned long long)n_sub);
        } else {
            printf("  words     %zu x %d bits (check %s)\n", up->n_cmds, up->link.word_bits, ulk_check_name(up->link.check));
            printf("  sub-bits  %llu (%d per bit)\n", (unsigned long long)n_sub, up->link.n_subbits);
        }
        printf("  duration  %.6f s at %s bit/s\n", ulk_upload_duration_s(up), rb);
        size_t n_crit = 0;
        for (size_t i = 0; i < up->n_cmds; i++) n_crit += up->cmds[i].critical != 0;
        printf("  critical  %zu\n", n_crit);
        for (size_t i = 0; i < up->n_cmds; i++)
            if (up->cmds[i].critical)
                printf("    line %d: %s (word %zu)\n", up->cmds[i].line, up->cmds[i].mnemonic, i + 1);
    }
done:
    ulk_upload_destroy(up);
    ulk_cmdlist_destroy(list);
    ulk_dict_destroy(dict);
    ulk_diag_destroy(diag);
    return exit_code;
}
