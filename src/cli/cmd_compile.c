/* src/cli/cmd_compile.c - `ulk compile --dict DICT LIST -o UPLOAD [--keys FILE --state STATE]`.
 * Exit 0 written; 1 the dictionary or the list has errors (nothing written); 2 usage or I/O. */
#include <inttypes.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>

#include "cli.h"
#include "ulk/cmdlist.h"
#include "ulk/dict.h"
#include "ulk/sdls.h"
#include "ulk/upload.h"

/* Saves the send-side state (counters reserved) between "upload written" and "upload in
 * place" (docs/sdls.md, "counters"). */
typedef struct {
    const ulk_sdls_state *st;
    const char *path;
} state_save;

static int save_state(void *user, ulk_diag *diag)
{
    const state_save *s = user;
    return ulk_sdls_state_save(s->st, s->path, diag);
}

static void usage(FILE *out)
{
    fprintf(out,
            "usage: ulk compile --dict DICT LIST -o UPLOAD [--keys FILE --state STATE]\n"
            "\n"
            "Compiles the command list LIST with dictionary DICT into the upload file UPLOAD\n"
            "(docs/upload-format.md). Every error of the list is reported as file:line:col; on\n"
            "any error nothing is written. Critical commands need 'confirm' on their line.\n"
            "\n"
            "options:\n"
            "  --dict DICT     command dictionary (YAML or JSON)\n"
            "  -o, --output F  upload file to write (atomically)\n"
            "  --keys FILE     key file (NAME HEX lines, mode 0600) for a dictionary with\n"
            "                  link.tc.security: every frame gets SPI, IV and MAC\n"
            "  --state STATE   anti-replay state: the next IV counter per SPI (created at 1\n"
            "                  when absent); saved before the upload is put in place, so a\n"
            "                  counter is never handed out twice (docs/sdls.md)\n"
            "  -q, --quiet     no summary\n"
            "  -h, --help      this text\n"
            "\nexit: 0 written, 1 errors in the dictionary or the list, 2 usage or I/O error\n");
}

int cmd_compile(int argc, char **argv)
{
    const char *dict_path = NULL, *list_path = NULL, *out_path = NULL, *keys_path = NULL, *state_path = NULL;
    int quiet = 0;
    for (int i = 1; i < argc; i++) {
        const char *a = argv[i];
        if (!strcmp(a, "-h") || !strcmp(a, "--help")) { usage(stdout); return 0; }
        else if (!strcmp(a, "--dict") && i + 1 < argc) dict_path = argv[++i];
        else if (!strncmp(a, "--dict=", 7)) dict_path = a + 7;
        else if ((!strcmp(a, "-o") || !strcmp(a, "--output")) && i + 1 < argc) out_path = argv[++i];
        else if (!strncmp(a, "--output=", 9)) out_path = a + 9;
        else if (!strcmp(a, "--keys") && i + 1 < argc) keys_path = argv[++i];
        else if (!strncmp(a, "--keys=", 7)) keys_path = a + 7;
        else if (!strcmp(a, "--state") && i + 1 < argc) state_path = argv[++i];
        else if (!strncmp(a, "--state=", 8)) state_path = a + 8;
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
    ulk_sdls_keys *keys = NULL;
    ulk_sdls_state *state = NULL;
    uint64_t first = 0;
    int lock_fd = -1;
    int exit_code = 0;

    int rc = ulk_dict_load(dict_path, &dict, diag);
    if (rc < 0) {
        ulk_diag_print(diag, stderr);
        fprintf(stderr, "ulk compile: dictionary %s %s; no upload written\n", dict_path,
                rc == ULK_EPARSE ? "has errors" : "cannot be loaded");
        exit_code = rc == ULK_EPARSE ? 1 : 2;
        goto done;
    }
    const ulk_sdls_sa *sa = dict->link.profile == ULK_PROFILE_CCSDS_TC ? &dict->link.tc.security : NULL;
    if (sa && sa->enabled && (!keys_path || !state_path)) {
        fprintf(stderr,
                "ulk compile: dictionary %s secures every frame (link.tc.security: SPI %u, key '%s'): give the key file with "
                "--keys FILE and the anti-replay state with --state STATE; no upload written\n",
                dict_path, (unsigned)sa->spi, sa->key);
        exit_code = 2;
        goto done;
    }
    if ((!sa || !sa->enabled) && (keys_path || state_path)) {
        fprintf(stderr, "ulk compile: dictionary %s has no link.tc.security: --keys and --state have nothing to do; no upload written\n",
                dict_path);
        exit_code = 2;
        goto done;
    }
    if (keys_path) {
        int created = 0;
        if (ulk_sdls_keys_load(keys_path, &keys, diag) < 0 || (lock_fd = ulk_sdls_state_lock(state_path, diag)) < 0 ||
            ulk_sdls_state_load(state_path, ULK_SDLS_SEND, &state, &created, diag) < 0) {
            ulk_diag_print(diag, stderr);
            fprintf(stderr, "ulk compile: no upload written\n");
            exit_code = 2;
            goto done;
        }
        if (!ulk_sdls_keys_has(keys, sa->key)) {
            fprintf(stderr, "ulk compile: key '%s' (SPI %u) is not in %s; no upload written\n", sa->key, (unsigned)sa->spi,
                    keys_path);
            exit_code = 2;
            goto done;
        }
        if (created)
            fprintf(stderr, "ulk compile: notice: %s does not exist: a new send-side state starts at IV counter 1 for SPI %u\n",
                    state_path, (unsigned)sa->spi);
        uint64_t ra, rb;
        const char *rp;
        struct stat st;
        if (ulk_sdls_state_reservation(state, sa->spi, &ra, &rb, &rp) && stat(rp, &st) != 0)
            fprintf(stderr,
                    "ulk compile: notice: IV counters %" PRIu64 "..%" PRIu64 " of SPI %u were reserved for %s, which does not "
                    "exist (that compile did not finish, or the file was moved): they are skipped, never used again\n",
                    ra, rb, (unsigned)sa->spi, rp);
        first = ulk_sdls_state_value(state, sa->spi);
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
    state_save ss = {state, state_path};
    if (keys && up->n_cmds) {
        /* counters first .. first + n - 1; reserved in the state saved before the rename */
        rc = ulk_sdls_secure_upload(up, keys, first, diag);
        if (!rc) rc = ulk_sdls_state_reserve(state, sa->spi, first, first + up->n_cmds - 1, out_path);
        if (rc) {
            ulk_diag_print(diag, stderr);
            fprintf(stderr, "ulk compile: cannot secure the frames (%s); no upload written, the state is unchanged\n",
                    ulk_status_str(rc));
            exit_code = rc == ULK_ENOMEM ? 2 : 1;
            goto done;
        }
    }
    if (ulk_upload_write_hook(up, out_path, keys && up->n_cmds ? save_state : NULL, &ss, diag) < 0) {
        ulk_diag_print(diag, stderr);
        if (keys && up->n_cmds) {
            struct stat st;
            int saved = 0;
            ulk_sdls_state *now = NULL;
            ulk_diag *d2 = ulk_diag_create();
            if (ulk_sdls_state_load(state_path, ULK_SDLS_SEND, &now, NULL, d2) == 0 && stat(state_path, &st) == 0)
                saved = ulk_sdls_state_value(now, sa->spi) == first + up->n_cmds;
            ulk_sdls_state_destroy(now);
            ulk_diag_destroy(d2);
            if (saved)
                fprintf(stderr, "ulk compile: IV counters %" PRIu64 "..%" PRIu64 " of SPI %u were reserved in %s and stay unused\n",
                        first, first + up->n_cmds - 1, (unsigned)sa->spi, state_path);
            else
                fprintf(stderr, "ulk compile: %s is unchanged\n", state_path);
        }
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
        if (keys && up->n_cmds)
            printf("  security  SPI %u, %s, IV counters %" PRIu64 "..%" PRIu64 " (next %" PRIu64 " in %s)\n",
                   (unsigned)sa->spi, ulk_sdls_service_name(sa->service), first, first + up->n_cmds - 1,
                   first + up->n_cmds, state_path);
        printf("  duration  %.6f s at %s bit/s\n", ulk_upload_duration_s(up), rb);
        size_t n_crit = 0;
        for (size_t i = 0; i < up->n_cmds; i++) n_crit += up->cmds[i].critical != 0;
        printf("  critical  %zu\n", n_crit);
        for (size_t i = 0; i < up->n_cmds; i++)
            if (up->cmds[i].critical)
                printf("    line %d: %s (word %zu)\n", up->cmds[i].line, up->cmds[i].mnemonic, i + 1);
    }
done:
    ulk_sdls_state_unlock(lock_fd);
    ulk_sdls_keys_destroy(keys);
    ulk_sdls_state_destroy(state);
    ulk_upload_destroy(up);
    ulk_cmdlist_destroy(list);
    ulk_dict_destroy(dict);
    ulk_diag_destroy(diag);
    return exit_code;
}
