/* src/util.h - internal helpers shared by the stages (not installed).
 *
 * Allocation goes through ulk_malloc & co. so that tests can fail the Nth allocation
 * (environment variable ULK_FAIL_ALLOC=N, or ulk_alloc_fail_at(N)) and check that every
 * path ends in a clean error.
 */
#ifndef ULK_UTIL_H
#define ULK_UTIL_H

#include <stddef.h>
#include <stdio.h>

void *ulk_malloc(size_t n);
void *ulk_calloc(size_t n, size_t size);
void *ulk_realloc(void *p, size_t n);
void ulk_free(void *p);
char *ulk_strdup(const char *s);
char *ulk_strndup(const char *s, size_t n);
/* Fail allocation number n (1-based) and every later one; 0 disables. Only in the test build
 * of the library (ULK_FAULT_INJECTION, CMake's ulk_test); in the shipped one it does nothing. */
void ulk_alloc_fail_at(long n);
/* Allocations made so far. */
long ulk_alloc_count(void);

/* Levenshtein distance, capped at cap+1. */
int ulk_edit_distance(const char *a, const char *b, int cap);
/* The candidate closest to word when near enough to be a likely misspelling, else NULL. */
const char *ulk_suggest(const char *word, const char *const *cands, size_t n);

/* An output file written atomically: data goes to "<path>.tmp.XXXXXX" in the same folder and
 * is renamed over path only by ulk_afile_commit(). The path "-" is standard output (written
 * directly, flushed and checked at commit, never closed). */
typedef struct {
    FILE *fp;
    char *path;
    char *tmp;
    int slot;    /* temporary-file registry slot + 1 (0: none) */
    int is_std;  /* fp is stdout */
} ulk_afile;
/* Returns 0 or ULK_EIO (message in diag, naming the path and the reason). */
struct ulk_diag;
int ulk_afile_open(ulk_afile *f, const char *path, struct ulk_diag *diag);
/* fflush + fsync-less close + rename. On any failure the temporary file is removed. */
int ulk_afile_commit(ulk_afile *f, struct ulk_diag *diag);
void ulk_afile_abort(ulk_afile *f);

/* Registry of this process's temporary files, so that an interrupted run leaves none behind.
 * ulk_tmp_register() keeps a copy of path in a fixed slot (no allocation) and returns the slot
 * + 1, or 0 when the registry is full or the path too long (the file is then only removed on
 * ordinary failure paths); ulk_tmp_forget() empties the slot (0 is a no-op).
 * ulk_tmp_cleanup_on_signals() installs handlers for SIGINT, SIGTERM and SIGHUP that unlink
 * every registered file (async-signal-safe: unlink only) and die of the same signal. The atomic
 * file and the sample writer register their temporary files themselves. */
int ulk_tmp_register(const char *path);
void ulk_tmp_forget(int slot);
void ulk_tmp_cleanup_on_signals(void);

/* Reads a whole file (limit max_bytes) into a NUL-terminated buffer. ULK_EIO / ULK_ELIMIT. */
int ulk_read_file(const char *path, size_t max_bytes, char **out, size_t *len, struct ulk_diag *diag);

/* The one number formatter of messages, JSON and the canonical form: a whole number below 2^53
 * in plain digits, else the shortest "%.*g" that reads back to the same double. */
void ulk_fmt_double(double v, char *buf, size_t len);

#endif
