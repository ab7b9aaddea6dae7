/* src/util.c - allocation with failure injection, did-you-mean, atomic files. */
#include "util.h"

#include <errno.h>
#include <math.h>
#include <signal.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "ulk/error.h"

static long g_alloc_count;
#ifdef ULK_FAULT_INJECTION
/* Test builds only (CMake's ulk_test library and the ulk_fi program): the shipped library
 * never reads the variable. */
static long g_fail_at = -1; /* -1: not yet read from the environment */

static int alloc_should_fail(void)
{
    if (g_fail_at < 0) {
        const char *e = getenv("ULK_FAIL_ALLOC");
        g_fail_at = e ? atol(e) : 0;
    }
    g_alloc_count++;
    return g_fail_at > 0 && g_alloc_count >= g_fail_at;
}
void ulk_alloc_fail_at(long n) { g_fail_at = n; g_alloc_count = 0; }
#else
/* The shipped library: allocations are counted, never failed on purpose. */
static int alloc_should_fail(void)
{
    g_alloc_count++;
    return 0;
}

void ulk_alloc_fail_at(long n) { (void)n; g_alloc_count = 0; }
#endif

long ulk_alloc_count(void) { return g_alloc_count; }

void *ulk_malloc(size_t n) { return alloc_should_fail() ? NULL : malloc(n ? n : 1); }
void *ulk_calloc(size_t n, size_t size)
{
    return alloc_should_fail() ? NULL : calloc(n ? n : 1, size ? size : 1);
}
void *ulk_realloc(void *p, size_t n) { return alloc_should_fail() ? NULL : realloc(p, n ? n : 1); }
void ulk_free(void *p) { free(p); }
char *ulk_strndup(const char *s, size_t n)
{
    char *r = ulk_malloc(n + 1);
    if (!r) return NULL;
    memcpy(r, s, n);
    r[n] = 0;
    return r;
}
char *ulk_strdup(const char *s) { return s ? ulk_strndup(s, strlen(s)) : NULL; }

int ulk_edit_distance(const char *a, const char *b, int cap)
{
    /* Optimal-string-alignment distance, case-insensitive: a swap of two neighbouring
     * letters ("gian" for "gain") counts as one edit, the commonest typing slip. */
    size_t la = strlen(a), lb = strlen(b);
    if (la > 64 || lb > 64) return cap + 1;
    int rows[3][66];
    int *pp = rows[0], *prev = rows[1], *cur = rows[2];
    for (size_t j = 0; j <= lb; j++) prev[j] = (int)j;
    for (size_t i = 1; i <= la; i++) {
        cur[0] = (int)i;
        for (size_t j = 1; j <= lb; j++) {
            char ca = a[i - 1], cb = b[j - 1];
            if (ca >= 'A' && ca <= 'Z') ca = (char)(ca - 'A' + 'a');
            if (cb >= 'A' && cb <= 'Z') cb = (char)(cb - 'A' + 'a');
            int c = prev[j - 1] + (ca != cb);
            if (prev[j] + 1 < c) c = prev[j] + 1;
            if (cur[j - 1] + 1 < c) c = cur[j - 1] + 1;
            if (i > 1 && j > 1) {
                char pa = a[i - 2], pb = b[j - 2];
                if (pa >= 'A' && pa <= 'Z') pa = (char)(pa - 'A' + 'a');
                if (pb >= 'A' && pb <= 'Z') pb = (char)(pb - 'A' + 'a');
                if (ca == pb && pa == cb && ca != cb && pp[j - 2] + 1 < c) c = pp[j - 2] + 1;
            }
            cur[j] = c;
        }
        int *t = pp; pp = prev; prev = cur; cur = t;
    }
    return prev[lb] > cap ? cap + 1 : prev[lb];
}

const char *ulk_suggest(const char *word, const char *const *cands, size_t n)
{
    /* A likely misspelling: at most a third of the letters wrong, and at least one right. */
    int len = (int)strlen(word);
    int cap = len / 3 < 1 ? 1 : len / 3;
    if (cap > 3) cap = 3;
    const char *best = NULL;
    int bestd = cap + 1;
    for (size_t i = 0; i < n; i++) {
        if (!cands[i]) continue;
        int d = ulk_edit_distance(word, cands[i], cap);
        if (d < bestd) { bestd = d; best = cands[i]; }
    }
    return best;
}

/* ---- temporary-file registry: fixed slots, read by the signal handler ---- */

#define TMP_SLOTS 16
#define TMP_PATH_MAX 4096
static char g_tmp_path[TMP_SLOTS][TMP_PATH_MAX];
static volatile sig_atomic_t g_tmp_used[TMP_SLOTS];

int ulk_tmp_register(const char *path)
{
    if (!path) return 0;
    size_t n = strlen(path);
    if (n >= TMP_PATH_MAX) return 0;
    for (int k = 0; k < TMP_SLOTS; k++)
        if (!g_tmp_used[k]) {
            memcpy(g_tmp_path[k], path, n + 1);
            g_tmp_used[k] = 1; /* set after the copy: the handler never sees half a path */
            return k + 1;
        }
    return 0;
}

void ulk_tmp_forget(int slot)
{
    if (slot >= 1 && slot <= TMP_SLOTS) g_tmp_used[slot - 1] = 0;
}

static void tmp_on_signal(int sig)
{
    for (int k = 0; k < TMP_SLOTS; k++)
        if (g_tmp_used[k]) unlink(g_tmp_path[k]);
    signal(sig, SIG_DFL);
    raise(sig);
}

void ulk_tmp_cleanup_on_signals(void)
{
    static const int sigs[] = {SIGINT, SIGTERM, SIGHUP};
    for (size_t i = 0; i < sizeof sigs / sizeof sigs[0]; i++) {
        struct sigaction sa;
        memset(&sa, 0, sizeof sa);
        sa.sa_handler = tmp_on_signal;
        sigemptyset(&sa.sa_mask);
        for (size_t j = 0; j < sizeof sigs / sizeof sigs[0]; j++) sigaddset(&sa.sa_mask, sigs[j]);
        sigaction(sigs[i], &sa, NULL);
    }
}

int ulk_afile_open(ulk_afile *f, const char *path, struct ulk_diag *diag)
{
    memset(f, 0, sizeof *f);
    size_t n = strlen(path);
    if (!strcmp(path, "-")) { /* standard output: written directly, checked at commit */
        f->path = ulk_strdup("standard output");
        if (!f->path) return ulk_fail(diag, ULK_ENOMEM, "standard output: out of memory");
        f->fp = stdout;
        f->is_std = 1;
        return 0;
    }
    /* A device, pipe or other special file is written directly: renaming a temporary file
     * over it would replace the node (and /dev/full would never report it is full). */
    struct stat stt;
    if (stat(path, &stt) == 0 && !S_ISREG(stt.st_mode)) {
        if (S_ISDIR(stt.st_mode))
            return ulk_fail(diag, ULK_EIO, "%s: is a folder, expected an output file name", path);
        f->path = ulk_strdup(path);
        if (!f->path) return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path);
        f->fp = fopen(path, "wb");
        if (!f->fp) {
            int e = errno;
            ulk_free(f->path);
            memset(f, 0, sizeof *f);
            return ulk_fail(diag, ULK_EIO, "%s: cannot open for writing: %s", path, strerror(e));
        }
        return 0;
    }
    f->path = ulk_strdup(path);
    f->tmp = ulk_malloc(n + 16);
    if (!f->path || !f->tmp) {
        ulk_free(f->path); ulk_free(f->tmp);
        memset(f, 0, sizeof *f);
        return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path);
    }
    memcpy(f->tmp, path, n);
    memcpy(f->tmp + n, ".tmp.XXXXXX", 12);
    int fd = mkstemp(f->tmp);
    if (fd < 0) {
        int e = errno;
        ulk_free(f->path); ulk_free(f->tmp);
        memset(f, 0, sizeof *f);
        return ulk_fail(diag, ULK_EIO, "%s: cannot create output file: %s", path, strerror(e));
    }
    f->slot = ulk_tmp_register(f->tmp);
    fchmod(fd, 0644);
    f->fp = fdopen(fd, "wb");
    if (!f->fp) {
        close(fd);
        unlink(f->tmp);
        ulk_tmp_forget(f->slot);
        ulk_free(f->path); ulk_free(f->tmp);
        memset(f, 0, sizeof *f);
        return ulk_fail(diag, ULK_EIO, "%s: cannot open output file", path);
    }
    return 0;
}

int ulk_afile_commit(ulk_afile *f, struct ulk_diag *diag)
{
    int bad = ferror(f->fp) != 0;
    int e = bad ? EIO : 0;
    if (fflush(f->fp) != 0) { bad = 1; e = errno; }
    if (!f->is_std && fclose(f->fp) != 0) { bad = 1; e = errno; }
    f->fp = NULL;
    int rc = 0;
    if (!f->tmp) { /* special file written directly */
        if (bad) rc = ulk_fail(diag, ULK_EIO, "%s: write failed: %s", f->path, strerror(e));
    } else if (bad) {
        rc = ulk_fail(diag, ULK_EIO, "%s: write failed: %s; no output written", f->path, strerror(e));
        unlink(f->tmp);
    } else if (rename(f->tmp, f->path) != 0) {
        e = errno;
        rc = ulk_fail(diag, ULK_EIO, "%s: cannot rename into place: %s; no output written", f->path,
                      strerror(e));
        unlink(f->tmp);
    }
    ulk_tmp_forget(f->slot);
    ulk_free(f->path); ulk_free(f->tmp);
    memset(f, 0, sizeof *f);
    return rc;
}

void ulk_afile_abort(ulk_afile *f)
{
    if (!f || !f->path) return;
    if (f->fp && !f->is_std) fclose(f->fp);
    if (f->tmp) unlink(f->tmp);
    ulk_tmp_forget(f->slot);
    ulk_free(f->path); ulk_free(f->tmp);
    memset(f, 0, sizeof *f);
}

static void close_in(FILE *fp, int is_std)
{
    if (!is_std) fclose(fp);
}

int ulk_read_file(const char *path, size_t max_bytes, char **out, size_t *len, struct ulk_diag *diag)
{
    *out = NULL;
    *len = 0;
    /* "-" is standard input; it is read, never closed */
    const int is_std = !strcmp(path, "-");
    if (is_std) path = "<stdin>";
    FILE *fp = is_std ? stdin : fopen(path, "rb");
    if (!fp) return ulk_fail(diag, ULK_EIO, "%s: cannot open: %s", path, strerror(errno));
    size_t cap = 65536, n = 0;
    char *buf = ulk_malloc(cap + 1);
    if (!buf) { close_in(fp, is_std); return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path); }
    for (;;) {
        if (n == cap) {
            if (cap >= max_bytes) {
                ulk_free(buf); close_in(fp, is_std);
                return ulk_fail(diag, ULK_ELIMIT, "%s: file is larger than the limit of %zu bytes", path,
                                max_bytes);
            }
            size_t ncap = cap * 2 > max_bytes ? max_bytes : cap * 2;
            char *nb = ulk_realloc(buf, ncap + 1);
            if (!nb) { ulk_free(buf); close_in(fp, is_std); return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path); }
            buf = nb;
            cap = ncap;
        }
        size_t got = fread(buf + n, 1, cap - n, fp);
        n += got;
        if (got == 0) break;
    }
    if (ferror(fp)) {
        int e = errno;
        ulk_free(buf); close_in(fp, is_std);
        return ulk_fail(diag, ULK_EIO, "%s: read error: %s", path, strerror(e));
    }
    if (n == cap && fgetc(fp) != EOF) {
        ulk_free(buf); close_in(fp, is_std);
        return ulk_fail(diag, ULK_ELIMIT, "%s: file is larger than the limit of %zu bytes", path, max_bytes);
    }
    close_in(fp, is_std);
    buf[n] = 0;
    *out = buf;
    *len = n;
    return 0;
}

void ulk_fmt_double(double v, char *buf, size_t len)
{
    /* Whole numbers below 2^53, where every integer is a double, print in plain digits (-10,
     * not -1e+01; 1000000000000000, not 1e+15), as Python's json module writes an int. The
     * range is checked before the conversion: beyond long long's range (a uint64 of 2^63 or
     * more, a float32 near 3.4e38, a calibrated 1e300) it is undefined behaviour. -0 keeps its
     * sign ("-0"); a caller that wants 0 passes 0. */
    if (v > -9007199254740992.0 && v < 9007199254740992.0 && v == floor(v) && !(v == 0 && signbit(v))) {
        snprintf(buf, len, "%lld", (long long)v);
        return;
    }
    for (int p = 1; p <= 17; p++) {
        snprintf(buf, len, "%.*g", p, v);
        if (strtod(buf, NULL) == v) return;
    }
}
