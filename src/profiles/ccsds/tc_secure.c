/* src/profiles/ccsds/tc_secure.c - compile's authenticated-commanding session on a secured
 * ccsds-tc link (ulk_profile_ops, "security: compile"; docs/sdls.md, "Counters: the rule"):
 * the key file, the send-side state under its lock, the counters handed to one upload.
 *
 * The order is the caller's (it owns the upload file): begin (keys loaded, state locked and
 * read) before the list is compiled; secure_upload (frames secured, counters reserved in
 * memory); the upload written to its temporary file and fsynced; secure_commit (the state
 * saved) from ulk_upload_write_hook's hook; the rename. A crash between the last two skips the
 * counters, never reuses them: the next begin names the reservation of an upload that does not
 * exist. */
#include <inttypes.h>
#include <stdio.h>
#include <sys/stat.h>

#include "profiles.h"
#include "ulk/sdls.h"
#include "util.h"

typedef struct {
    const ulk_sdls_sa *sa;     /* the link's security association */
    const char *keys_path, *state_path, *who;
    FILE *msg;
    ulk_sdls_keys *keys;
    ulk_sdls_state *state;
    uint64_t first;            /* the first IV counter of this upload */
    size_t n;                  /* counters reserved by secure_upload (0: none) */
    int lock_fd;               /* the state's lock, held for the whole session */
} tc_secure;

int ulk_tc_secure_describe(const ulk_link *l, char *buf, size_t n)
{
    const ulk_sdls_sa *sa = ulk_profile_ccsds_tc.security(l);
    if (!sa) {
        if (n) buf[0] = '\0';
        return 0;
    }
    snprintf(buf, n, "link.tc.security: SPI %u, key '%s'", (unsigned)sa->spi, sa->key);
    return 1;
}

void ulk_tc_secure_end(void *session)
{
    tc_secure *s = session;
    if (!s) return;
    ulk_sdls_state_unlock(s->lock_fd);
    ulk_sdls_keys_destroy(s->keys);
    ulk_sdls_state_destroy(s->state);
    ulk_free(s);
}

/* Notices about the state: created, or counters reserved for an upload that never appeared. */
static void notices(const tc_secure *s, int created)
{
    if (created)
        fprintf(s->msg, "%s: notice: %s does not exist: a new send-side state starts at IV counter 1 for SPI %u\n",
                s->who, s->state_path, (unsigned)s->sa->spi);
    uint64_t ra, rb;
    const char *rp;
    struct stat st;
    if (ulk_sdls_state_reservation(s->state, s->sa->spi, &ra, &rb, &rp) && stat(rp, &st) != 0)
        fprintf(s->msg,
                "%s: notice: IV counters %" PRIu64 "..%" PRIu64 " of SPI %u were reserved for %s, which does not "
                "exist (that compile did not finish, or the file was moved): they are skipped, never used again\n",
                s->who, ra, rb, (unsigned)s->sa->spi, rp);
}

int ulk_tc_secure_begin(const ulk_link *l, const char *keys_path, const char *state_path, const char *who, FILE *msg,
                        void **session, ulk_diag *diag)
{
    *session = NULL;
    const ulk_sdls_sa *sa = ulk_profile_ccsds_tc.security(l);
    if (!sa || !keys_path || !state_path) {
        fprintf(msg, "%s: the link has no security, or no key file and state were given\n", who);
        return ULK_EINVAL;
    }
    tc_secure *s = ulk_calloc(1, sizeof *s);
    if (!s) return ulk_fail(diag, ULK_ENOMEM, "out of memory");
    *s = (tc_secure){sa, keys_path, state_path, who, msg, NULL, NULL, 0, 0, -1};
    int rc, created = 0;
    if ((rc = ulk_sdls_keys_load(keys_path, &s->keys, diag)) < 0 || (rc = s->lock_fd = ulk_sdls_state_lock(state_path, diag)) < 0 ||
        (rc = ulk_sdls_state_load(state_path, ULK_SDLS_SEND, &s->state, &created, diag)) < 0) {
        ulk_tc_secure_end(s);
        return rc;
    }
    if (!ulk_sdls_keys_has(s->keys, sa->key)) {
        fprintf(msg, "%s: key '%s' (SPI %u) is not in %s; no upload written\n", who, sa->key, (unsigned)sa->spi, keys_path);
        ulk_tc_secure_end(s);
        return ULK_EINVAL;
    }
    notices(s, created);
    s->first = ulk_sdls_state_value(s->state, sa->spi);
    *session = s;
    return 0;
}

int ulk_tc_secure_upload(void *session, ulk_upload *u, const char *out_path, ulk_diag *diag)
{
    tc_secure *s = session;
    if (!u->n_cmds) return 0;
    int rc = ulk_sdls_secure_upload(u, s->keys, s->first, diag);
    if (!rc) rc = ulk_sdls_state_reserve(s->state, s->sa->spi, s->first, s->first + u->n_cmds - 1, out_path);
    if (!rc) s->n = u->n_cmds;
    return rc;
}

int ulk_tc_secure_commit(void *session, ulk_diag *diag)
{
    const tc_secure *s = session;
    return ulk_sdls_state_save(s->state, s->state_path, diag);
}

int ulk_tc_secure_summary(void *session, FILE *out)
{
    const tc_secure *s = session;
    if (!s || !s->n) return 0;
    return fprintf(out, "  security  SPI %u, %s, IV counters %" PRIu64 "..%" PRIu64 " (next %" PRIu64 " in %s)\n",
                   (unsigned)s->sa->spi, ulk_sdls_service_name(s->sa->service), s->first, s->first + s->n - 1,
                   s->first + s->n, s->state_path);
}

/* After a failed write: whether the counters were reserved in the state file (and so stay
 * unused) or the state is as it was, read back from the file. */
void ulk_tc_secure_abandoned(void *session)
{
    const tc_secure *s = session;
    if (!s || !s->n) return;
    struct stat st;
    int saved = 0;
    ulk_sdls_state *now = NULL;
    ulk_diag *d2 = ulk_diag_create();
    if (ulk_sdls_state_load(s->state_path, ULK_SDLS_SEND, &now, NULL, d2) == 0 && stat(s->state_path, &st) == 0)
        saved = ulk_sdls_state_value(now, s->sa->spi) == s->first + s->n;
    ulk_sdls_state_destroy(now);
    ulk_diag_destroy(d2);
    if (saved)
        fprintf(s->msg, "%s: IV counters %" PRIu64 "..%" PRIu64 " of SPI %u were reserved in %s and stay unused\n", s->who,
                s->first, s->first + s->n - 1, (unsigned)s->sa->spi, s->state_path);
    else
        fprintf(s->msg, "%s: %s is unchanged\n", s->who, s->state_path);
}
