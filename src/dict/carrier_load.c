/* src/carrier_load.c - the `carrier:` section: from a document tree to the carrier model,
 * with the rules of docs/spec/carrier.md section 1 (primitive ranging polynomial: error;
 * overlapping main lobes: warning). Keys: docs/carrier.md.
 */
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "carrier_load.h"
#include "doc.h"
#include "ulk/carrier.h"
#include "ulk/dict.h"
#include "ulk/profile.h"
#include "util.h"

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

/* Default solver bounds, rad (our choice: beyond 1.5 rad one channel alone leaves under ~7%
 * of the power in a sinusoidal channel's residual carrier). */
#define BOUND_LO_DEFAULT 0.0
#define BOUND_HI_DEFAULT 1.5

typedef struct {
    const ulk_doc *doc;
    ulk_diag *diag;
    ulk_carrier *c;
    int n_err;
    int oom;
} lctx;

static void vfinding(lctx *x, ulk_severity sev, ulk_node *n, const char *fmt, va_list ap)
{
    ulk_loc l = ulk_node_loc(x->doc, n);
    if (sev == ULK_SEV_ERROR) x->n_err++;
    ulk_diag_vadd(x->diag, sev, &l, fmt, ap);
}

static void err(lctx *x, ulk_node *n, const char *fmt, ...) __attribute__((format(printf, 3, 4)));
static void err(lctx *x, ulk_node *n, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vfinding(x, ULK_SEV_ERROR, n, fmt, ap);
    va_end(ap);
}

static void warn(lctx *x, ulk_node *n, const char *fmt, ...) __attribute__((format(printf, 3, 4)));
static void warn(lctx *x, ulk_node *n, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vfinding(x, ULK_SEV_WARNING, n, fmt, ap);
    va_end(ap);
}

static int want_map(lctx *x, ulk_node *n, const char *what)
{
    if (n && n->kind == ULK_NODE_MAP) return 1;
    err(x, n, "%s must be a mapping, not %s", what, ulk_node_type_name(n));
    return 0;
}

static void report_err(void *ctx, ulk_node *n, const char *msg) { err((lctx *)ctx, n, "%s", msg); }

/* Unknown keys (with did-you-mean) and missing required keys of a mapping. */
static void check_keys(lctx *x, ulk_node *map, const char *what, const char *const *allowed,
                       const char *const *required)
{
    ulk_node_check_keys(map, what, allowed, required, report_err, x);
}

/* A finite number (YAML/JSON int or float, not quoted). Returns 1 with *v, else reports. */
static int get_num(lctx *x, ulk_node *n, double *v)
{
    ulk_scalar_type t = n && n->kind == ULK_NODE_SCALAR ? ulk_scalar_resolve(n) : ULK_SC_STRING;
    if (!n || n->kind != ULK_NODE_SCALAR || (t != ULK_SC_INT && t != ULK_SC_FLOAT)) {
        err(x, n, "%s must be a number, not %s", n && n->key ? n->key : "value", ulk_node_type_name(n));
        return 0;
    }
    if (t == ULK_SC_INT) {
        ulk_ratio r;
        int neg;
        uint64_t mag;
        if (ulk_ratio_parse(n->text, &r) == 0) {
            *v = ulk_ratio_to_double(r);
        } else if (ulk_parse_int_text(n->text, &neg, &mag) == 0) {
            *v = neg ? -(double)mag : (double)mag;
        } else {
            err(x, n, "%s: '%s' is not a number this reader takes", n->key ? n->key : "value", n->text);
            return 0;
        }
        return 1;
    }
    char *end;
    double d = strtod(n->text, &end);
    if (*end || !isfinite(d)) {
        err(x, n, "%s: '%s' is not a finite number", n->key ? n->key : "value", n->text);
        return 0;
    }
    *v = d;
    return 1;
}

/* An exact rate (decimal text, or a quoted decimal as the upload file writes rates);
 * positive unless allow_any_sign. */
static int get_rate(lctx *x, ulk_node *n, ulk_ratio *r, int allow_any_sign)
{
    ulk_scalar_type t = n && n->kind == ULK_NODE_SCALAR ? ulk_scalar_resolve(n) : ULK_SC_NULL;
    ulk_ratio tmp;
    if (t == ULK_SC_STRING && ulk_ratio_parse(n->text, &tmp) != ULK_EPARSE) t = ULK_SC_FLOAT;
    if (!n || n->kind != ULK_NODE_SCALAR || (t != ULK_SC_INT && t != ULK_SC_FLOAT)) {
        err(x, n, "%s must be a number of Hz, not %s", n && n->key ? n->key : "value", ulk_node_type_name(n));
        return 0;
    }
    int rc = ulk_ratio_parse(n->text, r);
    if (rc == ULK_ELIMIT) {
        err(x, n, "%s %s is too fine to keep exactly (numerator and denominator must fit 62 bits)",
            n->key ? n->key : "value", n->text);
        return 0;
    }
    if (rc) {
        err(x, n, "%s: '%s' is not a finite decimal", n->key ? n->key : "value", n->text);
        return 0;
    }
    if (!allow_any_sign && r->num <= 0) {
        err(x, n, "%s must be greater than 0 (got %s)", n->key ? n->key : "value", n->text);
        return 0;
    }
    return 1;
}

static int get_positive(lctx *x, ulk_node *n, double *v)
{
    if (!get_num(x, n, v)) return 0;
    if (*v <= 0) {
        err(x, n, "%s must be greater than 0 (got %s)", n->key ? n->key : "value", n->text);
        return 0;
    }
    return 1;
}

/* bounds: [lo, hi] with 0 <= lo < hi <= pi. */
static void get_bounds(lctx *x, ulk_node *n, double *lo, double *hi)
{
    if (!n) return;
    if (n->kind != ULK_NODE_SEQ || n->n != 2) {
        err(x, n, "bounds must be a list of two indices [MIN, MAX] in rad, not %s", ulk_node_type_name(n));
        return;
    }
    double a, b;
    if (!get_num(x, n->items[0], &a) || !get_num(x, n->items[1], &b)) return;
    if (a < 0 || b > M_PI || a >= b) {
        err(x, n, "bounds [%g, %g] must satisfy 0 <= MIN < MAX <= pi rad", a, b);
        return;
    }
    *lo = a;
    *hi = b;
}

static void poly_text(const int *e, int n, char *buf, size_t len)
{
    size_t u = 0;
    buf[0] = 0;
    for (int i = 0; i < n && u + 16 < len; i++) {
        const char *sep = i ? " + " : "";
        if (e[i] == 0) u += (size_t)snprintf(buf + u, len - u, "%s1", sep);
        else if (e[i] == 1) u += (size_t)snprintf(buf + u, len - u, "%sx", sep);
        else u += (size_t)snprintf(buf + u, len - u, "%sx^%d", sep, e[i]);
    }
}

static int cmp_desc(const void *a, const void *b)
{
    int x = *(const int *)a, y = *(const int *)b;
    return (x < y) - (x > y);
}

static void load_ranging(lctx *x, ulk_node *rn)
{
    ulk_carrier *c = x->c;
    static const char *const keys[] = {"chip_rate", "polynomial", "required_pn0_dbhz", "bounds", NULL};
    static const char *const req[] = {"chip_rate", "polynomial", NULL};
    if (!want_map(x, rn, "carrier.ranging")) return;
    int e0 = x->n_err;
    check_keys(x, rn, "carrier.ranging", keys, req);
    ulk_node *n;
    if ((n = ulk_node_get(rn, "chip_rate"))) get_rate(x, n, &c->chip_rate, 0);
    if ((n = ulk_node_get(rn, "required_pn0_dbhz")) && get_num(x, n, &c->ranging_pn0_req_dbhz))
        c->has_ranging_need = 1;
    get_bounds(x, ulk_node_get(rn, "bounds"), &c->bound_lo[ULK_CH_RANGING], &c->bound_hi[ULK_CH_RANGING]);
    ulk_node *pn = ulk_node_get(rn, "polynomial");
    if (pn) {
        if (pn->kind != ULK_NODE_SEQ || pn->n < 2 || pn->n > ULK_MLS_MAX_DEGREE + 1) {
            err(x, pn, "polynomial must be a list of 2 to %d exponents (x^10 + x^3 + 1 is [10, 3, 0]), not %s",
                ULK_MLS_MAX_DEGREE + 1, ulk_node_type_name(pn));
        } else {
            int ok = 1;
            c->n_poly_exps = 0;
            for (int i = 0; i < pn->n; i++) {
                ulk_node *it = pn->items[i];
                int neg;
                uint64_t mag;
                if (it->kind != ULK_NODE_SCALAR || ulk_scalar_resolve(it) != ULK_SC_INT ||
                    ulk_parse_int_text(it->text, &neg, &mag) != 0 || neg || mag > ULK_MLS_MAX_DEGREE) {
                    err(x, it, "polynomial exponent must be an integer 0..%d, not %s%s%s", ULK_MLS_MAX_DEGREE,
                        it->kind == ULK_NODE_SCALAR ? "'" : "", it->kind == ULK_NODE_SCALAR ? it->text
                                                                                         : ulk_node_type_name(it),
                        it->kind == ULK_NODE_SCALAR ? "'" : "");
                    ok = 0;
                    continue;
                }
                for (int j = 0; j < c->n_poly_exps; j++)
                    if (c->poly_exps[j] == (int)mag) {
                        err(x, it, "polynomial exponent %d is repeated", (int)mag);
                        ok = 0;
                    }
                c->poly_exps[c->n_poly_exps++] = (int)mag;
            }
            if (ok) {
                qsort(c->poly_exps, (size_t)c->n_poly_exps, sizeof(int), cmp_desc);
                c->degree = c->poly_exps[0];
                char pt[200];
                poly_text(c->poly_exps, c->n_poly_exps, pt, sizeof pt);
                uint64_t period = 0;
                int rc = c->degree < 2 ? ULK_EINVAL : ulk_mls_generate(c->poly_exps, c->n_poly_exps, &period, NULL);
                uint64_t full = ((uint64_t)1 << c->degree) - 1;
                if (rc == ULK_EINVAL) {
                    err(x, pn, "polynomial %s must have degree 2 or more", pt);
                } else if (rc == ULK_EPARSE) {
                    err(x, pn, "polynomial %s has no constant term (exponent 0): the sequence never "
                               "repeats from all ones, so it is not primitive", pt);
                } else if (rc == ULK_ENOMEM) {
                    x->oom = 1;
                } else if (rc) {
                    err(x, pn, "polynomial %s: %s", pt, ulk_status_str(rc));
                } else if (period != full) {
                    err(x, pn, "polynomial %s is not primitive: its sequence repeats every %llu chips, "
                               "not 2^%d - 1 = %llu", pt, (unsigned long long)period, c->degree,
                        (unsigned long long)full);
                } else {
                    c->period = period;
                }
            }
        }
    }
    if (x->n_err == e0) c->has_ranging = 1;
}

/* Audio bandwidth assumed for Carson's rule when the voice comes from a file and the section
 * does not say (audio_bandwidth_hz): the telephone speech band's upper edge, common practice. */
#define AUDIO_BW_DEFAULT_HZ 3400

static char *relative_to(const char *base, const char *rel);

static void load_voice(lctx *x, ulk_node *vn)
{
    ulk_carrier *c = x->c;
    static const char *const keys[] = {"subcarrier_hz", "deviation_hz", "tone_hz", "audio", "audio_channel",
                                       "audio_bandwidth_hz", "required_pn0_dbhz", "bounds", NULL};
    static const char *const req[] = {"subcarrier_hz", "deviation_hz", NULL};
    if (!want_map(x, vn, "carrier.voice")) return;
    int e0 = x->n_err;
    check_keys(x, vn, "carrier.voice", keys, req);
    ulk_node *n, *tone = ulk_node_get(vn, "tone_hz"), *audio = ulk_node_get(vn, "audio");
    if ((n = ulk_node_get(vn, "subcarrier_hz"))) get_rate(x, n, &c->voice_fv_hz, 0);
    if ((n = ulk_node_get(vn, "deviation_hz"))) get_rate(x, n, &c->voice_dev_hz, 0);
    c->voice_audio_channel = -1;
    if (tone && audio) {
        err(x, audio, "the voice takes either a test tone (tone_hz) or an audio file (audio), not both");
    } else if (!tone && !audio) {
        err(x, vn, "the voice needs its audio: a test tone (tone_hz: HZ) or an audio file (audio: FILE.wav)");
    }
    if (tone) get_rate(x, tone, &c->voice_tone_hz, 0);
    if (!audio) {
        ulk_node *k = ulk_node_get(vn, "audio_channel") ? ulk_node_get(vn, "audio_channel")
                                                        : ulk_node_get(vn, "audio_bandwidth_hz");
        if (k) err(x, k, "audio_channel and audio_bandwidth_hz go with an audio file (audio: FILE.wav)");
    } else {
        if (audio->kind != ULK_NODE_SCALAR || ulk_scalar_resolve(audio) != ULK_SC_STRING || !audio->len) {
            err(x, audio, "audio must be a file name (relative to this file's folder), not %s",
                ulk_node_type_name(audio));
        } else {
            c->voice_audio = x->doc->file ? relative_to(x->doc->file, audio->text) : ulk_strdup(audio->text);
            if (!c->voice_audio) x->oom = 1;
        }
        if ((n = ulk_node_get(vn, "audio_channel"))) {
            if (n->kind != ULK_NODE_SCALAR || ulk_scalar_resolve(n) != ULK_SC_INT || atol(n->text) < 0 ||
                atol(n->text) > 255)
                err(x, n, "audio_channel must be a whole number 0..255 (0 = the first channel)");
            else
                c->voice_audio_channel = (int)atol(n->text);
        }
        c->voice_tone_hz = ulk_ratio_make(AUDIO_BW_DEFAULT_HZ, 1);
        if ((n = ulk_node_get(vn, "audio_bandwidth_hz"))) get_rate(x, n, &c->voice_tone_hz, 0);
    }
    if ((n = ulk_node_get(vn, "required_pn0_dbhz")) && get_num(x, n, &c->voice_pn0_req_dbhz))
        c->has_voice_need = 1;
    get_bounds(x, ulk_node_get(vn, "bounds"), &c->bound_lo[ULK_CH_VOICE], &c->bound_hi[ULK_CH_VOICE]);
    if (x->n_err == e0) c->has_voice = 1;
}

static void load_data(lctx *x, ulk_node *dn, const ulk_link *link)
{
    ulk_carrier *c = x->c;
    static const char *const keys[] = {"required_ebn0_db", "info_rate", "bounds", NULL};
    if (!want_map(x, dn, "carrier.data")) return;
    int e0 = x->n_err;
    check_keys(x, dn, "carrier.data", keys, NULL);
    if (!link) {
        err(x, dn, "the data channel takes its signal from the dictionary's link, and none was given "
                   "(a standalone carrier file names it with 'dictionary: FILE')");
        return;
    }
    ulk_node *n;
    c->profile = link->profile;
    c->data_wave = link->waveform;
    c->data_fsc_hz = link->fsc;
    c->data_amp = link->amplitude;
    c->has_pilot = link->has_pilot;
    c->pilot_hz = link->fp;
    c->pilot_amp = link->has_pilot ? link->pilot_amplitude : 0.0;
    /* the link's own rates: information bits (R_b, or what the codeblocks carry) and symbols */
    const ulk_profile_ops *prof = ulk_profile_of(link);
    c->data_rb = prof->info_bit_rate(link);
    c->data_symbol_rate = prof->symbol_rate(link);
    if ((n = ulk_node_get(dn, "info_rate"))) get_rate(x, n, &c->data_rb, 0);
    if ((n = ulk_node_get(dn, "required_ebn0_db")) && get_num(x, n, &c->data_ebn0_req_db))
        c->has_data_need = 1;
    get_bounds(x, ulk_node_get(dn, "bounds"), &c->bound_lo[ULK_CH_DATA], &c->bound_hi[ULK_CH_DATA]);
    if (x->n_err == e0) c->has_data = 1;
}

static const char *const chan_keys[] = {"data", "voice", "ranging", NULL};

static void load_modes(lctx *x, ulk_node *mn)
{
    ulk_carrier *c = x->c;
    if (!want_map(x, mn, "carrier.modes")) return;
    if (mn->n == 0) {
        err(x, mn, "carrier.modes is empty: name at least one mode, e.g. command: {data: 1.1}");
        return;
    }
    c->modes = ulk_calloc((size_t)mn->n, sizeof *c->modes);
    if (!c->modes) { x->oom = 1; return; }
    for (int i = 0; i < mn->n; i++) {
        ulk_node *k = mn->keys[i], *v = mn->items[i];
        ulk_carrier_mode *m = &c->modes[c->n_modes++];
        m->name = ulk_strdup(k->text);
        ulk_loc l = ulk_node_loc(x->doc, v);
        m->loc.file = l.file ? ulk_strdup(l.file) : NULL;
        m->loc.path = ulk_strdup(l.path ? l.path : "");
        m->loc.line = l.line;
        m->loc.col = l.col;
        if (!m->name || !m->loc.path || (l.file && !m->loc.file)) x->oom = 1;
        char what[200];
        snprintf(what, sizeof what, "mode '%s'", k->text);
        if (!want_map(x, v, what)) continue;
        check_keys(x, v, what, chan_keys, NULL);
        int any = 0;
        for (int ch = 0; ch < ULK_CH_N; ch++) {
            ulk_node *in = ulk_node_get(v, chan_keys[ch]);
            if (!in) continue;
            any = 1;
            double mr;
            if (!get_num(x, in, &mr)) continue;
            if (!(mr > 0 && mr <= M_PI)) {
                err(x, in, "%s index %s rad is outside (0, pi]", chan_keys[ch], in->text);
                continue;
            }
            int def = ch == ULK_CH_DATA ? c->has_data : ch == ULK_CH_VOICE ? c->has_voice : c->has_ranging;
            if (!def) {
                err(x, in, "mode '%s' turns on the %s channel, but carrier.%s is %s", k->text, chan_keys[ch],
                    chan_keys[ch], "missing or invalid");
                continue;
            }
            m->on[ch] = 1;
            m->m_rad[ch] = mr;
        }
        if (!any) err(x, v, "mode '%s' turns on no channel (give data, voice and/or ranging indices in rad)", k->text);
    }
}

/* Overlap warnings of docs/spec/carrier.md section 1, for channels that share a mode. */
static void check_overlap(lctx *x, ulk_node *carrier)
{
    ulk_carrier *c = x->c;
    int both_dv = 0, both_dr = 0, both_vr = 0;
    for (int i = 0; i < c->n_modes; i++) {
        const int *on = c->modes[i].on;
        both_dv |= on[ULK_CH_DATA] && on[ULK_CH_VOICE];
        both_dr |= on[ULK_CH_DATA] && on[ULK_CH_RANGING];
        both_vr |= on[ULK_CH_VOICE] && on[ULK_CH_RANGING];
    }
    /* Main-lobe half-widths: data R_s (the sub-bit or channel bit rate) around f_sc; voice
     * Carson's rule Delta + f_a around f_v; ranging the first null of the chip spectrum at
     * the chip rate around the carrier. */
    double fd = ulk_ratio_to_double(c->data_fsc_hz), hd = ulk_ratio_to_double(c->data_symbol_rate);
    double fv = ulk_ratio_to_double(c->voice_fv_hz),
           hv = ulk_ratio_to_double(c->voice_dev_hz) + ulk_ratio_to_double(c->voice_tone_hz);
    double rc = ulk_ratio_to_double(c->chip_rate);
    if (both_dv && fabs(fd - fv) < hd + hv)
        warn(x, ulk_node_get(carrier, "voice"),
             "data subcarrier %g Hz (main lobe +-%g Hz) and voice subcarrier %g Hz (+-%g Hz, Delta + f_a) "
             "are closer than the sum of their half-bandwidths",
             fd, hd, fv, hv);
    if (both_dr && fd - hd < rc)
        warn(x, ulk_node_get(carrier, "ranging"),
             "data subcarrier main lobe (%g +- %g Hz) reaches into the ranging main lobe (below %g Hz)", fd, hd, rc);
    if (both_vr && fv - hv < rc)
        warn(x, ulk_node_get(carrier, "ranging"),
             "voice subcarrier main lobe (%g +- %g Hz) reaches into the ranging main lobe (below %g Hz)", fv, hv, rc);
}

int ulk_carrier_from_tree(const ulk_doc *doc, ulk_node *carrier, const ulk_link *link,
                          int allow_dictionary_key, ulk_carrier **out, ulk_diag *diag)
{
    if (out) *out = NULL;
    if (!doc || !carrier || !out) return ULK_EINVAL;
    lctx x = {doc, diag, NULL, 0, 0};
    ulk_carrier *c = ulk_calloc(1, sizeof *c);
    if (!c) return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", doc->file ? doc->file : "carrier");
    x.c = c;
    for (int ch = 0; ch < ULK_CH_N; ch++) {
        c->bound_lo[ch] = BOUND_LO_DEFAULT;
        c->bound_hi[ch] = BOUND_HI_DEFAULT;
    }
    c->offset_hz = ulk_ratio_make(0, 1);
    if (doc->file && !(c->file = ulk_strdup(doc->file))) x.oom = 1;
    if (want_map(&x, carrier, "carrier")) {
        static const char *const keys[] = {"offset_hz", "loop", "budget", "data", "voice", "ranging",
                                           "modes", "dictionary", NULL};
        static const char *const keys_nodict[] = {"offset_hz", "loop", "budget", "data", "voice",
                                                  "ranging", "modes", NULL};
        static const char *const req[] = {"modes", NULL};
        check_keys(&x, carrier, "carrier", allow_dictionary_key ? keys : keys_nodict, req);
        ulk_node *n;
        if ((n = ulk_node_get(carrier, "offset_hz"))) get_rate(&x, n, &c->offset_hz, 1);
        if ((n = ulk_node_get(carrier, "loop")) && want_map(&x, n, "carrier.loop")) {
            static const char *const lk[] = {"bandwidth_hz", "required_snr_db", NULL};
            int e0 = x.n_err;
            check_keys(&x, n, "carrier.loop", lk, lk);
            ulk_node *b = ulk_node_get(n, "bandwidth_hz"), *s = ulk_node_get(n, "required_snr_db");
            if (b) get_positive(&x, b, &c->loop_bw_hz);
            if (s) get_num(&x, s, &c->loop_snr_req_db);
            c->has_loop = x.n_err == e0;
        }
        if ((n = ulk_node_get(carrier, "budget")) && want_map(&x, n, "carrier.budget")) {
            static const char *const bk[] = {"pt_n0_dbhz", NULL};
            check_keys(&x, n, "carrier.budget", bk, bk);
            ulk_node *p = ulk_node_get(n, "pt_n0_dbhz");
            if (p && get_num(&x, p, &c->pt_n0_dbhz)) c->has_pt_n0 = 1;
        }
        if ((n = ulk_node_get(carrier, "data"))) load_data(&x, n, link);
        if ((n = ulk_node_get(carrier, "voice"))) load_voice(&x, n);
        if ((n = ulk_node_get(carrier, "ranging"))) load_ranging(&x, n);
        if ((n = ulk_node_get(carrier, "modes"))) load_modes(&x, n);
        if (!x.oom) check_overlap(&x, carrier);
    }
    if (x.oom) {
        ulk_carrier_destroy(c);
        return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", doc->file ? doc->file : "carrier");
    }
    if (x.n_err) {
        ulk_carrier_destroy(c);
        return ULK_EPARSE;
    }
    *out = c;
    return 0;
}

/* "dir/of/base" + rel, unless rel is absolute. Caller frees. */
static char *relative_to(const char *base, const char *rel)
{
    if (rel[0] == '/') return ulk_strdup(rel);
    const char *slash = strrchr(base, '/');
    size_t dl = slash ? (size_t)(slash - base + 1) : 0;
    size_t rl = strlen(rel);
    char *p = ulk_malloc(dl + rl + 1);
    if (!p) return NULL;
    memcpy(p, base, dl);
    memcpy(p + dl, rel, rl + 1);
    return p;
}

static int ends_with(const char *s, const char *suf)
{
    size_t a = strlen(s), b = strlen(suf);
    return a >= b && !strcmp(s + a - b, suf);
}

int ulk_carrier_load(const char *path, ulk_carrier **out, ulk_diag *diag)
{
    if (out) *out = NULL;
    if (!path || !out) return ULK_EINVAL;
    char *text = NULL;
    size_t len = 0;
    int rc = ulk_read_file(path, ULK_DOC_MAX_BYTES, &text, &len, diag);
    if (rc) return rc;
    ulk_doc *doc = NULL;
    rc = ulk_doc_parse(path, text, len, ends_with(path, ".json"), &doc, diag);
    ulk_free(text);
    if (rc) return rc;
    ulk_dict *dict = NULL;
    ulk_node *root = doc->root, *carrier = NULL;
    ulk_loc rl = ulk_node_loc(doc, root);
    if (root->kind != ULK_NODE_MAP) {
        rc = ulk_diag_add(diag, ULK_SEV_ERROR, &rl, "the top level must be a mapping with a 'carrier' key, not %s",
                          ulk_node_type_name(root));
        goto done;
    }
    carrier = ulk_node_get(root, "carrier");
    if (!carrier) {
        rc = ulk_diag_add(diag, ULK_SEV_ERROR, &rl, "no 'carrier' section in this file");
        goto done;
    }
    int whole = ulk_node_get(root, "link") || ulk_node_get(root, "commands");
    if (whole) {
        /* A whole dictionary: its loader checks everything, the carrier section included
         * (through ulk_carrier_from_tree), so every finding is reported once. */
        rc = ulk_dict_load(path, &dict, diag);
        if (rc) goto done;
        *out = ulk_dict_take_carrier(dict);
        goto done;
    } else {
        for (int i = 0; i < root->n; i++)
            if (strcmp(root->keys[i]->text, "carrier")) {
                ulk_loc kl = ulk_node_loc(doc, root->keys[i]);
                ulk_diag_add(diag, ULK_SEV_ERROR, &kl,
                             "unknown top-level key '%s' in a standalone carrier file (only 'carrier'; a whole "
                             "dictionary has 'link' and 'commands')", root->keys[i]->text);
                rc = ULK_EPARSE;
            }
        if (rc) goto done;
        ulk_node *dn = carrier->kind == ULK_NODE_MAP ? ulk_node_get(carrier, "dictionary") : NULL;
        if (dn) {
            if (dn->kind != ULK_NODE_SCALAR || ulk_scalar_resolve(dn) != ULK_SC_STRING || !dn->len) {
                ulk_loc dl = ulk_node_loc(doc, dn);
                rc = ulk_diag_add(diag, ULK_SEV_ERROR, &dl, "dictionary must be a file name, not %s",
                                  ulk_node_type_name(dn));
                goto done;
            }
            char *dp = relative_to(path, dn->text);
            if (!dp) { rc = ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path); goto done; }
            rc = ulk_dict_load(dp, &dict, diag);
            if (rc) {
                ulk_loc dl = ulk_node_loc(doc, dn);
                ulk_diag_add(diag, ULK_SEV_ERROR, &dl, "the dictionary '%s' named here did not load", dp);
                ulk_free(dp);
                if (rc != ULK_EIO && rc != ULK_ENOMEM) rc = ULK_EPARSE;
                goto done;
            }
            ulk_free(dp);
        }
    }
    rc = ulk_carrier_from_tree(doc, carrier, dict ? &dict->link : NULL, !whole, out, diag);
done:
    ulk_dict_destroy(dict);
    ulk_doc_destroy(doc);
    return rc;
}
