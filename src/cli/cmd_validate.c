/* src/cli/cmd_validate.c - `ulk validate [--json] DICT...`: load and check dictionaries,
 * print every finding and a summary of each dictionary that loaded.
 *
 * Exit: 0 when every dictionary is clean (warnings allowed), 1 when any has errors, 2 on a
 * usage error or when a file cannot be read (I/O outranks findings).
 */
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "cli.h"
#include "ulk/dict.h"
#include "ulk/profile.h"
#include "ulk/error.h"

static void usage(FILE *out)
{
    fprintf(out,
            "usage: ulk validate [--json] DICT...\n"
            "\n"
            "Loads each command dictionary (YAML, or JSON when the name ends in .json) and checks\n"
            "it against the dictionary rules and the link profile. Every finding is printed as\n"
            "  FILE:LINE:COL: error|warning: MESSAGE [TREE.PATH]\n"
            "followed by a summary of each dictionary that loaded: name and version, systems,\n"
            "commands, word length W, word duration W/R_b, sub-bit rate R_s, k = f_sc/R_s,\n"
            "critical commands and the SHA-256 of its canonical content. For a ccsds-tc dictionary\n"
            "the summary gives the frame choices (SCID, VCID, service, segment header, FECF,\n"
            "randomizer), the smallest and largest command frame and CLTU, and k = f_sc / R.\n"
            "\n"
            "options:\n"
            "  --json      one JSON document on stdout: findings and summaries\n"
            "  --canonical print only the canonical content of each valid dictionary (the text\n"
            "              whose SHA-256 is its hash; docs/dictionary.md), one per line\n"
            "  -h, --help  this text\n"
            "\n"
            "exit status: 0 clean (warnings allowed), 1 errors found, 2 usage or I/O error\n");
}


static cJSON *findings_json(const ulk_diag *dg)
{
    static const char *sev[] = {"error", "warning", "note"};
    cJSON *a = cJSON_CreateArray();
    for (size_t i = 0; i < ulk_diag_count(dg); i++) {
        const ulk_finding *f = ulk_diag_get(dg, i);
        cJSON *o = cJSON_CreateObject();
        if (f->file) cJSON_AddStringToObject(o, "file", f->file);
        else cJSON_AddNullToObject(o, "file");
        cJSON_AddNumberToObject(o, "line", f->line);
        cJSON_AddNumberToObject(o, "col", f->col);
        cJSON_AddStringToObject(o, "severity", sev[f->sev]);
        cJSON_AddStringToObject(o, "message", f->msg);
        if (f->path) cJSON_AddStringToObject(o, "path", f->path);
        else cJSON_AddNullToObject(o, "path");
        cJSON_AddItemToArray(a, o);
    }
    return a;
}

static const struct option opts[] = {{"json", no_argument, NULL, 'j'},
                                     {"canonical", no_argument, NULL, 'c'},
                                     {"help", no_argument, NULL, 'h'},
                                     {0, 0, 0, 0}};
static const cli_command command = {"validate", opts, usage};

typedef struct {
    int json, canonical;
} args;

static int on_opt(int v, const char *arg, void *ctx)
{
    args *a = ctx;
    if (v == 'j') a->json = 1;
    else if (v == 'c') a->canonical = 1;
    return 0;
}

int cmd_validate(int argc, char **argv)
{
    args a = {0};
    int optind_ = 0, r = cli_parse(&command, argc, argv, on_opt, &a, &optind_);
    if (r >= 0) return r;
    int json = a.json, canonical = a.canonical;
    if (optind_ >= argc) {
        fprintf(stderr, "ulk validate: no dictionary given\n");
        usage(stderr);
        return CLI_EXIT_USAGE_IO;
    }
    int worst = 0;
    cJSON *root = json ? cJSON_CreateObject() : NULL;
    cJSON *arr = json ? cJSON_AddArrayToObject(root, "dictionaries") : NULL;
    size_t tot_err = 0, tot_warn = 0;
    for (int i = optind_; i < argc; i++) {
        ulk_diag *dg = ulk_diag_create();
        if (!dg) { fprintf(stderr, "ulk validate: out of memory\n"); cJSON_Delete(root); return 2; }
        ulk_dict *d = NULL;
        int rc = ulk_dict_load(argv[i], &d, dg);
        int code = cli_exit_for(rc);
        if (code > worst) worst = code;
        tot_err += ulk_diag_errors(dg);
        tot_warn += ulk_diag_warnings(dg);
        if (canonical) {
            char *txt = NULL;
            ulk_diag_print(dg, stderr);
            if (d && ulk_dict_canonical(d, &txt, NULL) == 0) printf("%s\n", txt);
            else if (d) { fprintf(stderr, "ulk validate: out of memory\n"); worst = 2; }
            free(txt);
        } else if (json) {
            cJSON *o = cJSON_CreateObject();
            cJSON_AddStringToObject(o, "file", argv[i]);
            cJSON_AddStringToObject(o, "status", code == 0 ? "ok" : code == 1 ? "invalid" : "unreadable");
            cJSON_AddNumberToObject(o, "errors", (double)ulk_diag_errors(dg));
            cJSON_AddNumberToObject(o, "warnings", (double)ulk_diag_warnings(dg));
            cJSON_AddItemToObject(o, "findings", findings_json(dg));
            if (d) cJSON_AddItemToObject(o, "summary", ulk_profile_of(&d->link)->summary_json(d));
            else cJSON_AddNullToObject(o, "summary");
            cJSON_AddItemToArray(arr, o);
        } else {
            ulk_diag_print(dg, code == 2 ? stderr : stdout);
            if (rc && ulk_diag_count(dg) == 0) /* the message itself could not be stored */
                fprintf(stderr, "ulk validate: %s: %s\n", argv[i], ulk_status_str(rc));
            if (d) ulk_profile_of(&d->link)->summary_text(d, stdout);
            else if (code == 1)
                printf("%s: refused: %zu error%s, %zu warning%s\n", argv[i], ulk_diag_errors(dg),
                       ulk_diag_errors(dg) == 1 ? "" : "s", ulk_diag_warnings(dg), ulk_diag_warnings(dg) == 1 ? "" : "s");
            if (d && ulk_diag_warnings(dg))
                printf("  %zu warning%s\n", ulk_diag_warnings(dg), ulk_diag_warnings(dg) == 1 ? "" : "s");
        }
        ulk_dict_destroy(d);
        ulk_diag_destroy(dg);
    }
    if (json) {
        cJSON_AddNumberToObject(root, "errors", (double)tot_err);
        cJSON_AddNumberToObject(root, "warnings", (double)tot_warn);
        cJSON_AddNumberToObject(root, "exit", worst);
        char *txt = cJSON_Print(root);
        if (txt) { printf("%s\n", txt); free(txt); }
        else { fprintf(stderr, "ulk validate: out of memory\n"); worst = 2; }
        cJSON_Delete(root);
    }
    return worst;
}
