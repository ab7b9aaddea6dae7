/* src/upload.c - the upload file (docs/upload-format.md): write, strict read, print back.
 *
 * Why a digest: an upload sits on disk between compilation and transmission; a changed
 * byte (edit, bad copy, disk) must be caught before anything radiates. The writer builds
 * the whole document in memory, hashes every byte before the final "digest" line with
 * SHA-256 and writes it atomically. The reader streams the file (see "streaming source"
 * below: one command's cJSON tree at a time, SHA-256 as the bytes arrive), checks every
 * field and rebuilds each word's fields from the word bits and compares them, so a file
 * whose digest was recomputed by hand is still refused when it is inconsistent; the digest,
 * known at the end, decides first: a changed file is reported as changed and nothing read
 * from it is returned. Each profile reads its own link object and unit members back
 * (ulk/profile.h "upload reader"; src/profiles/<name>/<name>_upload.c) through this reader's helpers
 * (upload_read.h), as it writes them through upload_text.h.
 */
#define _GNU_SOURCE /* memmem */
#include <ctype.h>
#include <errno.h>
#include <limits.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include <sys/stat.h>

#include <cjson/cJSON.h>
#include <openssl/evp.h>

#include "ulk/profile.h"
#include "ulk/upload.h"
#include "ulk/word.h"
#include "upload_read.h"
#include "upload_text.h"
#include "text.h"
#include "util.h"

/* ------------------------------------------------------------------ lifetime */

static void cmd_free_parts(ulk_upload_cmd *c)
{
    ulk_free(c->cltu); /* the frame shares this allocation */
    c->cltu = c->frame = NULL;
    if (c->block_) {
        ulk_free(c->block_);
        return;
    }
    for (int i = 0; i < c->n_args && c->args; i++) {
        ulk_free(c->args[i].name);
        ulk_free(c->args[i].text);
        ulk_free(c->args[i].units);
    }
    ulk_free(c->args);
    ulk_free(c->mnemonic);
    ulk_free(c->system_name);
}

static void lean_free(ulk_upload_lean *z)
{
    if (!z) return;
    ulk_free(z->idles);
    ulk_free(z->units);
    ulk_free(z->unit_off);
    ulk_free(z);
}

void ulk_upload_destroy(ulk_upload *u)
{
    if (!u) return;
    size_t nf = ulk_upload_n_full(u);
    for (size_t i = 0; i < nf && u->cmds; i++) cmd_free_parts(&u->cmds[i]);
    ulk_free(u->cmds);
    lean_free(u->lean);
    ulk_free(u->dict_name);
    ulk_free(u->dict_version);
    ulk_free(u->source);
    ulk_free(u);
}

/* ------------------------------------------------------------------ writer */

/* The writer's text: the library's text buffer (src/core/text.h). */
typedef ulk_text sbuf;
#define sb_put ulk_text_put
#define sb_printf ulk_text_printf
#define sb_str ulk_text_json_str
#define sb_hex ulk_text_hex

static void sb_ratio(sbuf *b, ulk_ratio r)
{
    char t[80];
    ulk_ratio_format(r, t, sizeof t);
    sb_str(b, t);
}

static void sb_double(sbuf *b, double v)
{
    char t[40];
    ulk_fmt_double(v, t, sizeof t);
    if (!isfinite(v)) snprintf(t, sizeof t, "null");
    sb_put(b, t, strlen(t));
}


/* Duration as an exact rational: patterns / R_b. */
static ulk_ratio duration_ratio(const ulk_upload *u, uint64_t patterns, int *ok)
{
    ulk_ratio inv = ulk_ratio_make(u->link.bit_rate.den, u->link.bit_rate.num), r = inv;
    *ok = ulk_ratio_mul_int(inv, (int64_t)patterns, &r) == 0;
    return r;
}

/* Filler units and unit bits of the whole stream (patterns, or ccsds-tc channel bits). */
static uint64_t total_patterns(const ulk_upload *u)
{
    const ulk_profile_ops *pr = ulk_profile_ops_for(u->link.profile);
    uint64_t p = u->idles_after;
    for (size_t i = 0; i < u->n_cmds; i++) p += u->cmds[i].idles_before + pr->unit_bits(&u->link, &u->cmds[i]);
    return p;
}

/* ---- the writer's text buffer, for the profiles' parts of an upload (upload_text.h) */

void ulk_jb_ratio(ulk_jbuf *b, ulk_ratio r) { sb_ratio(b, r); }
void ulk_jb_double(ulk_jbuf *b, double v) { sb_double(b, v); }
int ulk_jb_oom(const ulk_jbuf *b) { return b->oom; }

#define DIGEST_HEAD "  \"digest\": \"sha256:"
#define DIGEST_TAIL "\"\n}\n"
#define DIGEST_LINE_LEN (sizeof DIGEST_HEAD - 1 + 64 + sizeof DIGEST_TAIL - 1)

static void sha256_hex(const void *p, size_t n, char out[65])
{
    unsigned char md[EVP_MAX_MD_SIZE];
    unsigned int mdlen = 0;
    EVP_Digest(p, n, md, &mdlen, EVP_sha256(), NULL);
    for (unsigned i = 0; i < 32; i++) snprintf(out + 2 * i, 3, "%02x", md[i]);
    out[64] = 0;
}

static void build_doc(const ulk_upload *u, sbuf *b)
{
    const ulk_link *l = &u->link;
    sb_printf(b, "{\n  \"format\": \"ulk-upload\",\n  \"version\": %d,\n", ULK_UPLOAD_FORMAT_VERSION);
    sb_put(b, "  \"dictionary\": {\"name\": ", 25);
    sb_str(b, u->dict_name);
    sb_put(b, ", \"version\": ", 13);
    sb_str(b, u->dict_version);
    sb_put(b, ", \"sha256\": ", 12);
    sb_str(b, u->dict_sha256);
    sb_put(b, "},\n  \"source\": ", 15);
    sb_str(b, u->source ? u->source : "");
    const ulk_profile_ops *prof = ulk_profile_of(l);
    prof->upload_write_link(l, b);
    sb_put(b, "  \"commands\": [", 15);
    for (size_t i = 0; i < u->n_cmds; i++) {
        const ulk_upload_cmd *c = &u->cmds[i];
        sb_printf(b, "%s\n    {\"line\": %d, \"mnemonic\": ", i ? "," : "", c->line);
        sb_str(b, c->mnemonic);
        sb_put(b, ", \"system\": ", 12);
        sb_str(b, c->system_name ? c->system_name : "");
        sb_printf(b, ", \"system_address\": %u, \"opcode\": %u, \"critical\": %s, \"wait_s\": ", c->system_addr,
                  c->opcode, c->critical ? "true" : "false");
        sb_ratio(b, c->wait_before);
        sb_printf(b, ", \"idles_before\": %llu,\n     \"args\": [", (unsigned long long)c->idles_before);
        for (int k = 0; k < c->n_args; k++) {
            const ulk_upload_arg *a = &c->args[k];
            sb_put(b, k ? ", {\"name\": " : "{\"name\": ", k ? 11 : 9);
            sb_str(b, a->name);
            sb_printf(b, ", \"type\": \"%s\", \"bits\": %d, \"units\": ", ulk_arg_type_name(a->type), a->bits);
            sb_str(b, a->units);
            sb_printf(b, ", \"raw\": \"0x%llx\", \"eng\": ", (unsigned long long)a->raw);
            sb_double(b, a->eng);
            sb_put(b, ", \"text\": ", 10);
            sb_str(b, a->text);
            sb_put(b, "}", 1);
        }
        prof->upload_write_unit(l, c, b);
    }
    uint64_t pat = total_patterns(u);
    int ok;
    ulk_ratio dur = duration_ratio(u, pat, &ok);
    sb_put(b, u->n_cmds ? "\n  ],\n  \"wait_after_s\": " : "],\n  \"wait_after_s\": ", u->n_cmds ? 24 : 21);
    sb_ratio(b, u->wait_after);
    sb_printf(b, ",\n  \"idles_after\": %llu,\n", (unsigned long long)u->idles_after);
    sb_printf(b, "  \"totals\": {\"words\": %zu, \"subbits\": %llu, \"duration_s\": ", u->n_cmds,
              (unsigned long long)(pat * (uint64_t)l->n_subbits));
    if (ok) sb_ratio(b, dur);
    else sb_put(b, "null", 4);
    sb_put(b, "},\n", 3);
}

int ulk_upload_write(const ulk_upload *u, const char *path, ulk_diag *diag)
{
    return ulk_upload_write_hook(u, path, NULL, NULL, diag);
}

int ulk_upload_write_hook(const ulk_upload *u, const char *path, ulk_upload_commit_fn before_rename, void *user,
                          ulk_diag *diag)
{
    if (!u || !path) return ulk_fail(diag, ULK_EINVAL, "upload write: nothing to write");
    if (u->lean) return ulk_fail(diag, ULK_EINVAL, "%s: a lean upload cannot be written", path);
    /* never write what the reader refuses: the limits keep ulk modulate under 64 MB */
    if (u->n_cmds > ULK_UPLOAD_MAX_CMDS)
        return ulk_fail(diag, ULK_ELIMIT,
                        "%s: %zu commands; an upload holds at most %u (the limit that keeps ulk modulate under "
                        "64 MB); nothing written",
                        path, u->n_cmds, ULK_UPLOAD_MAX_CMDS);
    size_t unit_octets = 0;
    for (size_t i = 0; i < u->n_cmds; i++)
        unit_octets += ulk_profile_of(&u->link)->unit_octets(&u->link, &u->cmds[i]);
    if (unit_octets > ULK_UPLOAD_MAX_UNIT_OCTETS)
        return ulk_fail(diag, ULK_ELIMIT,
                        "%s: the %s of the upload take %zu octets; the limit is %zu (what keeps ulk modulate under "
                        "64 MB); split the command list; nothing written",
                        path, ulk_profile_of(&u->link)->unit_noun, unit_octets,
                        ULK_UPLOAD_MAX_UNIT_OCTETS);
    sbuf b = {0};
    build_doc(u, &b);
    char hex[65];
    if (!b.oom) sha256_hex(b.p, b.n, hex);
    sb_put(&b, DIGEST_HEAD, sizeof DIGEST_HEAD - 1);
    if (!b.oom) sb_put(&b, hex, 64);
    sb_put(&b, DIGEST_TAIL, sizeof DIGEST_TAIL - 1);
    if (b.oom) { ulk_free(b.p); return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path); }
    ulk_afile f;
    int rc = ulk_afile_open(&f, path, diag);
    if (rc < 0) { ulk_free(b.p); return rc; }
    if (fwrite(b.p, 1, b.n, f.fp) != b.n) {
        ulk_free(b.p);
        ulk_afile_abort(&f);
        return ulk_fail(diag, ULK_EIO, "%s: write failed; no output written", path);
    }
    ulk_free(b.p);
    if (before_rename) {
        /* the upload is on the disk under its temporary name before the hook runs */
        if (fflush(f.fp) != 0 || fsync(fileno(f.fp)) != 0) {
            int e = errno;
            ulk_afile_abort(&f);
            return ulk_fail(diag, ULK_EIO, "%s: write failed: %s; no output written", path, strerror(e));
        }
        int hrc = before_rename(user, diag);
        if (hrc) {
            ulk_afile_abort(&f);
            return hrc;
        }
    }
    return ulk_afile_commit(&f, diag);
}

/* ------------------------------------------------------------------ reader */

/* The first error is kept, not reported at once: the digest is only known at the end of the
 * file, and a changed file must be reported as changed (ULK_EINTEGRITY) rather than by the
 * parse error its change caused. rd_emit() reports it. */
typedef struct ulk_rd {
    const char *name;
    ulk_diag *diag;
    int status;
    int has_path;
    char path[96];
    char msg[600];
} rd_t;

/* The reader's first failure: its status, message and tree path (NULL: none); later ones are
 * dropped, so the message names where reading stopped. */
static int rvfail(rd_t *r, int code, const char *path, const char *fmt, va_list ap)
{
    if (!r->status) {
        vsnprintf(r->msg, sizeof r->msg, fmt, ap);
        r->has_path = path != NULL;
        snprintf(r->path, sizeof r->path, "%s", path ? path : "");
        r->status = code;
    }
    return code;
}

static int rfail(rd_t *r, int code, const char *path, const char *fmt, ...) __attribute__((format(printf, 4, 5)));
static int rfail(rd_t *r, int code, const char *path, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    rvfail(r, code, path, fmt, ap);
    va_end(ap);
    return code;
}

static int rd_emit(rd_t *r)
{
    if (r->status) {
        ulk_loc loc = {r->name, 0, 0, r->has_path ? r->path : NULL};
        ulk_diag_add(r->diag, ULK_SEV_ERROR, &loc, "%s", r->msg);
    }
    return r->status;
}

/* The members of obj must be exactly keys (each once); partial: missing ones are not (yet) an error. */
static int want_keys_p(rd_t *r, const cJSON *obj, const char *path, const char *const *keys, int n, int partial)
{
    if (!cJSON_IsObject(obj)) return rfail(r, ULK_EPARSE, path, "expected an object");
    unsigned seen = 0;
    for (const cJSON *c = obj->child; c; c = c->next) {
        int k = -1;
        for (int i = 0; i < n; i++)
            if (c->string && !strcmp(c->string, keys[i])) k = i;
        if (k < 0) return rfail(r, ULK_EPARSE, path, "unexpected member '%.60s'", c->string ? c->string : "");
        if (seen & (1u << k)) return rfail(r, ULK_EPARSE, path, "member '%s' appears twice", keys[k]);
        seen |= 1u << k;
    }
    for (int i = 0; i < n && !partial; i++)
        if (!(seen & (1u << i))) return rfail(r, ULK_EPARSE, path, "missing member '%s'", keys[i]);
    return 0;
}

static int want_keys(rd_t *r, const cJSON *obj, const char *path, const char *const *keys, int n)
{
    return want_keys_p(r, obj, path, keys, n, 0);
}

static const cJSON *member(const cJSON *o, const char *k) { return cJSON_GetObjectItemCaseSensitive(o, k); }

static int get_int(rd_t *r, const cJSON *o, const char *k, const char *path, double lo, double hi, uint64_t *out,
                   int64_t *sout)
{
    const cJSON *v = member(o, k);
    if (!cJSON_IsNumber(v) || v->valuedouble != floor(v->valuedouble) || v->valuedouble < lo || v->valuedouble > hi)
        return rfail(r, ULK_EPARSE, path, "'%s' must be a whole number in [%.0f, %.0f]", k, lo, hi);
    if (out) *out = (uint64_t)v->valuedouble;
    if (sout) *sout = (int64_t)v->valuedouble;
    return 0;
}

static const char *get_str(rd_t *r, const cJSON *o, const char *k, const char *path, size_t maxlen)
{
    const cJSON *v = member(o, k);
    if (!cJSON_IsString(v) || !v->valuestring) { rfail(r, ULK_EPARSE, path, "'%s' must be a string", k); return NULL; }
    if (strlen(v->valuestring) > maxlen) {
        rfail(r, ULK_ELIMIT, path, "'%s' is longer than %zu bytes", k, maxlen);
        return NULL;
    }
    return v->valuestring;
}

static int get_ratio(rd_t *r, const cJSON *o, const char *k, const char *path, int allow_zero, ulk_ratio *out)
{
    const char *s = get_str(r, o, k, path, 64);
    if (!s) return r->status;
    if (ulk_ratio_parse(s, out) < 0 || out->num < 0 || (!allow_zero && out->num == 0) || out->den <= 0)
        return rfail(r, ULK_EPARSE, path, "'%s' must be a %s exact decimal, found '%s'", k,
                     allow_zero ? "non-negative" : "positive", s);
    return 0;
}

static int get_pattern(rd_t *r, const cJSON *o, const char *k, const char *path, int n, uint8_t *out)
{
    const char *s = get_str(r, o, k, path, 64);
    if (!s) return r->status;
    if ((int)strlen(s) != n && n > 0) return rfail(r, ULK_EPARSE, path, "'%s' must have %d sub-bits", k, n);
    if (strlen(s) < 1 || strlen(s) > ULK_MAX_SUBBITS)
        return rfail(r, ULK_EPARSE, path, "'%s' must have 1 to %d sub-bits", k, ULK_MAX_SUBBITS);
    for (size_t i = 0; s[i]; i++) {
        if (s[i] != '0' && s[i] != '1') return rfail(r, ULK_EPARSE, path, "'%s' must be a string of 0 and 1", k);
        out[i] = (uint8_t)(s[i] - '0');
    }
    return (int)strlen(s);
}

/* A token that the command-list parser reads back as one token. */
static int list_safe(const char *s)
{
    if (!*s) return 0;
    for (; *s; s++) {
        unsigned char c = (unsigned char)*s;
        if (c <= ' ' || c == '#' || c == '=' || c == 0x7f) return 0;
    }
    return 1;
}

static int find_name(const char *s, const char *const *names, int n)
{
    for (int i = 0; i < n; i++)
        if (!strcmp(s, names[i])) return i;
    return -1;
}

static int get_bool(rd_t *r, const cJSON *o, const char *k, const char *path, int *out)
{
    const cJSON *v = member(o, k);
    if (!cJSON_IsBool(v)) return rfail(r, ULK_EPARSE, path, "'%s' must be true or false", k);
    *out = cJSON_IsTrue(v);
    return 0;
}

/* The line code, shared by every profile's link object. */
static int read_line_code(rd_t *r, const cJSON *lj, ulk_link *l)
{
    const char *lc = get_str(r, lj, "line_code", "link", 16);
    if (!lc) return r->status;
    if (!strcmp(lc, "nrz-l")) l->line_code = ULK_LINE_NRZL;
    else if (!strcmp(lc, "nrz-m")) l->line_code = ULK_LINE_NRZM;
    else return rfail(r, ULK_EPARSE, "link.line_code", "expected nrz-l or nrz-m");
    return 0;
}

/* The subcarrier object, shared by both profiles. */
static int read_subcarrier(rd_t *r, const cJSON *sc, ulk_link *l)
{
    static const char *const sck[] = {"frequency", "waveform", "amplitude"};
    if (want_keys(r, sc, "link.subcarrier", sck, 3)) return r->status;
    if (get_ratio(r, sc, "frequency", "link.subcarrier", 0, &l->fsc)) return r->status;
    const char *wf = get_str(r, sc, "waveform", "link.subcarrier", 16);
    if (!wf) return r->status;
    if (!strcmp(wf, "sine")) l->waveform = ULK_WAVE_SINE;
    else if (!strcmp(wf, "square")) l->waveform = ULK_WAVE_SQUARE;
    else return rfail(r, ULK_EPARSE, "link.subcarrier.waveform", "expected sine or square");
    const cJSON *am = member(sc, "amplitude");
    if (!cJSON_IsNumber(am) || !(am->valuedouble > 0 && am->valuedouble <= 1))
        return rfail(r, ULK_EPARSE, "link.subcarrier.amplitude", "expected a number in (0, 1]");
    l->amplitude = am->valuedouble;
    return 0;
}

/* The link object: its profile's reader (ulk_profile_ops.upload_read_link). A missing or
 * unknown profile is checked against the first registered profile's members first, so that a
 * stray member is what is reported, as before the profiles had tables. */
static int read_link(rd_t *r, const cJSON *lj, ulk_link *l)
{
    memset(l, 0, sizeof *l);
    const char *prof = cJSON_IsObject(lj) ? get_str(r, lj, "profile", "link", 32) : NULL;
    const ulk_profile_ops *p = ulk_profile_ops_by_name(prof);
    if (p) return p->upload_read_link(r, lj, l);
    const ulk_profile_ops *first = ulk_profile_ops_at(0);
    if (want_keys(r, lj, "link", first->upload_link_members, first->n_upload_link_members)) return r->status;
    if (!prof) return r->status;
    char names[160] = "";
    size_t used = 0;
    for (size_t i = 0; (p = ulk_profile_ops_at(i)) && used < sizeof names; i++)
        used += (size_t)snprintf(names + used, sizeof names - used, "%s%s",
                                 i == 0 ? "" : ulk_profile_ops_at(i + 1) ? ", " : " or ", p->name);
    return rfail(r, ULK_EFORMAT, "link.profile", "profile '%.32s' is not supported (%s)", prof, names);
}

static const char *const type_names[] = {"unsigned", "signed", "boolean", "enum", "float32"};

/* Even-length hex text to octets; -1 when it is not. */
static long hex_octets(const char *s, uint8_t *out, size_t cap)
{
    size_t n = strlen(s);
    if (n == 0 || n % 2 || n / 2 > cap) return -1;
    for (size_t i = 0; i < n; i++)
        if (!isxdigit((unsigned char)s[i])) return -1;
    for (size_t i = 0; i < n / 2; i++) {
        char t[3] = {s[2 * i], s[2 * i + 1], 0};
        out[i] = (uint8_t)strtoul(t, NULL, 16);
    }
    return (long)(n / 2);
}

/* The helpers under their shared names, for the profiles' readers (src/io/upload_read.h). */
int ulk_rd_fail(ulk_rd *r, int code, const char *path, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    rvfail(r, code, path, fmt, ap);
    va_end(ap);
    return code;
}
int ulk_rd_status(const ulk_rd *r) { return r->status; }
int ulk_rd_keys(ulk_rd *r, const cJSON *obj, const char *path, const char *const *keys, int n, int partial)
{
    return want_keys_p(r, obj, path, keys, n, partial);
}
const cJSON *ulk_rd_member(const cJSON *o, const char *k) { return member(o, k); }
int ulk_rd_int(ulk_rd *r, const cJSON *o, const char *k, const char *path, double lo, double hi, uint64_t *out,
               int64_t *sout)
{
    return get_int(r, o, k, path, lo, hi, out, sout);
}
const char *ulk_rd_str(ulk_rd *r, const cJSON *o, const char *k, const char *path, size_t maxlen)
{
    return get_str(r, o, k, path, maxlen);
}
int ulk_rd_ratio(ulk_rd *r, const cJSON *o, const char *k, const char *path, int allow_zero, ulk_ratio *out)
{
    return get_ratio(r, o, k, path, allow_zero, out);
}
int ulk_rd_pattern(ulk_rd *r, const cJSON *o, const char *k, const char *path, int n, uint8_t *out)
{
    return get_pattern(r, o, k, path, n, out);
}
int ulk_rd_bool(ulk_rd *r, const cJSON *o, const char *k, const char *path, int *out)
{
    return get_bool(r, o, k, path, out);
}
int ulk_rd_line_code(ulk_rd *r, const cJSON *lj, ulk_link *l) { return read_line_code(r, lj, l); }
int ulk_rd_subcarrier(ulk_rd *r, const cJSON *sc, ulk_link *l) { return read_subcarrier(r, sc, l); }
long ulk_rd_hex_octets(const char *s, uint8_t *out, size_t cap) { return hex_octets(s, out, cap); }

/* prev_line: the previous command's line (unused for idx 0). */
static int read_cmd(rd_t *r, const cJSON *cj, size_t idx, int prev_line, const ulk_link *l, ulk_upload_cmd *c)
{
    char path[64];
    snprintf(path, sizeof path, "commands[%zu]", idx);
    const ulk_profile_ops *prof = ulk_profile_ops_for(l->profile);
    if (want_keys(r, cj, path, prof->upload_cmd_members, prof->n_upload_cmd_members)) return r->status;
    int64_t v = 0; /* set by get_int on success; zero keeps gcc -O3 from warning */
    uint64_t uv = 0;
    if (get_int(r, cj, "line", path, 1, (double)(1 << 30), NULL, &v)) return r->status;
    c->line = (int)v;
    if (idx > 0 && c->line <= prev_line)
        return rfail(r, ULK_EPARSE, path, "'line' %d does not follow the previous command's line %d", c->line,
                     prev_line);
    const char *mn = get_str(r, cj, "mnemonic", path, 256);
    const char *sn = mn ? get_str(r, cj, "system", path, 256) : NULL;
    if (!mn || !sn) return r->status;
    if (!list_safe(mn)) return rfail(r, ULK_EPARSE, path, "mnemonic '%.60s' cannot appear in a command list", mn);
    if (get_int(r, cj, "system_address", path, 0, (double)prof->upload_max_address(l), &uv, NULL)) return r->status;
    c->system_addr = (uint32_t)uv;
    if (get_int(r, cj, "opcode", path, 0, (double)prof->upload_max_opcode(l), &uv, NULL)) return r->status;
    c->opcode = (uint32_t)uv;
    const cJSON *cr = member(cj, "critical");
    if (!cJSON_IsBool(cr)) return rfail(r, ULK_EPARSE, path, "'critical' must be true or false");
    c->critical = cJSON_IsTrue(cr);
    if (get_ratio(r, cj, "wait_s", path, 1, &c->wait_before)) return r->status;
    if (c->wait_before.num > 86400 * c->wait_before.den)
        return rfail(r, ULK_ELIMIT, path, "'wait_s' is beyond the limit of 86400 s");
    c->wait_before_s = ulk_ratio_to_double(c->wait_before);
    if (get_int(r, cj, "idles_before", path, 0, (double)ULK_UPLOAD_MAX_IDLES, &c->idles_before, NULL)) return r->status;
    ulk_gap gap = idx == 0 ? ULK_GAP_FIRST : ULK_GAP_BETWEEN;
    uint64_t base = prof->gap_units(l, gap);
    if (c->idles_before < base)
        return rfail(r, ULK_EPARSE, path, "'idles_before' %llu is below the %s of %llu", (unsigned long long)c->idles_before,
                     prof->gap_names[gap], (unsigned long long)base);
    const cJSON *aj = member(cj, "args");
    if (!cJSON_IsArray(aj)) return rfail(r, ULK_EPARSE, path, "'args' must be an array");
    int na = cJSON_GetArraySize(aj);
    if (na > 64) return rfail(r, ULK_ELIMIT, path, "more than 64 arguments");
    if (prof->upload_read_unit(r, cj, path, l, c)) return r->status;

    /* one block: args, then strings */
    size_t need = (size_t)na * sizeof(ulk_upload_arg) + strlen(mn) + strlen(sn) + 2;
    const cJSON *a;
    static const char *const ak[] = {"name", "type", "bits", "units", "raw", "eng", "text"};
    int k = 0;
    cJSON_ArrayForEach(a, aj) {
        char ap[96];
        snprintf(ap, sizeof ap, "%s.args[%d]", path, k++);
        if (want_keys(r, a, ap, ak, 7)) return r->status;
        const char *nm = get_str(r, a, "name", ap, 256), *tx = nm ? get_str(r, a, "text", ap, 256) : NULL;
        if (!nm || !tx) return r->status;
        if (!list_safe(nm) || !list_safe(tx)) return rfail(r, ULK_EPARSE, ap, "name or text cannot appear in a command list");
        const cJSON *un = member(a, "units");
        if (!cJSON_IsNull(un) && !get_str(r, a, "units", ap, 64)) return r->status;
        need += strlen(nm) + strlen(tx) + 2 + (cJSON_IsString(un) ? strlen(un->valuestring) + 1 : 0);
    }
    char *blk = ulk_malloc(need);
    if (!blk) return rfail(r, ULK_ENOMEM, path, "out of memory");
    c->block_ = blk;
    c->args = (ulk_upload_arg *)(void *)blk;
    char *p = blk + (size_t)na * sizeof(ulk_upload_arg);
    c->mnemonic = p; p += strlen(mn) + 1; memcpy(c->mnemonic, mn, strlen(mn) + 1);
    c->system_name = p; p += strlen(sn) + 1; memcpy(c->system_name, sn, strlen(sn) + 1);
    int pos = 0; /* argument bits so far */
    k = 0;
    cJSON_ArrayForEach(a, aj) {
        char ap[96];
        snprintf(ap, sizeof ap, "%s.args[%d]", path, k);
        ulk_upload_arg *ua = &c->args[k];
        memset(ua, 0, sizeof *ua);
        const char *nm = member(a, "name")->valuestring, *tx = member(a, "text")->valuestring;
        ua->name = p; memcpy(p, nm, strlen(nm) + 1); p += strlen(nm) + 1;
        ua->text = p; memcpy(p, tx, strlen(tx) + 1); p += strlen(tx) + 1;
        const cJSON *un = member(a, "units");
        if (cJSON_IsString(un)) { ua->units = p; memcpy(p, un->valuestring, strlen(un->valuestring) + 1); p += strlen(un->valuestring) + 1; }
        c->n_args = ++k;
        const char *ty = get_str(r, a, "type", ap, 16);
        if (!ty) return r->status;
        int t = find_name(ty, type_names, 5);
        if (t < 0) return rfail(r, ULK_EPARSE, ap, "unknown type '%.16s'", ty);
        ua->type = (ulk_arg_type)t;
        if (get_int(r, a, "bits", ap, 1, 64, NULL, &v)) return r->status;
        ua->bits = (int)v;
        if ((t == ULK_ARG_BOOLEAN && v != 1) || (t == ULK_ARG_FLOAT32 && v != 32))
            return rfail(r, ULK_EPARSE, ap, "a %s argument cannot be %d bits wide", ty, (int)v);
        const char *rs = get_str(r, a, "raw", ap, 20);
        if (!rs) return r->status;
        char *end = NULL;
        if (strncmp(rs, "0x", 2) || !isxdigit((unsigned char)rs[2])) return rfail(r, ULK_EPARSE, ap, "'raw' must be 0x and hex digits");
        for (const char *q = rs + 2; *q; q++)
            if (!isxdigit((unsigned char)*q)) return rfail(r, ULK_EPARSE, ap, "'raw' must be 0x and hex digits");
        ua->raw = strtoull(rs + 2, &end, 16);
        if (strlen(rs) > 18 || (ua->bits < 64 && (ua->raw >> ua->bits)))
            return rfail(r, ULK_EPARSE, ap, "'raw' %.20s does not fit in %d bits", rs, ua->bits);
        const cJSON *en = member(a, "eng");
        if (!cJSON_IsNumber(en)) return rfail(r, ULK_EPARSE, ap, "'eng' must be a number");
        ua->eng = en->valuedouble;
        if (prof->upload_check_arg(r, ap, l, c, pos, ua)) return r->status;
        pos += ua->bits;
    }
    return prof->upload_check_unit(r, path, l, c, pos);
}

/* ------------------------------------------------------------------ streaming source
 *
 * Why streaming: a whole-document cJSON tree costs about ten times the file, and every
 * command in full about 300 bytes more; the modulator needs neither. The file is read in
 * chunks into a window; SHA-256 runs over the bytes as they arrive, holding back the last
 * DIGEST_LINE_LEN bytes (the digest line, known only at the end); the top-level members are
 * cut out of the window by a small bracket- and string-aware scanner and each is parsed alone
 * by cJSON, so only one command's tree exists at a time. Nothing read is handed out before
 * the digest has been checked at the end: the upload is built, then discarded on mismatch. */

#define RD_CHUNK 65536

typedef struct {
    FILE *fp;                    /* the file, or NULL to read mem */
    const char *mem;
    size_t mem_len, mem_off;
    EVP_MD_CTX *md;
    unsigned char hold[DIGEST_LINE_LEN]; /* the last bytes read, not hashed yet */
    size_t n_hold;
    uint64_t n_read;             /* bytes read so far */
    uint64_t size_hint;          /* size of a regular file or of mem, else 0 */
    int eof, ioerr, oom, has_nul, too_big, md_bad;
    char *buf;                   /* window: buf[mark..end) kept, buf[pos..end) unread */
    size_t cap, mark, pos, end;
} src_t;

/* Hashes everything read except the last DIGEST_LINE_LEN bytes, which wait in hold. */
static void src_hash(src_t *s, const unsigned char *p, size_t n)
{
    if (s->n_hold + n <= DIGEST_LINE_LEN) {
        memcpy(s->hold + s->n_hold, p, n);
        s->n_hold += n;
        return;
    }
    size_t to_hash = s->n_hold + n - DIGEST_LINE_LEN;
    size_t from_hold = to_hash < s->n_hold ? to_hash : s->n_hold, from_p = to_hash - from_hold;
    if (EVP_DigestUpdate(s->md, s->hold, from_hold) != 1 || EVP_DigestUpdate(s->md, p, from_p) != 1) s->md_bad = 1;
    memmove(s->hold, s->hold + from_hold, s->n_hold - from_hold);
    memcpy(s->hold + (s->n_hold - from_hold), p + from_p, n - from_p);
    s->n_hold = DIGEST_LINE_LEN;
}

/* Reads more into the window, dropping what lies before mark. Returns the count read (0 at
 * the end of the file, on a read error, or beyond ULK_UPLOAD_MAX_BYTES). */
static size_t src_more(src_t *s)
{
    if (s->eof) return 0;
    if (s->mark > 0) {
        memmove(s->buf, s->buf + s->mark, s->end - s->mark);
        s->pos -= s->mark;
        s->end -= s->mark;
        s->mark = 0;
    }
    if (s->cap - s->end < RD_CHUNK) {
        /* only a value being scanned keeps the window growing; sc_value bounds it */
        size_t nc = s->end + RD_CHUNK;
        char *nb = ulk_realloc(s->buf, nc);
        if (!nb) { s->eof = s->oom = 1; return 0; }
        s->buf = nb;
        s->cap = nc;
    }
    size_t want = RD_CHUNK, got;
    if (s->n_read + want > ULK_UPLOAD_MAX_BYTES + (uint64_t)1) want = (size_t)(ULK_UPLOAD_MAX_BYTES + 1 - s->n_read);
    if (s->fp) {
        got = fread(s->buf + s->end, 1, want, s->fp);
        if (got == 0 && ferror(s->fp)) s->ioerr = 1;
    } else {
        got = s->mem_len - s->mem_off < want ? s->mem_len - s->mem_off : want;
        memcpy(s->buf + s->end, s->mem + s->mem_off, got);
        s->mem_off += got;
    }
    if (got == 0) { s->eof = 1; return 0; }
    if (memchr(s->buf + s->end, 0, got)) s->has_nul = 1;
    src_hash(s, (const unsigned char *)s->buf + s->end, got);
    s->n_read += got;
    s->end += got;
    if (s->n_read > ULK_UPLOAD_MAX_BYTES) { s->too_big = 1; s->eof = 1; }
    return got;
}

static int sc_peek(src_t *s)
{
    if (s->pos == s->end) {
        s->mark = s->pos;
        if (!src_more(s)) return -1;
    }
    return (unsigned char)s->buf[s->pos];
}

static int sc_is_ws(int c) { return c == ' ' || c == '\n' || c == '\t' || c == '\r'; }

static void sc_ws(src_t *s)
{
    while (sc_is_ws(sc_peek(s))) s->pos++;
}

/* The extent buf[mark..pos) of one JSON value at pos (whitespace skipped before). Strings
 * and brackets are followed so that a ',' or ']' inside a string does not end it; whether
 * it is valid JSON is cJSON's to say. Returns 0, -1 when the text ends first or no value
 * starts here, -2 when it is longer than ULK_UPLOAD_MAX_VALUE_BYTES. */
static int sc_value(src_t *s)
{
    sc_ws(s);
    s->mark = s->pos;
    int depth = 0, in_str = 0, esc = 0;
    for (;;) {
        if (s->pos - s->mark > ULK_UPLOAD_MAX_VALUE_BYTES) return -2;
        int c;
        if (s->pos == s->end) { /* keep buf[mark..] while reading on */
            if (!src_more(s)) return (!depth && !in_str && s->pos > s->mark) ? 0 : -1;
        }
        c = (unsigned char)s->buf[s->pos];
        if (in_str) {
            s->pos++;
            if (esc) esc = 0;
            else if (c == '\\') esc = 1;
            else if (c == '"') { in_str = 0; if (!depth) return 0; }
            continue;
        }
        if (c == '"') { if (!depth && s->pos > s->mark) return 0; in_str = 1; s->pos++; continue; }
        if (c == '{' || c == '[') { if (!depth && s->pos > s->mark) return 0; depth++; s->pos++; continue; }
        if (c == '}' || c == ']') {
            if (!depth) return s->pos > s->mark ? 0 : -1;
            s->pos++;
            if (!--depth) return 0;
            continue;
        }
        if (!depth && (c == ',' || c == ':' || sc_is_ws(c))) return s->pos > s->mark ? 0 : -1;
        s->pos++;
    }
}

/* cJSON of the value just scanned (whole extent, nothing after it); NULL when not JSON. */
static cJSON *sc_parse(src_t *s)
{
    const char *end = NULL;
    cJSON *v = cJSON_ParseWithLengthOpts(s->buf + s->mark, s->pos - s->mark, &end, 0);
    if (v && end != s->buf + s->pos) { cJSON_Delete(v); v = NULL; }
    return v;
}

/* ------------------------------------------------------------------ reader */

/* What the reader builds as the commands pass by. */
typedef struct {
    rd_t *r;
    ulk_upload *u;
    unsigned flags;
    size_t n_full_want;          /* lean: commands kept in full */
    size_t full_bytes;           /* lean: what they take */
    uint64_t size_hint;          /* file size when known, else 0 */
    int full_closed;             /* lean: no more commands kept in full */
    size_t cap_full, cap_lean, cap_units, cap_octets;
    size_t unit_octets;          /* words or CLTUs so far */
    uint64_t patterns;           /* filler units + unit bits so far */
    const ulk_profile_ops *prof; /* the link's profile, once the link is read */
    void *counts;                /* its counts across records (upload_counts_create) */
    int prev_line;
    int head_done;               /* format, version, dictionary, source and link checked */
    ulk_upload_cmd scratch;      /* lean: the command being read */
} build_t;

static int grow(void **p, size_t *cap, size_t need, size_t elem)
{
    if (need <= *cap) return 0;
    size_t nc = *cap ? *cap : 1024;
    while (nc < need) nc *= 2;
    void *np = ulk_realloc(*p, nc * elem);
    if (!np) return -1;
    *p = np;
    *cap = nc;
    return 0;
}

/* One command, checked, into the upload (full, or lean: its idles and unit bytes). */
static int take_cmd(build_t *b, const cJSON *cj)
{
    rd_t *r = b->r;
    ulk_upload *u = b->u;
    const ulk_link *l = &u->link;
    const ulk_profile_ops *prof = b->prof;
    size_t idx = u->n_cmds;
    char path[64];
    snprintf(path, sizeof path, "commands[%zu]", idx);
    if (idx >= ULK_UPLOAD_MAX_CMDS)
        return rfail(r, ULK_ELIMIT, "commands",
                     "more than %u commands (the limit that keeps ulk modulate under 64 MB)", ULK_UPLOAD_MAX_CMDS);
    ulk_upload_lean *z = u->lean;
    int full = !z || (idx < b->n_full_want && !b->full_closed);
    ulk_upload_cmd *c = &b->scratch;
    if (full) {
        if (grow((void **)&u->cmds, &b->cap_full, ulk_upload_n_full(u) + 1, sizeof *u->cmds))
            return rfail(r, ULK_ENOMEM, NULL, "out of memory");
        c = &u->cmds[ulk_upload_n_full(u)];
    }
    memset(c, 0, sizeof *c);
    int rc = read_cmd(r, cj, idx, b->prev_line, l, c);
    if (full && (c->block_ || c->cltu || rc == 0)) { /* counted, so that destroy frees its parts */
        if (z) z->n_full++;
        else u->n_cmds++;
    }
    if (rc) { if (!full) cmd_free_parts(c); return rc; }
    b->prev_line = c->line;
    if (z && full) {
        /* the full copies (for annotations) have a budget: a hostile upload of long names
         * or large frames keeps fewer of them, never more memory */
        size_t sz = sizeof *c + c->n_cltu + c->n_frame + 64 + strlen(c->mnemonic) + strlen(c->system_name);
        for (int k = 0; k < c->n_args; k++)
            sz += sizeof c->args[k] + strlen(c->args[k].name) + strlen(c->args[k].text) +
                  (c->args[k].units ? strlen(c->args[k].units) + 1 : 0) + 2;
        b->full_bytes += sz;
        if (b->full_bytes > ULK_UPLOAD_LEAN_FULL_BYTES) {
            /* over budget: this one goes back to the lean form only */
            b->full_closed = 1;
            z->n_full--;
            full = 0;
            b->scratch = *c;
            c = &b->scratch;
        }
    }
    uint64_t ub = prof->unit_bits(l, c);
    size_t octets = prof->unit_octets(l, c);
    /* the counts that run across records (packet count per APID, N(S)), as the compiler
     * numbers them: a reordered or spliced upload is refused */
    rc = prof->upload_counts_check(b->counts, r, path, l, c, idx);
    if (!rc && b->unit_octets + octets > ULK_UPLOAD_MAX_UNIT_OCTETS)
        rc = rfail(r, ULK_ELIMIT, path,
                   "the %s of the upload exceed %zu octets (the limit that keeps ulk modulate under 64 MB)",
                   prof->unit_noun, ULK_UPLOAD_MAX_UNIT_OCTETS);
    /* units of one length are found by stride, others by an offset each */
    const int varies = z && z->unit_stride == 0;
    if (!rc && z) {
        if (grow((void **)&z->idles, &b->cap_lean, idx + 1, sizeof *z->idles) ||
            (varies && grow((void **)&z->unit_off, &b->cap_units, idx + 2, sizeof *z->unit_off)) ||
            grow((void **)&z->units, &b->cap_octets, b->unit_octets + octets, 1))
            rc = rfail(r, ULK_ENOMEM, NULL, "out of memory");
    }
    if (!rc && z) {
        z->idles[idx] = c->idles_before;
        if (varies) {
            if (idx == 0) z->unit_off[0] = 0;
            z->unit_off[idx + 1] = (uint32_t)(b->unit_octets + octets);
        }
        prof->unit_pack(l, c, z->units + b->unit_octets);
    }
    if (!rc) {
        b->unit_octets += octets;
        b->patterns += c->idles_before + ub;
        if (z) u->n_cmds++;
    }
    if (!full) cmd_free_parts(c);
    return rc;
}

static const char *const root_keys[] = {"format", "version", "dictionary", "source", "link", "commands",
                                        "wait_after_s", "idles_after", "totals", "digest"};

/* Format, version, the members so far, dictionary, source and link: what must be known
 * before the commands (the writer puts them first). final: at the end of the document. */
static int check_head(build_t *b, const cJSON *root, int final)
{
    rd_t *r = b->r;
    ulk_upload *u = b->u;
    b->head_done = 1;
    const cJSON *f = member(root, "format");
    if (!cJSON_IsString(f) || strcmp(f->valuestring, "ulk-upload")) return rfail(r, ULK_EFORMAT, "format", "not an ulk upload file");
    const cJSON *ver = member(root, "version");
    if (!cJSON_IsNumber(ver) || ver->valuedouble != ULK_UPLOAD_FORMAT_VERSION)
        return rfail(r, ULK_EFORMAT, "version", "upload format version %g is not supported (this build reads version %d)",
                     cJSON_IsNumber(ver) ? ver->valuedouble : -1.0, ULK_UPLOAD_FORMAT_VERSION);
    u->format_version = ULK_UPLOAD_FORMAT_VERSION;
    if (want_keys_p(r, root, "", root_keys, 10, !final)) return r->status;
    const cJSON *dj = member(root, "dictionary");
    if (!dj) return rfail(r, ULK_EPARSE, "", "'dictionary' must come before 'commands'");
    static const char *const dk[] = {"name", "version", "sha256"};
    if (want_keys(r, dj, "dictionary", dk, 3)) return r->status;
    const char *dn = get_str(r, dj, "name", "dictionary", 256), *dv = dn ? get_str(r, dj, "version", "dictionary", 256) : NULL;
    const char *dh = dv ? get_str(r, dj, "sha256", "dictionary", 64) : NULL;
    if (!dh) return r->status;
    if (strlen(dh) != 64 && strlen(dh) != 0) return rfail(r, ULK_EPARSE, "dictionary.sha256", "expected 64 hex digits");
    for (const char *q = dh; *q; q++)
        if (!isxdigit((unsigned char)*q)) return rfail(r, ULK_EPARSE, "dictionary.sha256", "expected 64 hex digits");
    u->dict_name = ulk_strdup(dn);
    u->dict_version = ulk_strdup(dv);
    memcpy(u->dict_sha256, dh, strlen(dh) + 1);
    if (!member(root, "source")) return rfail(r, ULK_EPARSE, "", "'source' must come before 'commands'");
    const char *src = get_str(r, root, "source", "", 4096);
    if (!src) return r->status;
    u->source = ulk_strdup(src);
    if (!u->dict_name || !u->dict_version || !u->source) return rfail(r, ULK_ENOMEM, NULL, "out of memory");
    const cJSON *lj = member(root, "link");
    if (!lj) return rfail(r, ULK_EPARSE, "", "'link' must come before 'commands'");
    if (read_link(r, lj, &u->link)) return r->status;
    b->prof = ulk_profile_of(&u->link);
    if (b->prof->upload_counts_create(&u->link, &b->counts)) return rfail(r, ULK_ENOMEM, "commands", "out of memory");
    if (b->flags & ULK_UPLOAD_LEAN) {
        ulk_upload_lean *z = u->lean = ulk_calloc(1, sizeof *z);
        if (!z) return rfail(r, ULK_ENOMEM, NULL, "out of memory");
        z->unit_stride = b->prof->unit_stride(&u->link);
        if (b->size_hint) {
            /* reserved once from the file size (a command takes more than 64 bytes of text,
             * a unit octet at least one): growing by copies would hold old and new arrays at
             * once; pages never written are not resident */
            uint64_t nc = b->size_hint / 64 + 2, no = b->size_hint + 16;
            if (nc > ULK_UPLOAD_MAX_CMDS + 2u) nc = ULK_UPLOAD_MAX_CMDS + 2u;
            if (no > ULK_UPLOAD_MAX_UNIT_OCTETS) no = ULK_UPLOAD_MAX_UNIT_OCTETS;
            size_t nf = b->n_full_want < nc ? b->n_full_want : (size_t)nc;
            if (grow((void **)&z->idles, &b->cap_lean, (size_t)nc, sizeof *z->idles) ||
                (z->unit_stride == 0 &&
                 grow((void **)&z->unit_off, &b->cap_units, (size_t)nc, sizeof *z->unit_off)) ||
                grow((void **)&z->units, &b->cap_octets, (size_t)no, 1) ||
                (nf && grow((void **)&u->cmds, &b->cap_full, nf, sizeof *u->cmds)))
                return rfail(r, ULK_ENOMEM, NULL, "out of memory");
        }
    }
    return 0;
}

/* The "commands" array, one element at a time. */
static int read_commands(build_t *b, src_t *s)
{
    rd_t *r = b->r;
    sc_ws(s);
    if (sc_peek(s) != '[') return rfail(r, ULK_EPARSE, "commands", "expected an array");
    s->pos++;
    sc_ws(s);
    if (sc_peek(s) == ']') {
        s->pos++;
    } else {
        for (;;) {
            int k = sc_value(s);
            char path[64];
            snprintf(path, sizeof path, "commands[%zu]", b->u->n_cmds);
            if (k == -2)
                return rfail(r, ULK_ELIMIT, path, "longer than %zu bytes", (size_t)ULK_UPLOAD_MAX_VALUE_BYTES);
            cJSON *cj = k ? NULL : sc_parse(s);
            if (!cj) return rfail(r, ULK_EPARSE, path, "not valid JSON");
            int rc = take_cmd(b, cj);
            cJSON_Delete(cj);
            if (rc) return rc;
            sc_ws(s);
            int c = sc_peek(s);
            s->pos += c >= 0;
            if (c == ']') break;
            if (c != ',') return rfail(r, ULK_EPARSE, "commands", "not valid JSON (expected ',' or ']' after %s)", path);
        }
    }
    if (b->u->n_cmds < 1) return rfail(r, ULK_EPARSE, "commands", "an upload holds at least one command");
    return 0;
}

/* The document: '{', members (commands streamed, the others parsed alone and kept in root),
 * '}', nothing after. */
static int read_doc(build_t *b, src_t *s, cJSON *root)
{
    rd_t *r = b->r;
    ulk_upload *u = b->u;
    sc_ws(s);
    if (sc_peek(s) != '{') return rfail(r, ULK_EPARSE, NULL, "not valid JSON");
    s->pos++;
    int seen_commands = 0;
    for (int first = 1;; first = 0) {
        sc_ws(s);
        if (first && sc_peek(s) == '}') { s->pos++; break; }
        int k = sc_value(s);
        cJSON *key = k ? NULL : sc_parse(s);
        if (!cJSON_IsString(key)) { cJSON_Delete(key); return rfail(r, ULK_EPARSE, NULL, "not valid JSON (expected a member name)"); }
        sc_ws(s);
        if (sc_peek(s) != ':') { cJSON_Delete(key); return rfail(r, ULK_EPARSE, NULL, "not valid JSON (expected ':')"); }
        s->pos++;
        cJSON *v;
        if (!strcmp(key->valuestring, "commands")) {
            if (seen_commands++) { cJSON_Delete(key); return rfail(r, ULK_EPARSE, "", "member 'commands' appears twice"); }
            if (check_head(b, root, 0) || read_commands(b, s)) { cJSON_Delete(key); return r->status; }
            v = cJSON_CreateNull(); /* in its place, for the member checks */
        } else {
            k = sc_value(s);
            if (k == -2) { cJSON_Delete(key); return rfail(r, ULK_ELIMIT, NULL, "a member is longer than %zu bytes", (size_t)ULK_UPLOAD_MAX_VALUE_BYTES); }
            v = k ? NULL : sc_parse(s);
            if (!v) { cJSON_Delete(key); return rfail(r, ULK_EPARSE, NULL, "not valid JSON"); }
        }
        if (!v || !cJSON_AddItemToObject(root, key->valuestring, v)) {
            cJSON_Delete(v);
            cJSON_Delete(key);
            return rfail(r, ULK_ENOMEM, NULL, "out of memory");
        }
        cJSON_Delete(key);
        sc_ws(s);
        int c = sc_peek(s);
        s->pos += c >= 0;
        if (c == '}') break;
        if (c != ',') return rfail(r, ULK_EPARSE, NULL, "not valid JSON (expected ',' or '}')");
    }
    sc_ws(s);
    if (sc_peek(s) >= 0) return rfail(r, ULK_EPARSE, NULL, "not valid JSON (text after the end)");
    if (!b->head_done && check_head(b, root, 1)) return r->status;
    if (want_keys(r, root, "", root_keys, 10)) return r->status;
    if (get_ratio(r, root, "wait_after_s", "", 1, &u->wait_after)) return r->status;
    if (u->wait_after.num > 86400 * u->wait_after.den) return rfail(r, ULK_ELIMIT, "wait_after_s", "beyond the limit of 86400 s");
    u->wait_after_s = ulk_ratio_to_double(u->wait_after);
    if (get_int(r, root, "idles_after", "", (double)ulk_profile_ops_for(u->link.profile)->gap_units(&u->link, ULK_GAP_LAST),
                (double)ULK_UPLOAD_MAX_IDLES, &u->idles_after, NULL))
        return r->status;
    const cJSON *tj = member(root, "totals");
    static const char *const tk[] = {"words", "subbits", "duration_s"};
    if (want_keys(r, tj, "totals", tk, 3)) return r->status;
    uint64_t words = 0, subbits = 0; /* set by get_int on success */
    if (get_int(r, tj, "words", "totals", 0, 1e15, &words, NULL)) return r->status;
    if (get_int(r, tj, "subbits", "totals", 0, 9e15, &subbits, NULL)) return r->status;
    uint64_t pat = b->patterns + u->idles_after;
    if (words != u->n_cmds || subbits != pat * (uint64_t)u->link.n_subbits)
        return rfail(r, ULK_EPARSE, "totals", "the totals do not match the commands");
    if (u->lean) u->lean->n_subbits = pat * (uint64_t)u->link.n_subbits;
    return 0;
}

/* The whole reader over one source (file or memory). */
static int read_src(const char *name, src_t *s, unsigned flags, size_t n_full, ulk_upload **out, ulk_diag *diag)
{
    *out = NULL;
    rd_t r = {name ? name : "<upload>", diag, 0, 0, "", ""};
    s->md = EVP_MD_CTX_new();
    if (!s->md || EVP_DigestInit_ex(s->md, EVP_sha256(), NULL) != 1) {
        EVP_MD_CTX_free(s->md);
        return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", r.name);
    }
    ulk_upload *u = NULL;
    cJSON *root = NULL;
    /* the start: '{' and the format name in the first 200 bytes */
    while (s->end < 200 && src_more(s)) {}
    if (s->too_big) { rfail(&r, ULK_ELIMIT, NULL, "file is larger than the limit of %zu bytes", ULK_UPLOAD_MAX_BYTES); goto fin; }
    if (s->oom) { rfail(&r, ULK_ENOMEM, NULL, "out of memory"); goto fin; }
    if (s->ioerr) { rfail(&r, ULK_EIO, NULL, "read error"); goto fin; }
    if (s->end < 2 || s->buf[0] != '{' || memmem(s->buf, s->end < 200 ? s->end : 200, "\"ulk-upload\"", 12) == NULL) {
        rfail(&r, ULK_EFORMAT, NULL, "not an ulk upload file (no \"format\": \"ulk-upload\" at its start)");
        goto fin;
    }
    build_t b;
    memset(&b, 0, sizeof b);
    b.r = &r;
    b.flags = flags;
    b.n_full_want = n_full;
    b.size_hint = s->size_hint;
    u = b.u = ulk_calloc(1, sizeof *u);
    root = cJSON_CreateObject();
    if (!u || !root) rfail(&r, ULK_ENOMEM, NULL, "out of memory");
    else read_doc(&b, s, root);
    if (b.prof) b.prof->upload_counts_destroy(b.counts);
    /* the rest of the file, to its digest line: a changed file is reported as changed */
    if (r.status != ULK_ENOMEM) {
        s->mark = s->pos = s->end;
        while (src_more(s)) s->mark = s->pos = s->end;
    }
    if (s->oom) {
        r.status = 0;
        rfail(&r, ULK_ENOMEM, NULL, "out of memory");
    } else if (s->too_big) {
        r.status = 0;
        rfail(&r, ULK_ELIMIT, NULL, "file is larger than the limit of %zu bytes", ULK_UPLOAD_MAX_BYTES);
    } else if (s->ioerr && r.status != ULK_ENOMEM) {
        r.status = 0;
        rfail(&r, ULK_EIO, NULL, "read error");
    } else if (r.status != ULK_ENOMEM) {
        unsigned char md[EVP_MAX_MD_SIZE];
        unsigned int mdlen = 0;
        char got[65], want[65];
        if (s->n_hold < DIGEST_LINE_LEN || memcmp(s->hold + DIGEST_LINE_LEN - (sizeof DIGEST_TAIL - 1), DIGEST_TAIL, sizeof DIGEST_TAIL - 1) ||
            memcmp(s->hold, DIGEST_HEAD, sizeof DIGEST_HEAD - 1)) {
            r.status = 0;
            rfail(&r, ULK_EINTEGRITY, NULL,
                  "the file does not end with its digest line; it was changed or cut short after it was written");
        } else if (s->md_bad || EVP_DigestFinal_ex(s->md, md, &mdlen) != 1) {
            r.status = 0;
            rfail(&r, ULK_ENOMEM, NULL, "out of memory");
        } else {
            for (unsigned i = 0; i < 32; i++) snprintf(got + 2 * i, 3, "%02x", md[i]);
            memcpy(want, s->hold + sizeof DIGEST_HEAD - 1, 64);
            want[64] = 0;
            if (strcmp(want, got)) {
                r.status = 0;
                rfail(&r, ULK_EINTEGRITY, NULL,
                      "SHA-256 digest mismatch (recorded %.12s..., computed %.12s...): the file was changed after it "
                      "was written; recompile it from its command list",
                      want, got);
            } else if (s->has_nul) {
                r.status = 0;
                rfail(&r, ULK_EPARSE, NULL, "NUL byte in the file");
            }
        }
    }
fin:
    cJSON_Delete(root);
    EVP_MD_CTX_free(s->md);
    ulk_free(s->buf);
    if (r.status) {
        ulk_upload_destroy(u);
        return rd_emit(&r);
    }
    *out = u;
    return 0;
}

int ulk_upload_read_mem_opts(const char *name, const char *text, size_t len, unsigned flags, size_t n_full,
                             ulk_upload **out, ulk_diag *diag)
{
    src_t s;
    memset(&s, 0, sizeof s);
    s.mem = text;
    s.mem_len = len;
    s.size_hint = len;
    return read_src(name, &s, flags, n_full, out, diag);
}

int ulk_upload_read_mem(const char *name, const char *text, size_t len, ulk_upload **out, ulk_diag *diag)
{
    return ulk_upload_read_mem_opts(name, text, len, 0, 0, out, diag);
}

int ulk_upload_read_opts(const char *path, unsigned flags, size_t n_full, ulk_upload **out, ulk_diag *diag)
{
    *out = NULL;
    src_t s;
    memset(&s, 0, sizeof s);
    const int is_std = !strcmp(path, "-"); /* standard input: read, never closed */
    if (is_std) path = "<stdin>";
    s.fp = is_std ? stdin : fopen(path, "rb");
    if (!s.fp) return ulk_fail(diag, ULK_EIO, "%s: cannot open: %s", path, strerror(errno));
    struct stat st;
    if (fstat(fileno(s.fp), &st) == 0 && S_ISREG(st.st_mode) && st.st_size > 0) s.size_hint = (uint64_t)st.st_size;
    int rc = read_src(path, &s, flags, n_full, out, diag);
    if (!is_std) fclose(s.fp);
    return rc;
}

int ulk_upload_read(const char *path, ulk_upload **out, ulk_diag *diag)
{
    return ulk_upload_read_opts(path, 0, 0, out, diag);
}

/* ------------------------------------------------------------------ accessors (either form) */

size_t ulk_upload_n_full(const ulk_upload *u) { return u->lean ? u->lean->n_full : u->n_cmds; }

uint64_t ulk_upload_idles_before(const ulk_upload *u, size_t i)
{
    return u->lean ? u->lean->idles[i] : u->cmds[i].idles_before;
}

uint64_t ulk_upload_unit_bits(const ulk_upload *u, size_t i)
{
    const ulk_upload_lean *z = u->lean;
    if (!z) return ulk_profile_ops_for(u->link.profile)->unit_bits(&u->link, &u->cmds[i]);
    if (z->unit_off) return 8u * (uint64_t)(z->unit_off[i + 1] - z->unit_off[i]);
    return (uint64_t)u->link.word_bits;
}

int ulk_upload_unit_bit(const ulk_upload *u, size_t i, uint64_t b)
{
    const ulk_upload_lean *z = u->lean;
    if (!z) return ulk_profile_ops_for(u->link.profile)->unit_bit(&u->link, &u->cmds[i], b);
    const uint8_t *p = z->units + (z->unit_off ? z->unit_off[i] : i * z->unit_stride);
    return (p[b >> 3] >> (7 - (b & 7))) & 1;
}

/* ------------------------------------------------------------------ back to a command list */

static int print_wait(FILE *out, ulk_ratio w)
{
    char t[80];
    ulk_ratio_format(w, t, sizeof t);
    return fprintf(out, "wait %ss\n", t) < 0;
}

#define PAD_MAX 100000 /* blank lines printed at most to keep a command on its source line */

int ulk_upload_print_list(const ulk_upload *u, FILE *out)
{
    int bad = 0, cur = 1; /* next line number to write */
    for (size_t i = 0; i < u->n_cmds; i++) {
        const ulk_upload_cmd *c = &u->cmds[i];
        int has_wait = c->wait_before.num != 0;
        int first = c->line - has_wait; /* the line this command's part starts on */
        if (cur == 1 && first > 1) {
            bad |= fprintf(out, "# commands of upload from %s (dictionary %s %s); lines kept\n",
                           u->source ? u->source : "?", u->dict_name ? u->dict_name : "?",
                           u->dict_version ? u->dict_version : "?") < 0;
            cur++;
        }
        if (first - cur > PAD_MAX) { /* an absurd gap: say so instead of printing it */
            bad |= fprintf(out, "# lines %d to %d of the source are not shown\n", cur, first - 1) < 0;
            cur = first;
        }
        while (cur < first) { bad |= fputc('\n', out) == EOF; cur++; }
        if (has_wait) { bad |= print_wait(out, c->wait_before); cur++; }
        bad |= fputs(c->mnemonic, out) == EOF;
        for (int k = 0; k < c->n_args; k++) bad |= fprintf(out, " %s=%s", c->args[k].name, c->args[k].text) < 0;
        bad |= fputs(c->critical ? " confirm\n" : "\n", out) == EOF;
        cur++;
    }
    if (u->wait_after.num != 0) bad |= print_wait(out, u->wait_after);
    bad |= fflush(out) != 0;
    return bad ? ULK_EIO : 0;
}
