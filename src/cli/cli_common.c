/* src/cli/cli_common.c - the one command-line layer: option parsing over each command's
 * getopt_long table, the mapping from outcome to exit code, standard output checked at exit,
 * outputs that would overwrite an input. Why one place: every command then spells, reports and
 * exits the same way (docs/cli.md lists it for users). */
#define _GNU_SOURCE /* fopencookie */
#include <errno.h>
#include <limits.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "cli.h"
#include "picture.h"
#include "ulk/dict.h"
#include "ulk/error.h"
#include "ulk/sampleio.h"
#include "util.h"

int cli_exit_for(int status)
{
    switch (status) {
    case ULK_OK: return CLI_EXIT_OK;
    case ULK_EPARSE:
    case ULK_ELIMIT:
    case ULK_EFORMAT:
    case ULK_EINTEGRITY:
    case ULK_EMISMATCH: return CLI_EXIT_REFUSED;
    default: return CLI_EXIT_USAGE_IO; /* EINVAL (usage), EIO, ENOMEM */
    }
}

int cli_parse(const cli_command *c, int argc, char **argv, cli_opt_fn fn, void *ctx, int *first)
{
    char shorts[64];
    size_t k = 0;
    shorts[k++] = ':'; /* a missing value is ':' (told apart from an unknown option) */
    shorts[k++] = 'h';
    for (const struct option *o = c->opts; o->name && k + 3 < sizeof shorts; o++)
        if (o->val > ' ' && o->val < 127 && o->val != 'h') {
            shorts[k++] = (char)o->val;
            if (o->has_arg == required_argument) shorts[k++] = ':';
        }
    shorts[k] = 0;
    optind = 1;
    opterr = 0;
    int v;
    while ((v = getopt_long(argc, argv, shorts, c->opts, NULL)) != -1) {
        if (v == 'h') {
            c->usage(stdout);
            return CLI_EXIT_OK;
        }
        if (v == '?' || v == ':') {
            const char *a = argv[optind - 1];
            if (v == ':') fprintf(stderr, "ulk %s: option '%s' needs a value\n", c->name, a);
            else if (optopt && optopt < 127) fprintf(stderr, "ulk %s: unknown option '-%c'\n", c->name, optopt);
            else fprintf(stderr, "ulk %s: unknown option '%s'\n", c->name, a);
            fprintf(stderr, "(ulk %s --help lists the options)\n", c->name);
            return CLI_EXIT_USAGE_IO;
        }
        int r = fn(v, optarg, ctx);
        if (r) return r;
    }
    *first = optind;
    return -1;
}

int cli_number(const char *cmd, const char *opt, const char *text, double *out)
{
    char *end;
    errno = 0;
    double x = strtod(text, &end);
    if (!*text || *end || !isfinite(x) || errno == ERANGE) {
        fprintf(stderr, "ulk %s: %s '%s': expected a finite number\n", cmd, opt, text);
        return CLI_EXIT_USAGE_IO;
    }
    *out = x;
    return 0;
}

int cli_uint(const char *cmd, const char *opt, const char *text, unsigned long long max, unsigned long long *out)
{
    char *end;
    errno = 0;
    unsigned long long x = strtoull(text, &end, 0);
    if (!*text || *end || text[0] == '-' || errno == ERANGE || x > max) {
        fprintf(stderr, "ulk %s: %s '%s': expected a whole number 0..%llu\n", cmd, opt, text, max);
        return CLI_EXIT_USAGE_IO;
    }
    *out = x;
    return 0;
}

int cli_format(const char *cmd, const char *text, int *fmt, int *complex_)
{
    int cx = 0;
    if (!strcmp(text, "f32")) *fmt = ULK_FMT_F32;
    else if (!strcmp(text, "s16")) *fmt = ULK_FMT_S16;
    else if (!strcmp(text, "cf32")) { *fmt = ULK_FMT_F32; cx = 1; }
    else if (!strcmp(text, "ci16")) { *fmt = ULK_FMT_S16; cx = 1; }
    else {
        fprintf(stderr, "ulk %s: --format '%s': expected f32 or s16 (real), cf32 or ci16 (complex I/Q)\n", cmd, text);
        return CLI_EXIT_USAGE_IO;
    }
    if (complex_) *complex_ = cx;
    return 0;
}

int cli_is_std(const char *path) { return path && !strcmp(path, "-"); }

/* Standard input saved to a temporary file, for inputs that are read more than once (a
 * complex capture as I and Q, a dictionary with its carrier section). Removed at exit and on
 * SIGINT/SIGTERM (the temporary-file registry). */
static char g_stdin_copy[64];
static int g_stdin_slot;

static void remove_stdin_copy(void)
{
    if (g_stdin_copy[0]) unlink(g_stdin_copy);
    ulk_tmp_forget(g_stdin_slot);
}

const char *cli_input(const char *cmd, const char *path)
{
    if (!cli_is_std(path)) return path;
    if (g_stdin_copy[0]) {
        fprintf(stderr, "ulk %s: standard input ('-') can be only one of the inputs\n", cmd);
        return NULL;
    }
    const char *dir = getenv("TMPDIR");
    snprintf(g_stdin_copy, sizeof g_stdin_copy, "%s/ulk-stdin.XXXXXX", dir && *dir && strlen(dir) < 40 ? dir : "/tmp");
    int fd = mkstemp(g_stdin_copy);
    if (fd < 0) {
        fprintf(stderr, "ulk %s: cannot keep standard input in %s: %s\n", cmd, g_stdin_copy, strerror(errno));
        g_stdin_copy[0] = 0;
        return NULL;
    }
    g_stdin_slot = ulk_tmp_register(g_stdin_copy);
    atexit(remove_stdin_copy);
    char buf[65536];
    for (;;) {
        ssize_t n = read(0, buf, sizeof buf);
        if (n < 0 && errno == EINTR) continue;
        if (n < 0) {
            fprintf(stderr, "ulk %s: standard input: read failed: %s\n", cmd, strerror(errno));
            close(fd);
            return NULL;
        }
        if (n == 0) break;
        for (ssize_t done = 0; done < n;) {
            ssize_t w = write(fd, buf + done, (size_t)(n - done));
            if (w < 0 && errno == EINTR) continue;
            if (w <= 0) {
                fprintf(stderr, "ulk %s: cannot keep standard input in %s: %s\n", cmd, g_stdin_copy,
                        strerror(w < 0 ? errno : EIO));
                close(fd);
                return NULL;
            }
            done += w;
        }
    }
    if (close(fd) != 0) {
        fprintf(stderr, "ulk %s: cannot keep standard input in %s: %s\n", cmd, g_stdin_copy, strerror(errno));
        return NULL;
    }
    return g_stdin_copy;
}

/* The absolute form of path with its folder resolved (the file itself need not exist).
 * Returns 0, or -1 when the folder cannot be resolved. */
static int abs_path(const char *path, char *out, size_t len)
{
    char dir[PATH_MAX], res[PATH_MAX];
    const char *slash = strrchr(path, '/');
    const char *base = slash ? slash + 1 : path;
    if (!slash) snprintf(dir, sizeof dir, ".");
    else if (slash == path) snprintf(dir, sizeof dir, "/");
    else snprintf(dir, sizeof dir, "%.*s", (int)(slash - path), path);
    if (!realpath(dir, res)) return -1;
    int n = snprintf(out, len, "%s/%s", strcmp(res, "/") ? res : "", base);
    return n < 0 || (size_t)n >= len ? -1 : 0;
}

int cli_same_file(const char *out, const char *in)
{
    if (!out || !in || cli_is_std(out) || cli_is_std(in)) return 0;
    struct stat so, si;
    int eo = stat(out, &so) == 0, ei = stat(in, &si) == 0;
    if (eo && ei) return so.st_dev == si.st_dev && so.st_ino == si.st_ino;
    if (eo != ei) return 0;
    char a[PATH_MAX + 256], b[PATH_MAX + 256];
    if (abs_path(out, a, sizeof a) || abs_path(in, b, sizeof b)) return !strcmp(out, in);
    return !strcmp(a, b);
}

int cli_refuse_overwrite(const char *cmd, const char *out, const char *const *ins, const char *const *what, size_t n)
{
    for (size_t i = 0; i < n; i++)
        if (ins[i] && cli_same_file(out, ins[i])) {
            fprintf(stderr, "ulk %s: the output %s is the same file as the %s %s; refused, nothing written\n", cmd,
                    out, what[i], ins[i]);
            return CLI_EXIT_USAGE_IO;
        }
    return 0;
}

int cli_check_picture(const char *cmd, const char *path)
{
    ulk_diag *diag = ulk_diag_create();
    int rc = ulk_picture_check(path, diag);
    if (rc) {
        ulk_diag_print(diag, stderr);
        fprintf(stderr, "ulk %s: nothing done\n", cmd);
    }
    ulk_diag_destroy(diag);
    return rc ? cli_exit_for(rc) : 0;
}

int cli_load_dict(const char *cmd, const char *path, ulk_dict **dict)
{
    *dict = NULL;
    ulk_diag *diag = ulk_diag_create();
    if (!diag) {
        fprintf(stderr, "ulk %s: out of memory\n", cmd);
        return CLI_EXIT_USAGE_IO;
    }
    int rc = ulk_dict_load(path, dict, diag);
    ulk_diag_print(diag, stderr);
    ulk_diag_destroy(diag);
    if (rc < 0) {
        fprintf(stderr, "ulk %s: dictionary %s %s\n", cmd, path,
                cli_exit_for(rc) == CLI_EXIT_REFUSED ? "has errors" : "cannot be loaded");
        ulk_dict_destroy(*dict);
        *dict = NULL;
        return cli_exit_for(rc);
    }
    return 0;
}

/* Standard output goes through a stream of ours over file descriptor 1 that remembers the
 * first write error: by the final flush the errno of a failure in the middle of the output
 * is long gone, and the message must say why (No space left on device, Broken pipe). */
static int g_stdout_errno;

static ssize_t stdout_write(void *cookie, const char *buf, size_t n)
{
    (void)cookie;
    size_t done = 0;
    while (done < n) {
        ssize_t w = write(1, buf + done, n - done);
        if (w < 0 && errno == EINTR) continue;
        if (w <= 0) {
            if (!g_stdout_errno) g_stdout_errno = w < 0 ? errno : EIO;
            return done ? (ssize_t)done : -1;
        }
        done += (size_t)w;
    }
    return (ssize_t)done;
}

void cli_stdout_init(void)
{
    cookie_io_functions_t io = {NULL, stdout_write, NULL, NULL};
    FILE *f = fopencookie(NULL, "w", io);
    if (!f) return; /* the ordinary stdout then: still checked, with a vaguer reason */
    /* as the C library buffers standard output: by line on a terminal, in blocks otherwise */
    setvbuf(f, NULL, isatty(1) ? _IOLBF : _IOFBF, isatty(1) ? 0 : 1 << 16);
    stdout = f;
}

int cli_finish_stdout(const char *cmd, int code)
{
    /* ferror first: an earlier buffered write may already have failed and been dropped */
    int bad = ferror(stdout) != 0;
    int e = bad ? (g_stdout_errno ? g_stdout_errno : EIO) : 0;
    errno = 0;
    if (fflush(stdout) != 0) { bad = 1; e = g_stdout_errno ? g_stdout_errno : errno ? errno : EIO; }
    if (fclose(stdout) != 0 && !bad) { bad = 1; e = g_stdout_errno ? g_stdout_errno : errno ? errno : EIO; }
    if (bad) {
        fprintf(stderr, "ulk%s%s: standard output: write failed: %s; the output is incomplete\n", cmd ? " " : "",
                cmd ? cmd : "", strerror(e));
        return CLI_EXIT_USAGE_IO;
    }
    return code;
}
