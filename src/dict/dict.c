/* src/dict.c - the command dictionary: from the document tree to the model, with every rule
 * of the dictionary tree of docs/spec/dictionary.md checked. The link section and the rules
 * that depend on its profile (addresses, opcodes, argument room, the link's canonical form)
 * are the profile's dictionary operations (ulk/profile.h; src/profiles/<name>/<name>_dict.c), which
 * work through this loader's helpers (dict_build.h).
 *
 * Why one pass that keeps going: an operator fixing a dictionary wants every problem in one
 * run, each pointing at its line. So each section is read into the model as far as it can
 * be, a broken field is reported and left "unknown", and rules that depend on it are
 * skipped rather than reported twice. The loader returns a model only when no error was
 * found.
 *
 * The model's strings live in an arena owned by the dictionary (one free for all), and the
 * document tree is dropped after loading, so a large dictionary costs little once loaded.
 * Lookups by mnemonic and by (system address, opcode) use sorted indexes built here.
 */
#include <ctype.h>
#include <float.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <openssl/evp.h>

#include "carrier_load.h"
#include "doc.h"
#include "exact.h"
#include "dict_build.h"
#include "ulk/dict.h"
#include "ulk/profile.h"
#include "text.h"
#include "util.h"

/* ---------------------------------------------------------------- arena */

typedef struct ablk {
    struct ablk *next;
    size_t used, cap;
    max_align_t data[];
} ablk;

typedef struct {
    ulk_dict pub;            /* first: a ulk_dict * is a dict_impl * */
    ablk *arena;
    int *by_mnemonic;        /* command indexes sorted by mnemonic */
    int *by_opcode;          /* command indexes sorted by (system address, opcode) */
    ulk_carrier *carrier;    /* the `carrier` section, NULL when absent (src/carrier_load.c) */
} dict_impl;

static void *arena_alloc(dict_impl *di, size_t n)
{
    n = (n + sizeof(max_align_t) - 1) / sizeof(max_align_t) * sizeof(max_align_t);
    if (n == 0) n = sizeof(max_align_t);
    ablk *b = di->arena;
    if (!b || b->cap - b->used < n) {
        size_t cap = n > 60000 ? n : 60000;
        b = ulk_malloc(sizeof(ablk) + cap);
        if (!b) return NULL;
        b->next = di->arena;
        b->used = 0;
        b->cap = cap;
        di->arena = b;
    }
    void *p = (char *)b->data + b->used;
    b->used += n;
    memset(p, 0, n);
    return p;
}

static char *arena_strdup(dict_impl *di, const char *s)
{
    if (!s) return NULL;
    size_t n = strlen(s);
    char *p = arena_alloc(di, n + 1);
    if (p) memcpy(p, s, n + 1);
    return p;
}

void ulk_dict_destroy(ulk_dict *d)
{
    if (!d) return;
    dict_impl *di = (dict_impl *)d;
    for (ablk *b = di->arena, *nx; b; b = nx) {
        nx = b->next;
        ulk_free(b);
    }
    ulk_free(di->by_mnemonic);
    ulk_free(di->by_opcode);
    ulk_carrier_destroy(di->carrier);
    ulk_free(di);
}

const ulk_carrier *ulk_dict_carrier(const ulk_dict *d)
{
    return d ? ((const dict_impl *)d)->carrier : NULL;
}

ulk_carrier *ulk_dict_take_carrier(ulk_dict *d)
{
    if (!d) return NULL;
    dict_impl *di = (dict_impl *)d;
    ulk_carrier *c = di->carrier;
    di->carrier = NULL;
    return c;
}

/* A number as messages and the canonical form write it: the library's one formatter
 * (ulk_fmt_double: whole numbers below 2^53 in plain digits, else the shortest round trip),
 * with -0 written as 0. This is also how Python's json module writes the same value (int, or
 * repr of a float), which the canonical-form test relies on. */
static void fmt_num(double v, char *buf, size_t len) { ulk_fmt_double(v == 0.0 ? 0.0 : v, buf, len); }

/* ---------------------------------------------------------------- build context */

typedef struct ulk_dict_build {
    dict_impl *di;
    ulk_dict *d;
    ulk_doc *doc;
    ulk_diag *diag;
    int oom;
    /* The link's profile: the one its `profile:` names, else the first registered one (its
     * rules for systems and commands apply to a dictionary whose link section is broken). */
    const ulk_profile_ops *prof;
    /* What the profile's link_parse found valid, for its checks of systems and commands
     * (ulk_db_state; zero: nothing known, so dependent rules are skipped). */
    max_align_t state[(ULK_DB_STATE_OCTETS + sizeof(max_align_t) - 1) / sizeof(max_align_t)];
} bctx;

static void vfinding(bctx *c, ulk_severity sev, ulk_node *n, const char *fmt, va_list ap)
{
    ulk_loc l = ulk_node_loc(c->doc, n);
    ulk_diag_vadd(c->diag, sev, &l, fmt, ap);
}

static void err(bctx *c, ulk_node *n, const char *fmt, ...) __attribute__((format(printf, 3, 4)));
static void err(bctx *c, ulk_node *n, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vfinding(c, ULK_SEV_ERROR, n, fmt, ap);
    va_end(ap);
}

static void warn(bctx *c, ulk_node *n, const char *fmt, ...) __attribute__((format(printf, 3, 4)));
static void warn(bctx *c, ulk_node *n, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vfinding(c, ULK_SEV_WARNING, n, fmt, ap);
    va_end(ap);
}

/* A model location: file and path copied into the arena, so they outlive the tree. */
static ulk_loc model_loc(bctx *c, ulk_node *n)
{
    ulk_loc l = {c->d->file, n ? n->line : 0, n ? n->col : 0, NULL};
    if (n) {
        l.path = arena_strdup(c->di, ulk_node_path(n));
        if (!l.path) c->oom = 1;
    }
    return l;
}

static char *adup(bctx *c, const char *s)
{
    char *p = arena_strdup(c->di, s);
    if (!p && s) c->oom = 1;
    return p;
}

/* ---------------------------------------------------------------- shape helpers */

static int want_map(bctx *c, ulk_node *n, const char *what)
{
    if (n && n->kind == ULK_NODE_MAP) return 1;
    err(c, n, "%s must be a mapping, not %s", what, ulk_node_type_name(n));
    return 0;
}

static int want_seq(bctx *c, ulk_node *n, const char *what)
{
    if (n && n->kind == ULK_NODE_SEQ) return 1;
    err(c, n, "%s must be a list, not %s", what, ulk_node_type_name(n));
    return 0;
}

static void report_err(void *ctx, ulk_node *n, const char *msg) { err((bctx *)ctx, n, "%s", msg); }

/* Unknown keys (with did-you-mean) and missing required keys of a mapping. */
static void check_keys(bctx *c, ulk_node *map, const char *what, const char *const *allowed,
                       const char *const *required)
{
    ulk_node_check_keys(map, what, allowed, required, report_err, c);
}

static const char *key_name(ulk_node *n)
{
    return n && n->key ? n->key : "value";
}

/* An integer: YAML core int (decimal, 0x, 0o, 0b), or a quoted 0x/0b literal (JSON has no
 * other way to write hex). Returns 1 with *neg and *mag, else reports and returns 0. */
static int get_intx(bctx *c, ulk_node *n, int *neg, uint64_t *mag)
{
    if (!n || n->kind != ULK_NODE_SCALAR) {
        err(c, n, "'%s' must be an integer, not %s", key_name(n), ulk_node_type_name(n));
        return 0;
    }
    ulk_scalar_type t = ulk_scalar_resolve(n);
    int rc;
    if (t == ULK_SC_INT) {
        rc = ulk_parse_int_text(n->text, neg, mag);
    } else if (t == ULK_SC_STRING && n->quoted && strlen(n->text) == n->len) {
        const char *p = n->text + (n->text[0] == '+' || n->text[0] == '-');
        if (!(p[0] == '0' && strchr("xXbB", p[1]) && p[1])) {
            err(c, n, "'%s' must be an integer, not a string ('%.40s')", key_name(n), n->text);
            return 0;
        }
        rc = ulk_parse_int_text(n->text, neg, mag);
        if (rc == ULK_EPARSE) {
            err(c, n, "'%s': '%.40s' is not a hex or binary integer", key_name(n), n->text);
            return 0;
        }
    } else {
        err(c, n, "'%s' must be an integer, not %s%s%.40s%s", key_name(n), ulk_node_type_name(n),
            t == ULK_SC_FLOAT ? " (" : "", t == ULK_SC_FLOAT ? n->text : "", t == ULK_SC_FLOAT ? ")" : "");
        return 0;
    }
    if (rc == ULK_ELIMIT) {
        err(c, n, "'%s': integer %.40s does not fit in 64 bits", key_name(n), n->text);
        return 0;
    }
    if (*neg && *mag == 0) *neg = 0;
    return 1;
}

/* An integer in [lo, hi] (both within int64). Returns 1 with *out, else reports, 0. */
static int get_int(bctx *c, ulk_node *n, int64_t lo, int64_t hi, int64_t *out, const char *what)
{
    int neg;
    uint64_t mag;
    if (!get_intx(c, n, &neg, &mag)) return 0;
    int ok;
    int64_t v = 0;
    if (neg) {
        ok = mag <= (uint64_t)INT64_MAX + 1;
        if (ok) v = mag == (uint64_t)INT64_MAX + 1 ? INT64_MIN : -(int64_t)mag;
    } else {
        ok = mag <= (uint64_t)INT64_MAX;
        v = (int64_t)mag;
    }
    if (!ok || v < lo || v > hi) {
        err(c, n, "%s must be %lld..%lld, not %.40s", what, (long long)lo, (long long)hi, n->text);
        return 0;
    }
    *out = v;
    return 1;
}

/* A finite number (YAML core int or float; quoted hex accepted like get_intx). */
static int get_num(bctx *c, ulk_node *n, double *out)
{
    if (!n || n->kind != ULK_NODE_SCALAR) {
        err(c, n, "'%s' must be a number, not %s", key_name(n), ulk_node_type_name(n));
        return 0;
    }
    ulk_scalar_type t = ulk_scalar_resolve(n);
    if (t == ULK_SC_NAN_INF) {
        err(c, n, "'%s': NaN and infinity are not accepted (%.20s)", key_name(n), n->text);
        return 0;
    }
    int neg;
    uint64_t mag;
    if (t == ULK_SC_INT || (t == ULK_SC_STRING && n->quoted && ulk_parse_int_text(n->text, &neg, &mag) != ULK_EPARSE &&
                            strpbrk(n->text, "xXbB"))) {
        if (!get_intx(c, n, &neg, &mag)) return 0;
        *out = neg ? -(double)mag : (double)mag;
        return 1;
    }
    if (t != ULK_SC_FLOAT) {
        err(c, n, "'%s' must be a number, not %s", key_name(n), ulk_node_type_name(n));
        return 0;
    }
    double v = strtod(n->text, NULL);
    if (!isfinite(v)) {
        err(c, n, "'%s': number %.40s is beyond the range of a double", key_name(n), n->text);
        return 0;
    }
    *out = v;
    return 1;
}

/* An exact rational from the number's text. */
static int get_ratio(bctx *c, ulk_node *n, ulk_ratio *out)
{
    double dummy;
    if (!get_num(c, n, &dummy)) return 0;
    int rc = ulk_ratio_parse(n->text, out);
    if (rc == ULK_ELIMIT) {
        err(c, n, "'%s': %.40s has too many digits to be kept exactly", key_name(n), n->text);
        return 0;
    }
    if (rc) {
        err(c, n, "'%s': %.40s is not a decimal number", key_name(n), n->text);
        return 0;
    }
    return 1;
}

static int get_bool(bctx *c, ulk_node *n, int *out)
{
    if (n && n->kind == ULK_NODE_SCALAR && ulk_scalar_resolve(n) == ULK_SC_BOOL) {
        *out = n->text[0] == 't' || n->text[0] == 'T';
        return 1;
    }
    err(c, n, "'%s' must be true or false, not %s%s%.40s%s", key_name(n), ulk_node_type_name(n),
        n && n->kind == ULK_NODE_SCALAR ? " '" : "", n && n->kind == ULK_NODE_SCALAR ? n->text : "",
        n && n->kind == ULK_NODE_SCALAR ? "'" : "");
    return 0;
}

/* A string (quoted, or plain that YAML 1.2 core reads as a string). */
static int get_str(bctx *c, ulk_node *n, const char **out)
{
    if (n && n->kind == ULK_NODE_SCALAR && ulk_scalar_resolve(n) == ULK_SC_STRING) {
        if (strlen(n->text) != n->len) {
            err(c, n, "'%s' holds a NUL character", key_name(n));
            return 0;
        }
        *out = n->text;
        return 1;
    }
    if (n && n->kind == ULK_NODE_SCALAR && ulk_scalar_resolve(n) != ULK_SC_NULL)
        err(c, n, "'%s' must be a string, not %s (quote it: \"%.40s\")", key_name(n), ulk_node_type_name(n),
            n->text);
    else
        err(c, n, "'%s' must be a string, not %s", key_name(n), ulk_node_type_name(n));
    return 0;
}

/* A name: letters, digits and '_', not starting with a digit (what command lists can write). */
static int get_ident(bctx *c, ulk_node *n, const char *what, const char **out)
{
    if (!get_str(c, n, out)) return 0;
    const char *s = *out;
    int ok = (isalpha((unsigned char)s[0]) || s[0] == '_');
    for (const char *p = s; ok && *p; p++) ok = isalnum((unsigned char)*p) || *p == '_';
    if (!ok) {
        err(c, n, "%s '%.60s' is not a valid name (letters, digits and '_', starting with a letter or '_')",
            what, s);
        return 0;
    }
    return 1;
}

/* One of a fixed set of words; reports with did-you-mean. Returns the index or -1. */
static int get_choice(bctx *c, ulk_node *n, const char *const *names, size_t count, const char *what)
{
    const char *s;
    if (!get_str(c, n, &s)) return -1;
    for (size_t i = 0; i < count; i++)
        if (!strcmp(s, names[i])) return (int)i;
    char list[200] = "";
    size_t used = 0;
    for (size_t i = 0; i < count; i++)
        used += (size_t)snprintf(list + used, sizeof list - used, "%s%s", i ? ", " : "", names[i]);
    const char *sug = ulk_suggest(s, names, count);
    if (sug)
        err(c, n, "unknown %s '%.40s' (did you mean '%s'? expected %s)", what, s, sug, list);
    else
        err(c, n, "unknown %s '%.40s' (expected %s)", what, s, list);
    return -1;
}

/* ---------------------------------------------------------------- link */

static int positive_ratio(bctx *c, ulk_node *n, ulk_ratio *out, const char *what)
{
    if (!n || !get_ratio(c, n, out)) return 0;
    if (out->num <= 0) {
        err(c, n, "%s must be > 0, not %.40s", what, n->text);
        return 0;
    }
    return 1;
}

/* Amplitude in (0, 1], kept exact for A + A_p <= 1. */
static int get_amplitude(bctx *c, ulk_node *n, double *out, ulk_ratio *exact, const char *what)
{
    if (!get_num(c, n, out) || !get_ratio(c, n, exact)) return 0;
    if (exact->num <= 0 || exact->num > exact->den) {
        err(c, n, "%s must be in (0, 1], not %.40s", what, n->text);
        return 0;
    }
    return 1;
}

/* ---------------------------------------------------------------- link */

/* The subcarrier mapping, shared by the profiles' link sections (ulk_db_subcarrier). */
static ulk_node *build_subcarrier(bctx *c, ulk_node *sc, int *fsc_ok, int *amp_ok, ulk_ratio *amp_exact)
{
    ulk_link *L = &c->d->link;
    *fsc_ok = *amp_ok = 0;
    *amp_exact = ulk_ratio_make(1, 1);
    if (!sc || !want_map(c, sc, "link.subcarrier")) return NULL;
    static const char *const sk[] = {"frequency", "waveform", "amplitude", NULL};
    static const char *const sr[] = {"frequency", NULL};
    check_keys(c, sc, "link.subcarrier", sk, sr);
    ulk_node *fsc_node = ulk_node_get(sc, "frequency");
    *fsc_ok = positive_ratio(c, fsc_node, &L->fsc, "subcarrier frequency");
    ulk_node *wf = ulk_node_get(sc, "waveform");
    if (wf) {
        static const char *const w[] = {"sine", "square"};
        int k = get_choice(c, wf, w, 2, "waveform");
        if (k >= 0) L->waveform = (ulk_waveform)k;
    }
    ulk_node *am = ulk_node_get(sc, "amplitude");
    *amp_ok = am ? get_amplitude(c, am, &L->amplitude, amp_exact, "subcarrier amplitude") : 1;
    return fsc_node;
}

/* The link section: its `profile:` chooses the table whose link_parse reads the rest. Without
 * a `profile:` the first registered profile reads it, and its key check reports the key
 * missing. */
static void build_link(bctx *c, ulk_node *ln)
{
    ulk_link *L = &c->d->link;
    L->amplitude = 1.0;
    if (!want_map(c, ln, "link")) return;
    ulk_node *pn = ulk_node_get(ln, "profile");
    const ulk_profile_ops *p = ulk_profile_ops_at(0);
    if (pn) {
        const char *names[8];
        size_t n = 0;
        for (const ulk_profile_ops *q; n < sizeof names / sizeof names[0] && (q = ulk_profile_ops_at(n));) names[n++] = q->name;
        int k = get_choice(c, pn, names, n, "link profile");
        if (k < 0) return;
        p = ulk_profile_ops_at((size_t)k);
    }
    c->prof = p;
    L->profile = p->id;
    p->link_parse(c, ln);
}

/* ---------------------------------------------------------------- systems */

typedef struct {
    const char *k;
    uint64_t a, b;
    int i;
} sortref;

static int sortref_cmp_str(const void *x, const void *y)
{
    const sortref *p = x, *q = y;
    int c = strcmp(p->k, q->k);
    return c ? c : (p->i > q->i) - (p->i < q->i);
}

static int sortref_cmp_num(const void *x, const void *y)
{
    const sortref *p = x, *q = y;
    if (p->a != q->a) return p->a < q->a ? -1 : 1;
    if (p->b != q->b) return p->b < q->b ? -1 : 1;
    return (p->i > q->i) - (p->i < q->i);
}

static void build_systems(bctx *c, ulk_node *sn)
{
    ulk_dict *d = c->d;
    if (!want_seq(c, sn, "systems")) return;
    if (sn->n == 0) {
        err(c, sn, "systems is empty: at least one system is needed");
        return;
    }
    d->systems = arena_alloc(c->di, (size_t)sn->n * sizeof *d->systems);
    ulk_node **names = ulk_calloc((size_t)sn->n, sizeof *names);
    if (!d->systems || !names) { c->oom = 1; ulk_free(names); return; }
    d->n_systems = sn->n;
    static const char *const keys[] = {"name", "address", NULL};
    for (int i = 0; i < sn->n; i++) {
        ulk_node *s = sn->items[i];
        ulk_system *y = &d->systems[i];
        y->loc = model_loc(c, s);
        y->address = UINT32_MAX;
        if (!want_map(c, s, "a system")) continue;
        check_keys(c, s, "a system", keys, keys);
        const char *name;
        ulk_node *nn = ulk_node_get(s, "name");
        if (nn && get_ident(c, nn, "system name", &name)) {
            y->name = adup(c, name);
            names[i] = nn;
        }
        ulk_node *an = ulk_node_get(s, "address");
        uint32_t a;
        if (an && c->prof->system_address(c, an, &a)) y->address = a;
    }
    sortref *v = ulk_malloc((size_t)sn->n * sizeof *v);
    if (!v) { c->oom = 1; ulk_free(names); return; }
    /* Duplicate names. */
    int m = 0;
    for (int i = 0; i < sn->n; i++)
        if (d->systems[i].name) v[m++] = (sortref){d->systems[i].name, 0, 0, i};
    qsort(v, (size_t)m, sizeof *v, sortref_cmp_str);
    for (int i = 1; i < m; i++)
        if (!strcmp(v[i].k, v[i - 1].k)) {
            int j = i - 1;
            while (j > 0 && !strcmp(v[j - 1].k, v[i].k)) j--;
            err(c, names[v[i].i], "duplicate system name '%s' (first at line %d)", v[i].k, d->systems[v[j].i].loc.line);
        }
    /* Duplicate addresses, and addresses one bit apart (a single bit error would turn one
     * system's word into the other's). Addresses are below 2^16: a table is cheapest. */
    int *first = ulk_malloc(sizeof(int) * 65536);
    if (!first) { c->oom = 1; ulk_free(v); ulk_free(names); return; }
    for (int i = 0; i < 65536; i++) first[i] = -1;
    for (int i = 0; i < sn->n; i++) {
        uint32_t a = d->systems[i].address;
        if (a > 0xFFFF) continue;
        ulk_node *an = ulk_node_get(sn->items[i], "address");
        if (first[a] >= 0) {
            err(c, an, "duplicate system %s %u: '%s' has it too (line %d)", c->prof->address_noun, a,
                d->systems[first[a]].name ? d->systems[first[a]].name : "?", d->systems[first[a]].loc.line);
            continue;
        }
        /* Where a code covers the address (a CCSDS packet under the FECF and BCH code) a single
         * error never turns one system's unit into another's, so the warning does not apply. */
        for (int b = 0; b < 16 && c->prof->address_unprotected; b++) {
            uint32_t o = a ^ (1u << b);
            if (first[o] >= 0)
                warn(c, an, "system addresses of '%s' (0x%X) and '%s' (0x%X) differ in one bit (Hamming distance 1): one bit error turns a word for one into a word for the other",
                     d->systems[first[o]].name ? d->systems[first[o]].name : "?", o,
                     d->systems[i].name ? d->systems[i].name : "?", a);
        }
        first[a] = i;
    }
    ulk_free(first);
    ulk_free(v);
    ulk_free(names);
}

int ulk_dict_find_system(const ulk_dict *d, const char *name)
{
    if (!d || !name) return -1;
    for (int i = 0; i < d->n_systems; i++)
        if (d->systems[i].name && !strcmp(d->systems[i].name, name)) return i;
    return -1;
}

/* ---------------------------------------------------------------- arguments */

typedef __int128 i128;

static void raw_bounds(const ulk_arg *a, i128 *lo, i128 *hi)
{
    if (a->type == ULK_ARG_SIGNED) {
        *lo = -((i128)1 << (a->bits - 1));
        *hi = ((i128)1 << (a->bits - 1)) - 1;
    } else {
        *lo = 0;
        *hi = ((i128)1 << a->bits) - 1;
    }
}

static void i128_dec(i128 v, char *buf, size_t len)
{
    mpz_t z;
    mpz_init(z);
    ulk_z_set_i128(z, v);
    if (mpz_sizeinbase(z, 10) + 2 <= len) mpz_get_str(buf, 10, z);
    else snprintf(buf, len, "?");
    mpz_clear(z);
}

/* Sign of the integer polynomial d (n coefficients) at r. */
static int zpoly_sign(mpz_t *d, int n, i128 r, mpz_t acc, mpz_t zr)
{
    ulk_z_set_i128(zr, r);
    mpz_set_ui(acc, 0);
    for (int i = n - 1; i >= 0; i--) {
        mpz_mul(acc, acc, zr);
        mpz_add(acc, acc, d[i]);
    }
    return mpz_sgn(acc);
}

/* The first integer r in [lo, hi] where the integer polynomial d (n <= 16 coefficients) does
 * not have the sign s, or hi + 1 when there is none. Exact: on [lo, hi] around the midpoint m
 * with half-width h, d(m + t) = sum e_k t^k (Taylor shift in integers), and
 * |e_0| > sum_{k>=1} |e_k| h^k proves d keeps the sign of e_0 there; otherwise the interval
 * is halved, and a short one (32 integers) is tried point by point. Near each real root the
 * halving goes down to a short interval, elsewhere it stops early: O(degree * 64) steps. */
static i128 zpoly_first_off(mpz_t *d, int n, int s, i128 lo, i128 hi)
{
    mpz_t acc, zr;
    mpz_init(acc);
    mpz_init(zr);
    i128 res = hi + 1;
    if (hi - lo < 32) {
        for (i128 r = lo; r <= hi; r++)
            if (zpoly_sign(d, n, r, acc, zr) != s) { res = r; break; }
        mpz_clear(acc);
        mpz_clear(zr);
        return res;
    }
    i128 m = lo + (hi - lo) / 2, h = hi - m > m - lo ? hi - m : m - lo;
    mpz_t e[16], zh, hk, bound, t;
    for (int i = 0; i < n; i++) mpz_init_set(e[i], d[i]);
    mpz_inits(zh, hk, bound, t, NULL);
    ulk_z_set_i128(zr, m);
    for (int i = 0; i + 1 < n; i++)
        for (int j = n - 2; j >= i; j--) mpz_addmul(e[j], zr, e[j + 1]);
    ulk_z_set_i128(zh, h);
    mpz_set_ui(hk, 1);
    mpz_set_ui(bound, 0);
    for (int k = 1; k < n; k++) {
        mpz_mul(hk, hk, zh);
        mpz_abs(t, e[k]);
        mpz_addmul(bound, t, hk);
    }
    mpz_abs(t, e[0]);
    int proven = mpz_cmp(t, bound) > 0, s0 = mpz_sgn(e[0]);
    for (int i = 0; i < n; i++) mpz_clear(e[i]);
    mpz_clears(zh, hk, bound, t, acc, zr, NULL);
    if (proven) return s0 == s ? hi + 1 : lo;
    res = zpoly_first_off(d, n, s, lo, m);
    if (res <= m) return res;
    return zpoly_first_off(d, n, s, m + 1, hi);
}

/* Checks, exactly, that the calibration is strictly monotonic over the raw range, so that
 * every engineering value has one nearest raw: a linear one needs a scale that is not 0; for a
 * polynomial f the step D(r) = f(r+1) - f(r), itself an integer polynomial over the common
 * denominator, must keep one sign and never be 0 for r in [lo, hi - 1] (zpoly_first_off).
 * The calibrated values at the raw ends must also be finite doubles (they are printed).
 * Returns 1 when it is. */
static int check_monotonic(bctx *c, ulk_node *cn, const ulk_arg *a)
{
    i128 lo, hi;
    raw_bounds(a, &lo, &hi);
    ulk_calq k;
    int ok = 1;
    if (ulk_calq_init(&k, a) != 0) {
        ulk_calq_clear(&k);
        return 0; /* reported where the coefficient was read */
    }
    char blo[48], bhi[48], bx[48];
    i128_dec(lo, blo, sizeof blo);
    i128_dec(hi, bhi, sizeof bhi);
    if (a->cal == ULK_CAL_LINEAR) {
        if (mpz_sgn(k.c[1]) == 0) {
            err(c, cn, "calibration scale is 0: every raw value gives the same engineering value");
            ok = 0;
        }
    } else {
        /* D(r) = sum_k c_k ((r+1)^k - r^k) = sum_j r^j sum_{k>j} C(k, j) c_k */
        int n = k.n - 1;
        mpz_t dz[16], bin;
        mpz_init(bin);
        for (int j = 0; j < n; j++) {
            mpz_init_set_ui(dz[j], 0);
            for (int kk = j + 1; kk < k.n; kk++) {
                mpz_bin_uiui(bin, (unsigned long)kk, (unsigned long)j);
                mpz_addmul(dz[j], bin, k.c[kk]);
            }
        }
        mpz_t acc, zr;
        mpz_init(acc);
        mpz_init(zr);
        int s0 = zpoly_sign(dz, n, lo, acc, zr);
        i128 r = s0 == 0 ? lo : zpoly_first_off(dz, n, s0, lo, hi - 1);
        if (r <= hi - 1) {
            int sr = zpoly_sign(dz, n, r, acc, zr);
            i128_dec(r + 1, bx, sizeof bx);
            if (sr == 0)
                err(c, cn, "calibration is not strictly monotonic over the raw range [%s, %s]: it is flat near raw %s",
                    blo, bhi, bx);
            else
                err(c, cn, "calibration is not monotonic over the raw range [%s, %s]: it turns near raw %s",
                    blo, bhi, bx);
            ok = 0;
        }
        mpz_clear(acc);
        mpz_clear(zr);
        mpz_clear(bin);
        for (int j = 0; j < n; j++) mpz_clear(dz[j]);
    }
    if (ok) {
        mpq_t f;
        mpq_init(f);
        for (int end = 0; end < 2 && ok; end++) {
            ulk_calq_value(&k, f, end ? hi : lo);
            if (!isfinite(ulk_q_to_double(f))) {
                err(c, cn, "calibration overflows over the raw range: f(%s) is beyond the largest double", end ? bhi : blo);
                ok = 0;
            }
        }
        mpq_clear(f);
    }
    ulk_calq_clear(&k);
    return ok;
}

/* The text of a number node, checked to be kept exactly (src/exact.h); NULL after an error. */
static char *exact_text(bctx *c, ulk_node *n)
{
    mpq_t q;
    mpq_init(q);
    int rc = ulk_q_set_text(q, n->text, ULK_EXACT_MAX_EXP10, 0, NULL);
    mpq_clear(q);
    if (rc == ULK_ELIMIT) {
        err(c, n, "'%s': %.40s reaches beyond 10^+-%d and cannot be kept exactly", key_name(n), n->text,
            ULK_EXACT_MAX_EXP10);
        return NULL;
    }
    if (rc) {
        err(c, n, "'%s': %.40s is not a number that can be kept exactly", key_name(n), n->text);
        return NULL;
    }
    return adup(c, n->text);
}

static void build_calibration(bctx *c, ulk_node *cn, ulk_arg *a)
{
    if (!want_map(c, cn, "calibration")) return;
    ulk_node *sc = ulk_node_get(cn, "scale"), *of = ulk_node_get(cn, "offset"), *po = ulk_node_get(cn, "polynomial");
    if (po && (sc || of)) {
        err(c, cn, "calibration is either {scale, offset} or {polynomial}, not both");
        return;
    }
    if (po) {
        static const char *const k[] = {"polynomial", NULL};
        check_keys(c, cn, "calibration", k, k);
        if (!want_seq(c, po, "calibration polynomial")) return;
        if (po->n < 2 || po->n > 16) {
            err(c, po, "calibration polynomial needs 2 to 16 coefficients [c0, c1, ...], not %d", po->n);
            return;
        }
        double *p = arena_alloc(c->di, (size_t)po->n * sizeof *p);
        char **pt = arena_alloc(c->di, (size_t)po->n * sizeof *pt);
        if (!p || !pt) { c->oom = 1; return; }
        for (int i = 0; i < po->n; i++)
            if (!get_num(c, po->items[i], &p[i]) || !(pt[i] = exact_text(c, po->items[i]))) return;
        a->poly = p;
        a->poly_text = pt;
        a->n_poly = po->n;
        a->cal = ULK_CAL_POLY;
        return;
    }
    static const char *const k[] = {"scale", "offset", NULL};
    static const char *const r[] = {"scale", NULL};
    check_keys(c, cn, "calibration", k, r);
    if (!sc) return;
    a->cal_offset = 0.0;
    a->cal_offset_text = NULL;
    if (!get_num(c, sc, &a->cal_scale) || !(a->cal_scale_text = exact_text(c, sc))) return;
    if (of && (!get_num(c, of, &a->cal_offset) || !(a->cal_offset_text = exact_text(c, of)))) return;
    a->cal = ULK_CAL_LINEAR;
}

/* Range endpoints against what the raw width and calibration can represent, exactly: an
 * integer range inside the raw range, a calibrated one inside [f(raw_lo), f(raw_hi)]
 * (ordered), a float32 one strictly inside +-(2^128 - 2^103), where rounding to binary32
 * starts to overflow (so FLT_MAX written as 3.4028235e38 is a valid end). */
static void check_range_representable(bctx *c, ulk_node *rn, const ulk_arg *a)
{
    mpq_t flo, fhi, rlo, rhi;
    mpq_inits(flo, fhi, rlo, rhi, NULL);
    const char *how;
    int bad = 0;
    if (ulk_arg_range_q(a, rlo, rhi) != 0) goto out; /* reported where the texts were read */
    if (a->type == ULK_ARG_FLOAT32) {
        mpz_ui_pow_ui(mpq_numref(fhi), 2, 128);
        mpz_t t;
        mpz_init(t);
        mpz_ui_pow_ui(t, 2, 103);
        mpz_sub(mpq_numref(fhi), mpq_numref(fhi), t);
        mpz_clear(t);
        mpq_neg(flo, fhi);
        how = "float32";
        bad = mpq_cmp(rlo, flo) <= 0 || mpq_cmp(rhi, fhi) >= 0;
    } else {
        i128 lo, hi;
        raw_bounds(a, &lo, &hi);
        if (a->cal != ULK_CAL_NONE) {
            ulk_calq k;
            if (ulk_calq_init(&k, a) != 0) { ulk_calq_clear(&k); goto out; }
            ulk_calq_value(&k, flo, lo);
            ulk_calq_value(&k, fhi, hi);
            ulk_calq_clear(&k);
            if (mpq_cmp(flo, fhi) > 0) mpq_swap(flo, fhi);
            how = "calibrated raw range";
        } else {
            ulk_z_set_i128(mpq_numref(flo), lo);
            ulk_z_set_i128(mpq_numref(fhi), hi);
            how = a->type == ULK_ARG_SIGNED ? "signed raw" : "unsigned raw";
        }
        bad = mpq_cmp(rlo, flo) < 0 || mpq_cmp(rhi, fhi) > 0;
    }
    if (bad) {
        char b1[48], b2[48];
        if (a->type == ULK_ARG_FLOAT32) {
            err(c, rn, "range [%s, %s] is beyond what float32 can represent", rn->items[0]->text, rn->items[1]->text);
        } else {
            if (a->cal != ULK_CAL_NONE) {
                fmt_num(ulk_q_to_double(flo), b1, sizeof b1);
                fmt_num(ulk_q_to_double(fhi), b2, sizeof b2);
            } else {
                mpz_get_str(b1, 10, mpq_numref(flo)); /* at most 20 digits and a sign */
                mpz_get_str(b2, 10, mpq_numref(fhi));
            }
            err(c, rn, "range [%s, %s] cannot be represented: %d-bit %s gives [%s, %s]", rn->items[0]->text,
                rn->items[1]->text, a->bits, how, b1, b2);
        }
    }
out:
    mpq_clears(flo, fhi, rlo, rhi, NULL);
}

static void build_enum_values(bctx *c, ulk_node *vn, ulk_arg *a, int bits_ok)
{
    if (!want_map(c, vn, "values")) return;
    if (vn->n == 0) { err(c, vn, "an enum needs at least one label in values"); return; }
    a->values = arena_alloc(c->di, (size_t)vn->n * sizeof *a->values);
    sortref *v = ulk_malloc((size_t)vn->n * sizeof *v);
    if (!a->values || !v) { c->oom = 1; ulk_free(v); return; }
    int m = 0, bad = 0;
    for (int i = 0; i < vn->n; i++) {
        ulk_node *kn = vn->keys[i], *cn = vn->items[i];
        const char *lab = kn->text;
        int ok = isalpha((unsigned char)lab[0]) || lab[0] == '_';
        for (const char *p = lab; ok && *p; p++) ok = isalnum((unsigned char)*p) || *p == '_';
        if (!ok) {
            err(c, kn, "enum label '%.60s' is not a valid name (letters, digits and '_', starting with a letter or '_')", lab);
            bad = 1;
        }
        int neg;
        uint64_t mag;
        if (!get_intx(c, cn, &neg, &mag)) { bad = 1; continue; }
        if (neg) { err(c, cn, "enum code of '%s' must not be negative (%.40s)", lab, cn->text); bad = 1; continue; }
        if (bits_ok && a->bits < 64 && mag >= ((uint64_t)1 << a->bits)) {
            err(c, cn, "enum code %.40s of '%s' does not fit in %d bits (must be below %llu)", cn->text, lab, a->bits,
                (unsigned long long)1 << a->bits);
            bad = 1;
        }
        ulk_enum_value *e = &a->values[a->n_values++];
        e->label = adup(c, lab);
        e->code = (int64_t)mag;
        e->loc = model_loc(c, kn);
        v[m++] = (sortref){NULL, mag, 0, i};
    }
    qsort(v, (size_t)m, sizeof *v, sortref_cmp_num);
    for (int i = 1; i < m; i++)
        if (v[i].a == v[i - 1].a) {
            int j = i - 1;
            while (j > 0 && v[j - 1].a == v[i].a) j--;
            err(c, vn->items[v[i].i], "enum code %llu of '%s' is already used by '%s'", (unsigned long long)v[i].a,
                vn->keys[v[i].i]->text, vn->keys[v[j].i]->text);
            bad = 1;
        }
    ulk_free(v);
    (void)bad;
}

/* Builds one argument; returns 1 when it is fully valid (so that its default can be checked). */
static int build_arg(bctx *c, ulk_node *an, ulk_arg *a, ulk_node *cmd_args, int idx)
{
    static const char *const keys[] = {"name", "type", "bits", "range", "units", "calibration", "values",
                                       "default", "description", "tolerance", NULL};
    static const char *const req[] = {"name", "type", NULL};
    a->loc = model_loc(c, an);
    if (!want_map(c, an, "an argument")) return 0;
    size_t before = ulk_diag_errors(c->diag);
    check_keys(c, an, "an argument", keys, req);
    const char *s;
    ulk_node *nn = ulk_node_get(an, "name");
    if (nn && get_ident(c, nn, "argument name", &s)) {
        a->name = adup(c, s);
        for (int j = 0; j < idx; j++) {
            ulk_node *o = ulk_node_get(cmd_args->items[j], "name");
            if (o && o->kind == ULK_NODE_SCALAR && !strcmp(o->text, s)) {
                err(c, nn, "duplicate argument name '%s' (first at line %d)", s, o->line);
                break;
            }
        }
    }
    ulk_node *tn = ulk_node_get(an, "type");
    int type = -1;
    if (tn) {
        static const char *const types[] = {"unsigned", "signed", "boolean", "enum", "float32"};
        type = get_choice(c, tn, types, 5, "argument type");
    }
    if (type < 0) return 0;
    a->type = (ulk_arg_type)type;
    const char *tname = ulk_arg_type_name(a->type);

    ulk_node *bn = ulk_node_get(an, "bits");
    int bits_ok = 0;
    int64_t v;
    if (bn) {
        if (get_int(c, bn, 1, 64, &v, "argument width (bits)")) {
            if (a->type == ULK_ARG_BOOLEAN && v != 1)
                err(c, bn, "a boolean argument has 1 bit, not %lld", (long long)v);
            else if (a->type == ULK_ARG_FLOAT32 && v != 32)
                err(c, bn, "a float32 argument has 32 bits, not %lld", (long long)v);
            else {
                a->bits = (int)v;
                bits_ok = 1;
            }
        }
    } else if (a->type == ULK_ARG_BOOLEAN) {
        a->bits = 1;
        bits_ok = 1;
    } else if (a->type == ULK_ARG_FLOAT32) {
        a->bits = 32;
        bits_ok = 1;
    } else {
        err(c, an, "%s %s argument needs 'bits' (its raw width, 1..64)", a->type == ULK_ARG_ENUM || a->type == ULK_ARG_UNSIGNED ? "an" : "a", tname);
    }

    ulk_node *cn = ulk_node_get(an, "calibration");
    if (cn) {
        if (a->type == ULK_ARG_UNSIGNED || a->type == ULK_ARG_SIGNED) build_calibration(c, cn, a);
        else err(c, cn, "calibration does not apply to %s arguments", tname);
    }
    ulk_node *un = ulk_node_get(an, "units");
    if (un && get_str(c, un, &s)) {
        if (a->type == ULK_ARG_BOOLEAN || a->type == ULK_ARG_ENUM)
            err(c, un, "units do not apply to %s arguments", tname);
        else if (!*s || strpbrk(s, " \t#="))
            err(c, un, "units '%.40s' must be a non-empty word without spaces, '#' or '='", s);
        else
            a->units = adup(c, s);
    }
    ulk_node *vn = ulk_node_get(an, "values");
    if (a->type == ULK_ARG_ENUM) {
        if (vn) build_enum_values(c, vn, a, bits_ok);
        else err(c, an, "an enum argument needs 'values' (its labels and codes)");
    } else if (vn) {
        err(c, vn, "values (enum labels) do not apply to %s arguments", tname);
    }
    if (bits_ok && a->cal != ULK_CAL_NONE) {
        if (!check_monotonic(c, cn, a)) a->cal = ULK_CAL_NONE, a->n_poly = 0, a->poly = NULL;
    }
    ulk_node *rn = ulk_node_get(an, "range");
    if (rn) {
        if (a->type == ULK_ARG_BOOLEAN || a->type == ULK_ARG_ENUM) {
            err(c, rn, "range does not apply to %s arguments", tname);
        } else if (rn->kind != ULK_NODE_SEQ || rn->n != 2) {
            err(c, rn, "range must be a list [MIN, MAX] of two numbers, not %s%s", ulk_node_type_name(rn),
                rn->kind == ULK_NODE_SEQ ? " of another length" : "");
        } else if (get_num(c, rn->items[0], &a->range_min) && get_num(c, rn->items[1], &a->range_max) &&
                   (a->range_min_text = exact_text(c, rn->items[0])) &&
                   (a->range_max_text = exact_text(c, rn->items[1]))) {
            mpq_t lo, hi;
            mpq_init(lo);
            mpq_init(hi);
            int above = ulk_arg_range_q(a, lo, hi) == 0 && mpq_cmp(lo, hi) > 0;
            mpq_clear(lo);
            mpq_clear(hi);
            if (above) {
                err(c, rn, "range [%s, %s] has MIN above MAX", rn->items[0]->text, rn->items[1]->text);
            } else {
                a->has_range = 1;
                if (bits_ok) check_range_representable(c, rn, a);
            }
        }
    }
    /* tolerance: how far the encoded value (calibration step, float32 rounding) may lie from
     * the one the command list asks for before compile refuses it */
    ulk_node *tol = ulk_node_get(an, "tolerance");
    if (tol) {
        if (a->type == ULK_ARG_BOOLEAN || a->type == ULK_ARG_ENUM)
            err(c, tol, "tolerance does not apply to %s arguments", tname);
        else if (get_num(c, tol, &a->tolerance)) {
            if (!(a->tolerance >= 0)) err(c, tol, "tolerance must be >= 0 (engineering units), not %s", tol->text);
            else a->has_tolerance = 1;
        }
    }
    ulk_node *dn = ulk_node_get(an, "default");
    if (dn) {
        if (dn->kind != ULK_NODE_SCALAR || ulk_scalar_resolve(dn) == ULK_SC_NULL) {
            err(c, dn, "default must be a value (number, label or boolean), not %s", ulk_node_type_name(dn));
        } else if (ulk_scalar_resolve(dn) == ULK_SC_NAN_INF) {
            err(c, dn, "default: NaN and infinity are not accepted (%.20s)", dn->text);
        } else {
            a->default_text = adup(c, dn->text);
            a->default_loc = model_loc(c, dn);
        }
    }
    return bits_ok && ulk_diag_errors(c->diag) == before;
}

/* ---------------------------------------------------------------- commands */

static void build_commands(bctx *c, ulk_node *cn)
{
    ulk_dict *d = c->d;
    if (!want_seq(c, cn, "commands")) return;
    if (cn->n == 0) {
        err(c, cn, "commands is empty: at least one command is needed");
        return;
    }
    d->commands = arena_alloc(c->di, (size_t)cn->n * sizeof *d->commands);
    if (!d->commands) { c->oom = 1; return; }
    d->n_commands = cn->n;
    const char **sysnames = ulk_calloc((size_t)(d->n_systems + 1), sizeof *sysnames);
    if (!sysnames) { c->oom = 1; return; }
    for (int i = 0; i < d->n_systems; i++) sysnames[i] = d->systems[i].name;
    /* System names sorted, for the lookup of each command's system. */
    sortref *sys = ulk_malloc((size_t)(d->n_systems + 1) * sizeof *sys);
    if (!sys) { c->oom = 1; ulk_free(sysnames); return; }
    int nsys = 0;
    for (int i = 0; i < d->n_systems; i++)
        if (d->systems[i].name) sys[nsys++] = (sortref){d->systems[i].name, 0, 0, i};
    qsort(sys, (size_t)nsys, sizeof *sys, sortref_cmp_str);

    static const char *const keys[] = {"mnemonic", "system", "opcode", "critical", "description", "arguments", NULL};
    static const char *const req[] = {"mnemonic", "system", "opcode", NULL};
    for (int i = 0; i < cn->n; i++) {
        ulk_node *m = cn->items[i];
        ulk_command *k = &d->commands[i];
        k->loc = model_loc(c, m);
        k->system_index = -1;
        k->opcode = UINT32_MAX;
        if (!want_map(c, m, "a command")) continue;
        check_keys(c, m, "a command", keys, req);
        const char *s;
        ulk_node *n;
        if ((n = ulk_node_get(m, "mnemonic")) && get_ident(c, n, "mnemonic", &s)) {
            if (!strcmp(s, "wait") || !strcmp(s, "confirm"))
                err(c, n, "mnemonic '%s' is a reserved word of command lists", s);
            k->mnemonic = adup(c, s);
        }
        if ((n = ulk_node_get(m, "system")) && get_str(c, n, &s)) {
            k->system = adup(c, s);
            sortref key = {s, 0, 0, -1};
            sortref *hit = NULL;
            /* bsearch for the first entry with this name */
            int lo = 0, hi = nsys;
            while (lo < hi) {
                int mid = (lo + hi) / 2;
                if (sortref_cmp_str(&sys[mid], &key) < 0) lo = mid + 1;
                else hi = mid;
            }
            if (lo < nsys && !strcmp(sys[lo].k, s)) hit = &sys[lo];
            if (hit) {
                k->system_index = hit->i;
            } else {
                const char *sug = ulk_suggest(s, sysnames, (size_t)d->n_systems);
                if (sug) err(c, n, "command names unknown system '%.60s' (did you mean '%s'?)", s, sug);
                else err(c, n, "command names unknown system '%.60s' (not in systems)", s);
            }
        }
        int64_t v;
        if ((n = ulk_node_get(m, "opcode")) && get_int(c, n, 0, INT64_MAX, &v, "opcode")) {
            /* the profile's room first (reported there), then the 16 bits every profile has */
            if (c->prof->opcode_fits(c, n, v)) {
                if (v > 0xFFFF) err(c, n, "opcode %lld is wider than 16 bits", (long long)v);
                else k->opcode = (uint32_t)v;
            }
        }
        if ((n = ulk_node_get(m, "critical"))) get_bool(c, n, &k->critical);
        if ((n = ulk_node_get(m, "description")) && get_str(c, n, &s)) k->description = adup(c, s);
        ulk_node *args = ulk_node_get(m, "arguments");
        if (args && want_seq(c, args, "arguments") && args->n > 0) {
            k->args = arena_alloc(c->di, (size_t)args->n * sizeof *k->args);
            if (!k->args) { c->oom = 1; continue; }
            k->n_args = args->n;
            int all_bits = 1;
            for (int j = 0; j < args->n; j++) {
                ulk_arg *a = &k->args[j];
                int ok = build_arg(c, args->items[j], a, args, j);
                if (a->bits <= 0) all_bits = 0;
                k->packed_bits += a->bits;
                /* The default must be a value the argument accepts: the command-list
                 * conversion itself decides (range, calibration step, labels). */
                if (ok && a->default_text) {
                    ulk_argval av;
                    char why[300];
                    if (ulk_arg_from_text(a, a->default_text, 1.0, &av, why, sizeof why) == 0) {
                        a->has_default = 1;
                        a->default_raw = av.raw;
                        a->default_eng = av.eng;
                    } else {
                        err(c, ulk_node_get(args->items[j], "default"), "default is not a valid value: %s", why);
                    }
                }
            }
            if (all_bits) c->prof->command_check(c, k, args);
        }
    }
    ulk_free(sys);
    ulk_free(sysnames);

    /* Duplicate mnemonics and (system, opcode) pairs, sorted: large dictionaries stay fast. */
    sortref *v = ulk_malloc((size_t)cn->n * sizeof *v);
    if (!v) { c->oom = 1; return; }
    int m = 0;
    for (int i = 0; i < cn->n; i++)
        if (d->commands[i].mnemonic) v[m++] = (sortref){d->commands[i].mnemonic, 0, 0, i};
    qsort(v, (size_t)m, sizeof *v, sortref_cmp_str);
    for (int i = 1; i < m; i++)
        if (!strcmp(v[i].k, v[i - 1].k)) {
            int j = i - 1;
            while (j > 0 && !strcmp(v[j - 1].k, v[i].k)) j--;
            err(c, ulk_node_get(cn->items[v[i].i], "mnemonic"), "duplicate mnemonic '%s' (first at line %d)", v[i].k,
                d->commands[v[j].i].loc.line);
        }
    m = 0;
    for (int i = 0; i < cn->n; i++)
        if (d->commands[i].system_index >= 0 && d->commands[i].opcode != UINT32_MAX)
            v[m++] = (sortref){NULL, (uint64_t)d->commands[i].system_index, d->commands[i].opcode, i};
    qsort(v, (size_t)m, sizeof *v, sortref_cmp_num);
    for (int i = 1; i < m; i++)
        if (v[i].a == v[i - 1].a && v[i].b == v[i - 1].b) {
            int j = i - 1;
            while (j > 0 && v[j - 1].a == v[i].a && v[j - 1].b == v[i].b) j--;
            const ulk_command *f = &d->commands[v[j].i];
            err(c, ulk_node_get(cn->items[v[i].i], "opcode"),
                "duplicate opcode %llu in system '%s': '%s' (line %d) has it too", (unsigned long long)v[i].b,
                d->systems[v[i].a].name ? d->systems[v[i].a].name : "?", f->mnemonic ? f->mnemonic : "?", f->loc.line);
        }
    ulk_free(v);
}

/* ---------------------------------------------------------------- indexes and lookups */

static const ulk_dict *g_sort_dict; /* only during ulk_dict_load's index build */

static int idx_cmp_mnemonic(const void *x, const void *y)
{
    return strcmp(g_sort_dict->commands[*(const int *)x].mnemonic, g_sort_dict->commands[*(const int *)y].mnemonic);
}

static int idx_cmp_opcode(const void *x, const void *y)
{
    const ulk_command *p = &g_sort_dict->commands[*(const int *)x], *q = &g_sort_dict->commands[*(const int *)y];
    uint32_t ap = g_sort_dict->systems[p->system_index].address, aq = g_sort_dict->systems[q->system_index].address;
    if (ap != aq) return ap < aq ? -1 : 1;
    return (p->opcode > q->opcode) - (p->opcode < q->opcode);
}

/* qsort has no context argument; the sort runs on a private copy of the index arrays, and
 * the pointer is set and cleared around it. Loading is not meant to run concurrently from
 * threads sharing this pointer; lookups afterwards are read-only and thread-safe. */
static int build_indexes(dict_impl *di)
{
    ulk_dict *d = &di->pub;
    di->by_mnemonic = ulk_malloc((size_t)(d->n_commands + 1) * sizeof(int));
    di->by_opcode = ulk_malloc((size_t)(d->n_commands + 1) * sizeof(int));
    if (!di->by_mnemonic || !di->by_opcode) return ULK_ENOMEM;
    for (int i = 0; i < d->n_commands; i++) di->by_mnemonic[i] = di->by_opcode[i] = i;
    g_sort_dict = d;
    qsort(di->by_mnemonic, (size_t)d->n_commands, sizeof(int), idx_cmp_mnemonic);
    qsort(di->by_opcode, (size_t)d->n_commands, sizeof(int), idx_cmp_opcode);
    g_sort_dict = NULL;
    return 0;
}

const ulk_command *ulk_dict_find_command(const ulk_dict *d, const char *mnemonic)
{
    if (!d || !mnemonic) return NULL;
    const dict_impl *di = (const dict_impl *)d;
    int lo = 0, hi = d->n_commands;
    while (lo < hi) {
        int mid = (lo + hi) / 2;
        int c = strcmp(d->commands[di->by_mnemonic[mid]].mnemonic, mnemonic);
        if (c == 0) return &d->commands[di->by_mnemonic[mid]];
        if (c < 0) lo = mid + 1;
        else hi = mid;
    }
    return NULL;
}

const ulk_command *ulk_dict_find_opcode(const ulk_dict *d, uint32_t system_address, uint32_t opcode)
{
    if (!d) return NULL;
    const dict_impl *di = (const dict_impl *)d;
    int lo = 0, hi = d->n_commands;
    while (lo < hi) {
        int mid = (lo + hi) / 2;
        const ulk_command *k = &d->commands[di->by_opcode[mid]];
        uint32_t a = d->systems[k->system_index].address;
        if (a == system_address && k->opcode == opcode) return k;
        if (a < system_address || (a == system_address && k->opcode < opcode)) lo = mid + 1;
        else hi = mid;
    }
    return NULL;
}

int ulk_dict_find_system_addr(const ulk_dict *d, uint32_t address)
{
    if (!d) return -1;
    for (int i = 0; i < d->n_systems; i++)
        if (d->systems[i].address == address) return i;
    return -1;
}

const ulk_arg *ulk_command_find_arg(const ulk_command *c, const char *name)
{
    if (!c || !name) return NULL;
    for (int i = 0; i < c->n_args; i++)
        if (c->args[i].name && !strcmp(c->args[i].name, name)) return &c->args[i];
    return NULL;
}

/* ---------------------------------------------------------------- canonical form and hash */

/* The canonical text: the library's text buffer (src/core/text.h), whose JSON strings are the
 * upload writer's too. */
typedef ulk_text sbuf;
#define sb_put ulk_text_put
#define sb_puts ulk_text_puts
#define sb_printf ulk_text_printf
#define sb_str ulk_text_json_str

static void sb_double(sbuf *b, double v)
{
    char t[40];
    fmt_num(v, t, sizeof t);
    sb_puts(b, t);
}

/* A dictionary number that decides bits (calibration coefficient, range end): as sb_double
 * when its double's text denotes exactly the value written -- every ordinary number, so the
 * canonical form and its hash stay what they were -- else the exact value written, as
 * digits "e" exponent (a JSON number), so that two dictionaries whose numbers differ only
 * beyond a double's precision, and so may encode different bits, never share a hash. */
static void sb_exact(sbuf *b, const char *text, double v)
{
    char t[40];
    fmt_num(v, t, sizeof t);
    mpq_t x, y;
    mpq_init(x);
    mpq_init(y);
    if (text && ulk_q_set_text(x, text, ULK_EXACT_MAX_EXP10, 0, NULL) == 0 &&
        ulk_q_set_text(y, t, ULK_EXACT_MAX_EXP10, 0, NULL) == 0 && !mpq_equal(x, y)) {
        /* x = n / d with d = 2^a 5^b (a decimal): n * 10^k / d digits, exponent -k, k = max(a, b) */
        mpz_t n, d, five;
        mpz_init_set(n, mpq_numref(x));
        mpz_init_set(d, mpq_denref(x));
        mpz_init_set_ui(five, 5);
        unsigned long a2 = (unsigned long)mpz_scan1(d, 0);
        mpz_t rest;
        mpz_init(rest);
        unsigned long a5 = (unsigned long)mpz_remove(rest, d, five);
        mpz_clear(rest);
        unsigned long k = a2 > a5 ? a2 : a5;
        mpz_set(d, mpq_denref(x));
        mpz_ui_pow_ui(five, 10, k);
        mpz_mul(n, n, five);
        mpz_divexact(n, n, d);
        mpz_clear(five);
        char *digits = mpz_get_str(NULL, 10, n);
        if (digits) {
            sb_puts(b, digits);
            if (k) sb_printf(b, "e-%lu", k);
            void (*freefn)(void *, size_t);
            mp_get_memory_functions(NULL, NULL, &freefn);
            freefn(digits, strlen(digits) + 1);
        } else {
            sb_puts(b, t);
        }
        mpz_clear(n);
        mpz_clear(d);
    } else {
        sb_puts(b, t);
    }
    mpq_clear(x);
    mpq_clear(y);
}

static void sb_ratio(sbuf *b, ulk_ratio r)
{
    char t[64];
    ulk_ratio_format(r, t, sizeof t);
    sb_str(b, t);
}

static int enum_label_cmp(const void *x, const void *y)
{
    return strcmp((*(const ulk_enum_value *const *)x)->label, (*(const ulk_enum_value *const *)y)->label);
}

static void sb_bounds(sbuf *b, const ulk_carrier *c, int ch)
{
    sb_puts(b, "\"bounds\":[");
    sb_double(b, c->bound_lo[ch]);
    sb_puts(b, ",");
    sb_double(b, c->bound_hi[ch]);
    sb_puts(b, "]");
}

static int int_desc(const void *x, const void *y) { return *(const int *)y - *(const int *)x; }

static int mode_name_cmp(const void *x, const void *y)
{
    return strcmp((*(const ulk_carrier_mode *const *)x)->name, (*(const ulk_carrier_mode *const *)y)->name);
}

/* The carrier object of the canonical form (docs/dictionary.md section 6), keys in byte
 * order, from the checked model; modes sorted by name (a mapping has no order), the
 * polynomial's exponents in decreasing order (any order may be written). */
static void canonical_carrier(sbuf *b, const ulk_carrier *c)
{
    int first = 1;
#define SEP() (first ? (first = 0, "") : ",")
    sb_puts(b, "{");
    if (c->has_pt_n0) {
        sb_printf(b, "%s\"budget\":{\"pt_n0_dbhz\":", SEP());
        sb_double(b, c->pt_n0_dbhz);
        sb_puts(b, "}");
    }
    if (c->has_data) {
        sb_printf(b, "%s\"data\":{", SEP());
        sb_bounds(b, c, ULK_CH_DATA);
        sb_puts(b, ",\"info_rate\":");
        sb_ratio(b, c->data_rb);
        if (c->has_data_need) {
            sb_puts(b, ",\"required_ebn0_db\":");
            sb_double(b, c->data_ebn0_req_db);
        }
        sb_puts(b, "}");
    }
    if (c->has_loop) {
        sb_printf(b, "%s\"loop\":{\"bandwidth_hz\":", SEP());
        sb_double(b, c->loop_bw_hz);
        sb_puts(b, ",\"required_snr_db\":");
        sb_double(b, c->loop_snr_req_db);
        sb_puts(b, "}");
    }
    sb_printf(b, "%s\"modes\":{", SEP());
    const ulk_carrier_mode **mo = ulk_malloc((size_t)(c->n_modes + 1) * sizeof *mo);
    if (!mo) { b->oom = 1; return; }
    for (int k = 0; k < c->n_modes; k++) mo[k] = &c->modes[k];
    qsort(mo, (size_t)c->n_modes, sizeof *mo, mode_name_cmp);
    for (int k = 0; k < c->n_modes; k++) {
        if (k) sb_puts(b, ",");
        sb_str(b, mo[k]->name);
        sb_puts(b, ":{");
        /* byte order of the channel names: data, ranging, voice */
        static const ulk_channel order[] = {ULK_CH_DATA, ULK_CH_RANGING, ULK_CH_VOICE};
        int f2 = 1;
        for (int t = 0; t < 3; t++) {
            if (!mo[k]->on[order[t]]) continue;
            sb_printf(b, "%s\"%s\":", f2 ? "" : ",", ulk_channel_name(order[t]));
            sb_double(b, mo[k]->m_rad[order[t]]);
            f2 = 0;
        }
        sb_puts(b, "}");
    }
    ulk_free(mo);
    sb_puts(b, "},\"offset_hz\":");
    sb_ratio(b, c->offset_hz);
    if (c->has_ranging) {
        sb_puts(b, ",\"ranging\":{");
        sb_bounds(b, c, ULK_CH_RANGING);
        sb_puts(b, ",\"chip_rate\":");
        sb_ratio(b, c->chip_rate);
        int ex[ULK_MLS_MAX_DEGREE + 1];
        int ne = c->n_poly_exps < ULK_MLS_MAX_DEGREE + 1 ? c->n_poly_exps : ULK_MLS_MAX_DEGREE + 1;
        memcpy(ex, c->poly_exps, (size_t)ne * sizeof *ex);
        qsort(ex, (size_t)ne, sizeof *ex, int_desc);
        sb_puts(b, ",\"polynomial\":[");
        for (int k = 0; k < ne; k++) sb_printf(b, "%s%d", k ? "," : "", ex[k]);
        sb_puts(b, "]");
        if (c->has_ranging_need) {
            sb_puts(b, ",\"required_pn0_dbhz\":");
            sb_double(b, c->ranging_pn0_req_dbhz);
        }
        sb_puts(b, "}");
    }
    if (c->has_voice) {
        sb_puts(b, ",\"voice\":{");
        sb_bounds(b, c, ULK_CH_VOICE);
        sb_puts(b, ",\"deviation_hz\":");
        sb_ratio(b, c->voice_dev_hz);
        if (c->has_voice_need) {
            sb_puts(b, ",\"required_pn0_dbhz\":");
            sb_double(b, c->voice_pn0_req_dbhz);
        }
        sb_puts(b, ",\"subcarrier_hz\":");
        sb_ratio(b, c->voice_fv_hz);
        sb_puts(b, ",\"tone_hz\":");
        sb_ratio(b, c->voice_tone_hz);
        sb_puts(b, "}");
    }
    sb_puts(b, "}");
#undef SEP
}

int ulk_dict_canonical(const ulk_dict *d, char **out, size_t *len)
{
    *out = NULL;
    if (len) *len = 0;
    if (!d) return ULK_EINVAL;
    sbuf b = {0};
    const ulk_link *L = &d->link;
    /* The carrier section, when present, leads ("carrier" < "commands"); without one the
     * content (and the hash) is what it was before the section existed. */
    const ulk_carrier *car = ulk_dict_carrier(d);
    if (car) {
        sb_puts(&b, "{\"carrier\":");
        canonical_carrier(&b, car);
        sb_puts(&b, ",\"commands\":[");
    } else {
        sb_puts(&b, "{\"commands\":[");
    }
    for (int i = 0; i < d->n_commands; i++) {
        const ulk_command *k = &d->commands[i];
        sb_puts(&b, i ? ",{\"arguments\":[" : "{\"arguments\":[");
        for (int j = 0; j < k->n_args; j++) {
            const ulk_arg *a = &k->args[j];
            sb_puts(&b, j ? ",{\"bits\":" : "{\"bits\":");
            sb_printf(&b, "%d", a->bits);
            if (a->cal == ULK_CAL_LINEAR) {
                sb_puts(&b, ",\"calibration\":{\"offset\":");
                sb_exact(&b, a->cal_offset_text, a->cal_offset);
                sb_puts(&b, ",\"scale\":");
                sb_exact(&b, a->cal_scale_text, a->cal_scale);
                sb_puts(&b, "}");
            } else if (a->cal == ULK_CAL_POLY) {
                sb_puts(&b, ",\"calibration\":{\"polynomial\":[");
                for (int t = 0; t < a->n_poly; t++) {
                    if (t) sb_puts(&b, ",");
                    sb_exact(&b, a->poly_text ? a->poly_text[t] : NULL, a->poly[t]);
                }
                sb_puts(&b, "]}");
            }
            if (a->has_default) sb_printf(&b, ",\"default\":%llu", (unsigned long long)a->default_raw);
            sb_puts(&b, ",\"name\":");
            sb_str(&b, a->name);
            if (a->has_range) {
                sb_puts(&b, ",\"range\":[");
                sb_exact(&b, a->range_min_text, a->range_min);
                sb_puts(&b, ",");
                sb_exact(&b, a->range_max_text, a->range_max);
                sb_puts(&b, "]");
            }
            if (a->has_tolerance) {
                sb_puts(&b, ",\"tolerance\":");
                sb_double(&b, a->tolerance);
            }
            sb_puts(&b, ",\"type\":");
            sb_str(&b, ulk_arg_type_name(a->type));
            if (a->units) {
                sb_puts(&b, ",\"units\":");
                sb_str(&b, a->units);
            }
            if (a->type == ULK_ARG_ENUM) {
                /* A mapping has no order: labels sorted by their bytes. */
                const ulk_enum_value **ev = ulk_malloc((size_t)(a->n_values + 1) * sizeof *ev);
                if (!ev) { b.oom = 1; break; }
                for (int t = 0; t < a->n_values; t++) ev[t] = &a->values[t];
                qsort(ev, (size_t)a->n_values, sizeof *ev, enum_label_cmp);
                sb_puts(&b, ",\"values\":{");
                for (int t = 0; t < a->n_values; t++) {
                    if (t) sb_puts(&b, ",");
                    sb_str(&b, ev[t]->label);
                    sb_printf(&b, ":%llu", (unsigned long long)ev[t]->code);
                }
                sb_puts(&b, "}");
                ulk_free(ev);
            }
            sb_puts(&b, "}");
        }
        sb_printf(&b, "],\"critical\":%s,\"description\":", k->critical ? "true" : "false");
        sb_str(&b, k->description ? k->description : "");
        sb_puts(&b, ",\"mnemonic\":");
        sb_str(&b, k->mnemonic);
        sb_printf(&b, ",\"opcode\":%u,\"system\":", k->opcode);
        sb_str(&b, k->system);
        sb_puts(&b, "}");
    }
    sb_puts(&b, "],\"dictionary\":{\"name\":");
    sb_str(&b, d->name);
    sb_puts(&b, ",\"version\":");
    sb_str(&b, d->version);
    sb_puts(&b, "},\"link\":");
    const ulk_profile_ops *prof = ulk_profile_ops_for(L->profile);
    (prof ? prof : ulk_profile_ops_at(0))->link_canonical(&b, L);
    sb_puts(&b, ",\"systems\":[");
    for (int i = 0; i < d->n_systems; i++) {
        sb_printf(&b, "%s{\"address\":%u,\"name\":", i ? "," : "", d->systems[i].address);
        sb_str(&b, d->systems[i].name);
        sb_puts(&b, "}");
    }
    sb_puts(&b, "]}");
    if (b.oom) {
        ulk_free(b.p);
        return ULK_ENOMEM;
    }
    *out = b.p;
    if (len) *len = b.n;
    return 0;
}

static int sha256_hex(const char *data, size_t n, char hex[65])
{
    unsigned char md[32];
    unsigned int mdlen = 0;
    EVP_MD_CTX *ctx = EVP_MD_CTX_new();
    int ok = ctx && EVP_DigestInit_ex(ctx, EVP_sha256(), NULL) && EVP_DigestUpdate(ctx, data, n) &&
             EVP_DigestFinal_ex(ctx, md, &mdlen) && mdlen == 32;
    EVP_MD_CTX_free(ctx);
    if (!ok) return ULK_ENOMEM;
    for (int i = 0; i < 32; i++) snprintf(hex + 2 * i, 3, "%02x", md[i]);
    return 0;
}

/* ---------------------------------------------------------------- helpers for the profiles
 * (src/dict/dict_build.h): the loader's own readers, under their shared names */

ulk_link *ulk_db_link(ulk_dict_build *b) { return &b->d->link; }
void *ulk_db_state(ulk_dict_build *b) { return b->state; }
size_t ulk_db_errors(const ulk_dict_build *b) { return ulk_diag_errors(b->diag); }
int ulk_db_is_json(const ulk_dict_build *b) { return b->doc->is_json; }

void ulk_db_err(ulk_dict_build *b, ulk_node *n, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vfinding(b, ULK_SEV_ERROR, n, fmt, ap);
    va_end(ap);
}

void ulk_db_warn(ulk_dict_build *b, ulk_node *n, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vfinding(b, ULK_SEV_WARNING, n, fmt, ap);
    va_end(ap);
}

const char *ulk_db_key_name(ulk_node *n) { return key_name(n); }
int ulk_db_want_map(ulk_dict_build *b, ulk_node *n, const char *what) { return want_map(b, n, what); }
void ulk_db_check_keys(ulk_dict_build *b, ulk_node *map, const char *what, const char *const *allowed,
                       const char *const *required)
{
    check_keys(b, map, what, allowed, required);
}
int ulk_db_int(ulk_dict_build *b, ulk_node *n, int64_t lo, int64_t hi, int64_t *out, const char *what)
{
    return get_int(b, n, lo, hi, out, what);
}
int ulk_db_positive_ratio(ulk_dict_build *b, ulk_node *n, ulk_ratio *out, const char *what)
{
    return positive_ratio(b, n, out, what);
}
int ulk_db_amplitude(ulk_dict_build *b, ulk_node *n, double *out, ulk_ratio *exact, const char *what)
{
    return get_amplitude(b, n, out, exact, what);
}
int ulk_db_bool(ulk_dict_build *b, ulk_node *n, int *out) { return get_bool(b, n, out); }
int ulk_db_str(ulk_dict_build *b, ulk_node *n, const char **out) { return get_str(b, n, out); }
int ulk_db_choice(ulk_dict_build *b, ulk_node *n, const char *const *names, size_t count, const char *what)
{
    return get_choice(b, n, names, count, what);
}
ulk_node *ulk_db_subcarrier(ulk_dict_build *b, ulk_node *sc, int *fsc_ok, int *amp_ok, ulk_ratio *amp_exact)
{
    return build_subcarrier(b, sc, fsc_ok, amp_ok, amp_exact);
}

void ulk_dt_double(ulk_dict_text *t, double v) { sb_double(t, v); }
void ulk_dt_ratio(ulk_dict_text *t, ulk_ratio r) { sb_ratio(t, r); }

/* ---------------------------------------------------------------- entry points */

static int is_json_name(const char *path, const char *text, size_t len)
{
    size_t n = strlen(path);
    if (n >= 5 && !strcmp(path + n - 5, ".json")) return 1;
    if ((n >= 5 && !strcmp(path + n - 5, ".yaml")) || (n >= 4 && !strcmp(path + n - 4, ".yml"))) return 0;
    /* Neither: a file that opens with '{' is taken as JSON (YAML readers would accept most
     * JSON too, but JSON's own rules and messages fit it better). */
    size_t i = 0;
    while (i < len && isspace((unsigned char)text[i])) i++;
    return i < len && text[i] == '{';
}

int ulk_dict_load_mem(const char *name, const char *text, size_t len, int is_json, ulk_dict **out,
                      ulk_diag *diag)
{
    if (!out) return ULK_EINVAL;
    *out = NULL;
    if (!text) return ULK_EINVAL;
    if (!name) name = "<memory>";
    size_t errs_before = ulk_diag_errors(diag);
    ulk_doc *doc = NULL;
    int rc = ulk_doc_parse(name, text, len, is_json, &doc, diag);
    if (rc) return rc;

    dict_impl *di = ulk_calloc(1, sizeof *di);
    if (!di) {
        ulk_doc_destroy(doc);
        return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", name);
    }
    bctx c = {0};
    c.di = di;
    c.d = &di->pub;
    c.doc = doc;
    c.diag = diag;
    c.prof = ulk_profile_ops_at(0);
    c.d->file = adup(&c, name);

    ulk_node *root = doc->root;
    if (want_map(&c, root, "the dictionary (top level)")) {
        static const char *const keys[] = {"dictionary", "link", "systems", "commands", "carrier", NULL};
        static const char *const req[] = {"dictionary", "link", "systems", "commands", NULL};
        check_keys(&c, root, "the top level", keys, req);
        ulk_node *id = ulk_node_get(root, "dictionary");
        if (id && want_map(&c, id, "dictionary")) {
            static const char *const ik[] = {"name", "version", NULL};
            check_keys(&c, id, "dictionary", ik, ik);
            const char *s;
            ulk_node *n;
            if ((n = ulk_node_get(id, "name")) && get_str(&c, n, &s)) {
                if (!*s) err(&c, n, "dictionary name is empty");
                c.d->name = adup(&c, s);
            }
            if ((n = ulk_node_get(id, "version")) && get_str(&c, n, &s)) {
                if (!*s) err(&c, n, "dictionary version is empty");
                c.d->version = adup(&c, s);
            }
        }
        ulk_node *ln = ulk_node_get(root, "link");
        size_t errs_link = ulk_diag_errors(diag);
        if (ln) build_link(&c, ln);
        int link_ok = ln && ulk_diag_errors(diag) == errs_link;
        ulk_node *carrier = ulk_node_get(root, "carrier");
        /* The carrier rules live in src/carrier_load.c; its data channel is this link. With a
         * broken link the section is left unchecked: its data and overlap rules would only
         * echo the link's findings (already reported) with half-read values. */
        if (carrier && !link_ok) want_map(&c, carrier, "carrier");
        else if (carrier) {
            int crc = ulk_carrier_from_tree(doc, carrier, &c.d->link, 0, &di->carrier, diag);
            if (crc == ULK_ENOMEM) c.oom = 1;
        }
        ulk_node *sn = ulk_node_get(root, "systems");
        if (sn) build_systems(&c, sn);
        ulk_node *cn = ulk_node_get(root, "commands");
        if (cn) build_commands(&c, cn);
    }
    ulk_doc_destroy(doc);

    if (c.oom) rc = ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", name);
    else if (ulk_diag_errors(diag) > errs_before) rc = ULK_EPARSE;
    if (!rc) rc = build_indexes(di);
    if (!rc) {
        char *canon;
        size_t clen;
        rc = ulk_dict_canonical(c.d, &canon, &clen);
        if (!rc) {
            rc = sha256_hex(canon, clen, c.d->sha256);
            ulk_free(canon);
        }
        if (rc) ulk_fail(diag, rc, "%s: out of memory", name);
    }
    if (rc) {
        /* Every failure leaves a message (an allocation failure may have had none yet). */
        if (ulk_diag_errors(diag) == errs_before) ulk_fail(diag, rc, "%s: %s", name, ulk_status_str(rc));
        ulk_dict_destroy(c.d);
        return rc;
    }
    *out = c.d;
    return 0;
}

int ulk_dict_load(const char *path, ulk_dict **out, ulk_diag *diag)
{
    if (!out) return ULK_EINVAL;
    *out = NULL;
    if (!path) return ULK_EINVAL;
    char *text;
    size_t len;
    int rc = ulk_read_file(path, ULK_DOC_MAX_BYTES, &text, &len, diag);
    if (rc) return rc;
    rc = ulk_dict_load_mem(path, text, len, is_json_name(path, text, len), out, diag);
    ulk_free(text);
    return rc;
}
