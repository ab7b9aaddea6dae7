/* src/cli/cmd_compile.c - `ulk compile --dict DICT LIST -o UPLOAD [--keys FILE --state STATE]`
 * (LIST "-": standard input; UPLOAD "-": standard output, not for a secured link).
 * Exit (docs/cli.md) 0 written; 1 the dictionary or the list has errors, or the IV counters
 * would run out (nothing written); 2 usage or I/O, a key or state file that cannot be used. */
#include <stdio.h>
#include <string.h>

#include "cli.h"
#include "ulk/cmdlist.h"
#include "ulk/dict.h"
#include "ulk/profile.h"
#include "ulk/upload.h"

static void usage(FILE *out)
{
    fprintf(out,
            "usage: ulk compile --dict DICT LIST -o UPLOAD [--keys FILE --state STATE] [-q]\n"
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
            "  --keys FILE     key file (NAME HEX lines, mode 0600) for a dictionary with\n"
            "                  link.tc.security: every frame gets SPI, IV and MAC\n"
            "  --state STATE   anti-replay state: the next IV counter per SPI (created at 1\n"
            "                  when absent); saved before the upload is put in place, so a\n"
            "                  counter is never handed out twice (docs/sdls.md)\n"
            "  -q, --quiet     no summary\n"
            "  -h, --help      this text\n"
            "\nexit: 0 written; 1 errors in the dictionary or the list, or the IV counters would run\n"
            "      out; 2 usage or I/O error (a key or state file that cannot be used included)\n");
}

enum { O_DICT = CLI_LONG, O_KEYS, O_STATE, O_OUTPUT = 'o', O_QUIET = 'q' };
static const struct option opts[] = {{"dict", required_argument, NULL, O_DICT},
                                     {"output", required_argument, NULL, O_OUTPUT},
                                     {"keys", required_argument, NULL, O_KEYS},
                                     {"state", required_argument, NULL, O_STATE},
                                     {"quiet", no_argument, NULL, O_QUIET},
                                     {"help", no_argument, NULL, 'h'},
                                     {0, 0, 0, 0}};
static const cli_command command = {"compile", opts, usage};

typedef struct {
    const char *dict_path, *out_path, *list_path, *keys_path, *state_path;
    int quiet;
} args;

static int on_opt(int v, const char *arg, void *ctx)
{
    args *a = ctx;
    if (v == O_DICT) a->dict_path = arg;
    else if (v == O_OUTPUT) a->out_path = arg;
    else if (v == O_KEYS) a->keys_path = arg;
    else if (v == O_STATE) a->state_path = arg;
    else if (v == O_QUIET) a->quiet = 1;
    return 0;
}

/* Parses and checks the options before any work: -1 to go on, else the exit code. */
static int parse_args(int argc, char **argv, args *a)
{
    memset(a, 0, sizeof *a);
    int first, r = cli_parse(&command, argc, argv, on_opt, a, &first);
    if (r >= 0) return r;
    a->list_path = first < argc ? argv[first] : NULL;
    if (argc - first > 1) {
        fprintf(stderr, "ulk compile: more than one command list ('%s' and '%s')\n", argv[first], argv[first + 1]);
        return CLI_EXIT_USAGE_IO;
    }
    if (!a->dict_path || !a->list_path || !a->out_path) {
        fprintf(stderr, "ulk compile: %s is required\n", !a->dict_path ? "--dict DICT" : !a->list_path ? "LIST" : "-o UPLOAD");
        usage(stderr);
        return CLI_EXIT_USAGE_IO;
    }
    const char *ins[] = {a->dict_path, a->list_path, a->keys_path, a->state_path};
    const char *what[] = {"dictionary", "command list", "key file", "state"};
    if ((r = cli_refuse_overwrite("compile", a->out_path, ins, what, 4))) return r;
    /* the state is written back: it must not be one of the inputs */
    if (a->state_path && (r = cli_refuse_overwrite("compile", a->state_path, ins, what, 3))) return r;
    if (a->keys_path && cli_is_std(a->out_path)) {
        fprintf(stderr, "ulk compile: a secured upload goes to a file (its IV counters are reserved for that file "
                        "in the state before it is put in place), not to standard output\n");
        return CLI_EXIT_USAGE_IO;
    }
    return -1;
}

/* Compile's authenticated-commanding session on a secured link (docs/sdls.md, "counters"):
 * the profile's security operations (ulk_profile_ops, "security: compile"); session NULL:
 * the link has no security. */
typedef struct {
    const ulk_profile_ops *p;
    void *session;
} sec_ctx;

/* A secured link needs both --keys and --state, any other link neither; the profile locks the
 * state before reading it. Returns 0 or the exit code (message printed, nothing written). */
static int sec_open(sec_ctx *s, const ulk_dict *dict, const args *a, ulk_diag *diag)
{
    char what[128];
    s->p = ulk_profile_of(&dict->link);
    int secured = s->p->secure_describe && s->p->secure_describe(&dict->link, what, sizeof what);
    if (secured && (!a->keys_path || !a->state_path)) {
        fprintf(stderr,
                "ulk compile: dictionary %s secures every frame (%s): give the key file with "
                "--keys FILE and the anti-replay state with --state STATE; no upload written\n",
                a->dict_path, what);
        return CLI_EXIT_USAGE_IO;
    }
    if (!secured && (a->keys_path || a->state_path)) {
        fprintf(stderr, "ulk compile: dictionary %s has no link.tc.security: --keys and --state have nothing to do; no upload written\n",
                a->dict_path);
        return CLI_EXIT_USAGE_IO;
    }
    if (!secured) return 0;
    int rc = s->p->secure_begin(&dict->link, a->keys_path, a->state_path, "ulk compile", stderr, &s->session, diag);
    if (rc < 0 && rc != ULK_EINVAL) { /* ULK_EINVAL: the missing key, already said */
        ulk_diag_print(diag, stderr);
        fprintf(stderr, "ulk compile: no upload written\n");
    }
    return rc < 0 ? CLI_EXIT_USAGE_IO : 0;
}

/* Secures every frame with fresh counters, reserved in the state (saved by save_state before
 * the rename). Returns 0 or the exit code. */
static int sec_apply(sec_ctx *s, ulk_upload *up, const char *out_path, ulk_diag *diag)
{
    if (!s->session || !up->n_cmds) return 0;
    int rc = s->p->secure_upload(s->session, up, out_path, diag);
    if (!rc) return 0;
    ulk_diag_print(diag, stderr);
    fprintf(stderr, "ulk compile: cannot secure the frames (%s); no upload written, the state is unchanged\n",
            ulk_status_str(rc));
    return rc == ULK_ENOMEM ? CLI_EXIT_USAGE_IO : CLI_EXIT_REFUSED;
}

/* Saves the send-side state (counters reserved) between "upload written" and "upload in
 * place" (docs/sdls.md, "counters"). */
static int save_state(void *user, ulk_diag *diag)
{
    const sec_ctx *s = user;
    return s->p->secure_commit(s->session, diag);
}

static void print_summary(FILE *say, const args *a, const ulk_dict *dict, const ulk_upload *up, const sec_ctx *s)
{
    uint64_t n_sub = ulk_upload_n_subbits(up);
    char rb[64];
    ulk_ratio_format(up->link.bit_rate, rb, sizeof rb);
    fprintf(say, "compiled %s with %s %s -> %s\n", a->list_path, dict->name, dict->version, a->out_path);
    fprintf(say, "  commands  %zu\n", up->n_cmds);
    ulk_profile_of(&up->link)->print_units(say, up, n_sub);
    if (s->session && up->n_cmds) s->p->secure_summary(s->session, say);
    fprintf(say, "  duration  %.6f s at %s bit/s\n", ulk_upload_duration_s(up), rb);
    size_t n_crit = 0;
    for (size_t i = 0; i < up->n_cmds; i++) n_crit += up->cmds[i].critical != 0;
    fprintf(say, "  critical  %zu\n", n_crit);
    for (size_t i = 0; i < up->n_cmds; i++)
        if (up->cmds[i].critical) fprintf(say, "    line %d: %s (word %zu)\n", up->cmds[i].line, up->cmds[i].mnemonic, i + 1);
}

/* The list, compiled: the upload in *up, or the exit code (messages printed). */
static int compile_list(const args *a, const ulk_dict *dict, ulk_cmdlist **list, ulk_upload **up, ulk_diag *diag)
{
    int rc = ulk_cmdlist_load(a->list_path, list, diag);
    if (!*list || (rc < 0 && (*list)->n_items == 0)) { /* nothing readable: the list's own refusal is the message */
        ulk_diag_print(diag, stderr);
        fprintf(stderr, "ulk compile: no upload written\n");
        return cli_exit_for(rc);
    }
    rc = ulk_compile(dict, *list, up, diag);
    ulk_diag_sort(diag);
    ulk_diag_print(diag, stderr);
    if (rc < 0 || !*up) {
        fprintf(stderr, "ulk compile: %zu error%s in %s; no upload written\n", ulk_diag_errors(diag),
                ulk_diag_errors(diag) == 1 ? "" : "s", a->list_path);
        return rc == ULK_ENOMEM ? CLI_EXIT_USAGE_IO : CLI_EXIT_REFUSED;
    }
    ulk_diag_clear(diag);
    return 0;
}

int cmd_compile(int argc, char **argv)
{
    args a;
    int exit_code = parse_args(argc, argv, &a);
    if (exit_code >= 0) return exit_code;
    /* the upload on standard output: the summary goes to standard error */
    FILE *say = cli_is_std(a.out_path) ? stderr : stdout;
    ulk_diag *diag = ulk_diag_create();
    if (!diag) { fprintf(stderr, "ulk compile: out of memory\n"); return 2; }
    ulk_dict *dict = NULL;
    ulk_cmdlist *list = NULL;
    ulk_upload *up = NULL;
    sec_ctx sec = {NULL, NULL};

    if ((exit_code = cli_load_dict("compile", a.dict_path, &dict))) {
        fprintf(stderr, "ulk compile: no upload written\n");
        goto done;
    }
    if ((exit_code = sec_open(&sec, dict, &a, diag))) goto done;
    if ((exit_code = compile_list(&a, dict, &list, &up, diag))) goto done;
    if ((exit_code = sec_apply(&sec, up, a.out_path, diag))) goto done;
    int rc = ulk_upload_write_hook(up, a.out_path, sec.session && up->n_cmds ? save_state : NULL, &sec, diag);
    if (rc < 0) {
        ulk_diag_print(diag, stderr);
        if (sec.session && up->n_cmds) sec.p->secure_abandoned(sec.session);
        exit_code = cli_exit_for(rc);
        goto done;
    }
    if (!a.quiet) print_summary(say, &a, dict, up, &sec);
done:
    if (sec.session) sec.p->secure_end(sec.session);
    ulk_upload_destroy(up);
    ulk_cmdlist_destroy(list);
    ulk_dict_destroy(dict);
    ulk_diag_destroy(diag);
    return exit_code;
}
