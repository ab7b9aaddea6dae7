/* src/compile.c - the command-list compiler: parsed list + dictionary -> upload
 * (docs/spec/subbit.md sections 2 and 3).
 *
 * Each command line becomes one word: mnemonic -> system address and opcode, arguments by
 * name -> raw fields (argval.c), packed in dictionary order, then the check. Waits become
 * idle patterns, exactly: t and R_b are rationals, so ceil(t * R_b) has no rounding.
 */
#include <ctype.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "ulk/cmdlist.h"
#include "ulk/profile.h"
#include "ulk/word.h"
#include "util.h"

typedef __int128 i128;

int ulk_wait_patterns(ulk_ratio t, ulk_ratio rb, uint64_t *n)
{
    if (t.den <= 0 || rb.den <= 0 || t.num < 0 || rb.num <= 0) return ULK_EINVAL;
    i128 num = (i128)t.num * rb.num, den = (i128)t.den * rb.den;
    i128 q = num / den + (num % den != 0);
    if (q > (i128)ULK_UPLOAD_MAX_IDLES) return ULK_ELIMIT;
    *n = (uint64_t)q;
    return 0;
}

/* a + b, exact; ULK_ELIMIT when it no longer fits. */
static int ratio_add(ulk_ratio a, ulk_ratio b, ulk_ratio *out)
{
    i128 n = (i128)a.num * b.den + (i128)b.num * a.den, d = (i128)a.den * b.den;
    i128 x = n < 0 ? -n : n, y = d;
    while (y) { i128 t = x % y; x = y; y = t; }
    if (x) { n /= x; d /= x; }
    if (n >= ((i128)1 << 62) || d >= ((i128)1 << 62)) return ULK_ELIMIT;
    out->num = (int64_t)n;
    out->den = (int64_t)d;
    return 0;
}

double ulk_upload_duration_s(const ulk_upload *u)
{
    const ulk_profile_ops *p = ulk_profile_ops_for(u->link.profile);
    uint64_t patterns = u->idles_after;
    for (size_t i = 0; i < u->n_cmds; i++) patterns += u->cmds[i].idles_before + p->unit_bits(&u->link, &u->cmds[i]);
    return (double)patterns * (double)u->link.bit_rate.den / (double)u->link.bit_rate.num;
}

/* ---- mnemonic lookup: a small open-addressing table, so long lists stay linear ---- */
typedef struct {
    const ulk_dict *d;
    int *slot; /* command index + 1, 0 empty */
    size_t mask;
} mtab;

static uint64_t hash_str(const char *s)
{
    uint64_t h = 1469598103934665603ull;
    for (; *s; s++) h = (h ^ (unsigned char)*s) * 1099511628211ull;
    return h;
}

static int mtab_init(mtab *t, const ulk_dict *d)
{
    size_t n = 16;
    while (n < (size_t)d->n_commands * 2 + 2) n *= 2;
    t->d = d;
    t->mask = n - 1;
    t->slot = ulk_calloc(n, sizeof(int));
    if (!t->slot) return ULK_ENOMEM;
    for (int i = 0; i < d->n_commands; i++) {
        if (!d->commands[i].mnemonic) continue;
        size_t h = (size_t)hash_str(d->commands[i].mnemonic) & t->mask;
        while (t->slot[h]) h = (h + 1) & t->mask;
        t->slot[h] = i + 1;
    }
    return 0;
}

static const ulk_command *mtab_find(const mtab *t, const char *m)
{
    size_t h = (size_t)hash_str(m) & t->mask;
    while (t->slot[h]) {
        const ulk_command *c = &t->d->commands[t->slot[h] - 1];
        if (!strcmp(c->mnemonic, m)) return c;
        h = (h + 1) & t->mask;
    }
    return NULL;
}

/* Splits "250ms" into the number "250" and the scale of its unit for argument a.
 * Returns 0, or -1 with the reason in err and *err_off the offset of the offending part. */
static int split_unit(const ulk_arg *a, const char *v, char *num, size_t numlen, double *scale, int *err_off,
                      char *err, size_t errlen)
{
    size_t k = 0, n = strlen(v);
    *scale = 1.0;
    *err_off = 0;
    if (v[k] == '+' || v[k] == '-') k++;
    if (v[k] == '0' && (v[k + 1] == 'x' || v[k + 1] == 'X' || v[k + 1] == 'b' || v[k + 1] == 'B')) {
        /* hex and binary integers take no unit: the whole text is the number */
        int hex = v[k + 1] == 'x' || v[k + 1] == 'X';
        size_t j = k + 2;
        while (j < n && (hex ? isxdigit((unsigned char)v[j]) : (v[j] == '0' || v[j] == '1'))) j++;
        if (j < n && j > k + 2 && !isdigit((unsigned char)v[j])) {
            *err_off = (int)j;
            snprintf(err, errlen, "%s integer '%.*s' takes no unit (found '%s')", hex ? "a hexadecimal" : "a binary",
                     (int)j, v, v + j);
            return -1;
        }
        snprintf(num, numlen, "%s", v);
        return 0;
    }
    while (k < n && (isdigit((unsigned char)v[k]) || v[k] == '.')) k++;
    if ((v[k] == 'e' || v[k] == 'E') &&
        (isdigit((unsigned char)v[k + 1]) ||
         ((v[k + 1] == '+' || v[k + 1] == '-') && isdigit((unsigned char)v[k + 2])))) {
        k += 2;
        while (k < n && isdigit((unsigned char)v[k])) k++;
    }
    if (k >= numlen) k = numlen - 1;
    memcpy(num, v, k);
    num[k] = 0;
    if (k == n) return 0;
    const char *u = v + k;
    if (k == 0 || (k == 1 && (v[0] == '+' || v[0] == '-'))) {
        snprintf(num, numlen, "%s", v); /* not a number at all: let the value parser say so */
        return 0;
    }
    *err_off = (int)k;
    if (!a->units || !*a->units) {
        snprintf(err, errlen, "argument '%s' takes no unit (found '%s')", a->name, u);
        return -1;
    }
    if (!strcmp(u, a->units)) return 0;
    if ((u[0] == 'k' || u[0] == 'm' || u[0] == 'u') && !strcmp(u + 1, a->units)) {
        *scale = u[0] == 'k' ? 1e3 : u[0] == 'm' ? 1e-3 : 1e-6;
        return 0;
    }
    snprintf(err, errlen, "unit '%s' is not the units of argument '%s' (%s; SI prefixes k, m, u allowed)", u,
             a->name, a->units);
    return -1;
}

static int is_numeric(const ulk_arg *a)
{
    return a->type == ULK_ARG_UNSIGNED || a->type == ULK_ARG_SIGNED || a->type == ULK_ARG_FLOAT32;
}

/* Converts a value text (number with optional unit, label, boolean) of argument a. For a
 * decimal number *requested is the value asked for, in the argument's units (NAN otherwise). */
static int value_of(const ulk_arg *a, const char *text, ulk_argval *v, double *requested, int *err_off, char *err,
                    size_t errlen)
{
    *err_off = 0;
    *requested = NAN;
    if (!is_numeric(a)) return ulk_arg_from_text(a, text, 1.0, v, err, errlen);
    char num[1100];
    double scale;
    if (strlen(text) >= sizeof num) { snprintf(err, errlen, "value is longer than %zu characters", sizeof num - 1); return ULK_EPARSE; }
    if (split_unit(a, text, num, sizeof num, &scale, err_off, err, errlen) < 0) return ULK_EPARSE;
    int rc = ulk_arg_from_text(a, num, scale, v, err, errlen);
    const char *d = num + (num[0] == '+' || num[0] == '-');
    if (rc == 0 && !(d[0] == '0' && (d[1] == 'x' || d[1] == 'X' || d[1] == 'b' || d[1] == 'B'))) {
        char *end;
        double x = strtod(num, &end);
        if (!*end && isfinite(x)) *requested = x * scale;
    }
    return rc;
}

/* An engineering value for people: 12 significant digits, enough to show every calibration
 * step of a 64-bit field apart from the next without the binary noise of a double. */
static void eng_text(double v, const char *units, char *buf, size_t len)
{
    snprintf(buf, len, "%.12g%s%s", v, units ? " " : "", units ? units : "");
}

/* Warns when the encoded value differs from the requested one, and refuses it beyond the
 * argument's tolerance. Returns 1 when refused. */
static int check_rounding(ulk_diag *diag, const ulk_loc *loc, const char *mnemonic, const ulk_arg *a,
                          const ulk_argval *v, double requested)
{
    if (isnan(requested)) return 0;
    double diff = fabs(v->eng - requested);
    /* differences below a part in 10^12 are the binary form of the same decimal, not rounding */
    if (!(diff > 1e-12 * fmax(fabs(requested), fabs(v->eng)))) return 0;
    /* float32 rounds every decimal fraction (a part in 10^7): said only against a tolerance */
    if (a->type == ULK_ARG_FLOAT32 && !(a->has_tolerance && diff > a->tolerance)) return 0;
    char rq[64], en[64], df[64];
    eng_text(requested, a->units, rq, sizeof rq);
    eng_text(v->eng, a->units, en, sizeof en);
    eng_text(diff, a->units, df, sizeof df);
    const char *why = a->type == ULK_ARG_FLOAT32 ? "float32 rounding" : "nearest calibration step";
    if (a->has_tolerance && diff > a->tolerance) {
        char tl[64];
        eng_text(a->tolerance, a->units, tl, sizeof tl);
        ulk_diag_add(diag, ULK_SEV_ERROR, loc,
                     "%s %s: %s would be encoded as %s (raw 0x%llX, %s), %s away: beyond the argument's tolerance %s",
                     mnemonic, a->name, rq, en, (unsigned long long)v->raw, why, df, tl);
        return 1;
    }
    ulk_diag_add(diag, ULK_SEV_WARNING, loc, "%s %s: %s is encoded as %s (raw 0x%llX, %s), %s away", mnemonic, a->name,
                 rq, en, (unsigned long long)v->raw, why, df);
    return 0;
}

static char *stpcpy_(char *dst, const char *s)
{
    size_t n = strlen(s) + 1;
    memcpy(dst, s, n);
    return dst + n;
}

/* Fills one upload command from a resolved command; one allocation holds args and strings. */
static int fill_cmd(ulk_upload_cmd *uc, const ulk_dict *d, const ulk_command *c, const ulk_argval *vals)
{
    char texts[64][80];
    size_t need = (size_t)c->n_args * sizeof(ulk_upload_arg) + strlen(c->mnemonic) + 1;
    const char *sysname = c->system_index >= 0 ? d->systems[c->system_index].name : c->system;
    need += strlen(sysname ? sysname : "") + 1;
    for (int i = 0; i < c->n_args; i++) {
        const ulk_arg *a = &c->args[i];
        ulk_arg_format(a, vals[i].raw, texts[i], sizeof texts[i]);
        need += strlen(a->name) + 1 + strlen(texts[i]) + 1 + (a->units ? strlen(a->units) + 1 : 0);
    }
    char *blk = ulk_malloc(need);
    if (!blk) return ULK_ENOMEM;
    uc->block_ = blk;
    uc->args = (ulk_upload_arg *)(void *)blk;
    uc->n_args = c->n_args;
    char *p = blk + (size_t)c->n_args * sizeof(ulk_upload_arg);
    uc->mnemonic = p;
    p = stpcpy_(p, c->mnemonic);
    uc->system_name = p;
    p = stpcpy_(p, sysname ? sysname : "");
    for (int i = 0; i < c->n_args; i++) {
        const ulk_arg *a = &c->args[i];
        ulk_upload_arg *ua = &uc->args[i];
        ua->name = p;
        p = stpcpy_(p, a->name);
        ua->text = p;
        p = stpcpy_(p, texts[i]);
        ua->units = NULL;
        if (a->units) { ua->units = p; p = stpcpy_(p, a->units); }
        ua->raw = vals[i].raw;
        ua->eng = vals[i].eng;
        ua->type = a->type;
        ua->bits = a->bits;
    }
    return 0;
}

static const char *base_name(const char *p)
{
    const char *s = strrchr(p, '/');
    return s ? s + 1 : p;
}

/* The message for an argument name c does not have: a suggestion, or what it takes. */
static void no_such_arg(ulk_diag *diag, const ulk_loc *aloc, const ulk_command *c, const char *name)
{
    const char *cands[64];
    for (int j = 0; j < c->n_args; j++) cands[j] = c->args[j].name;
    const char *sug = ulk_suggest(name, cands, (size_t)c->n_args);
    if (sug)
        ulk_diag_add(diag, ULK_SEV_ERROR, aloc, "%s has no argument '%.80s' (did you mean '%s'?)",
                     c->mnemonic, name, sug);
    else if (c->n_args == 0)
        ulk_diag_add(diag, ULK_SEV_ERROR, aloc, "%s takes no arguments (found '%.80s')", c->mnemonic,
                     name);
    else {
        char names[400] = "";
        size_t used = 0;
        for (int j = 0; j < c->n_args && used + 70 < sizeof names; j++)
            used += (size_t)snprintf(names + used, sizeof names - used, "%s%s", j ? ", " : "",
                                     c->args[j].name);
        ulk_diag_add(diag, ULK_SEV_ERROR, aloc, "%s has no argument '%.80s' (arguments: %s)",
                     c->mnemonic, name, names);
    }
}

/* The raw values of command c's arguments on list item it (given by name, else the
 * dictionary's default) into vals, in dictionary order, and the confirmation of a critical
 * command. Every problem is reported to diag; returns 1 when there was one, else 0. */
static int resolve_args(const ulk_cmdlist *l, const ulk_cl_item *it, const ulk_command *c, ulk_argval *vals,
                        ulk_diag *diag)
{
    ulk_loc loc = {l->file, it->line, it->col, NULL};
    char err[1400];
    int bad = 0;
    int given[64];
    memset(given, 0, sizeof given);
    for (int k = 0; k < it->n_args; k++) {
        const ulk_cl_arg *ca = &it->args[k];
        ulk_loc aloc = {l->file, it->line, ca->col, NULL};
        int ai = -1;
        for (int j = 0; j < c->n_args; j++)
            if (!strcmp(c->args[j].name, ca->name)) { ai = j; break; }
        if (ai < 0) {
            no_such_arg(diag, &aloc, c, ca->name);
            bad = 1;
            continue;
        }
        if (given[ai]) {
            ulk_diag_add(diag, ULK_SEV_ERROR, &aloc, "argument '%s' given twice", ca->name);
            bad = 1;
            continue;
        }
        given[ai] = 1;
        int off;
        double requested;
        if (value_of(&c->args[ai], ca->value, &vals[ai], &requested, &off, err, sizeof err) < 0) {
            ulk_loc vloc = {l->file, it->line, ca->value_col + off, NULL};
            ulk_diag_add(diag, ULK_SEV_ERROR, &vloc, "%s %s: %s", c->mnemonic, ca->name, err);
            bad = 1;
        } else {
            ulk_loc vloc = {l->file, it->line, ca->value_col, NULL};
            bad |= check_rounding(diag, &vloc, c->mnemonic, &c->args[ai], &vals[ai], requested);
        }
    }
    for (int j = 0; j < c->n_args; j++) {
        if (given[j]) continue;
        const ulk_arg *a = &c->args[j];
        if (!a->default_text) {
            ulk_diag_add(diag, ULK_SEV_ERROR, &loc, "%s: missing argument '%s' (%s%s%s; it has no default)",
                         c->mnemonic, a->name, ulk_arg_type_name(a->type), a->units ? ", " : "",
                         a->units ? a->units : "");
            bad = 1;
            continue;
        }
        int off;
        double requested;
        if (value_of(a, a->default_text, &vals[j], &requested, &off, err, sizeof err) < 0) {
            ulk_diag_add(diag, ULK_SEV_ERROR, &loc, "%s: the default of argument '%s' is unusable: %s",
                         c->mnemonic, a->name, err);
            bad = 1;
        }
    }
    if (c->critical && !it->confirm) {
        ulk_diag_add(diag, ULK_SEV_ERROR, &loc,
                     "%s is a critical command: add 'confirm' to the line to send it", c->mnemonic);
        bad = 1;
    } else if (!c->critical && it->confirm) {
        ulk_diag_add(diag, ULK_SEV_WARNING, &loc, "'confirm' on %s, which is not a critical command",
                     c->mnemonic);
    }
    return bad;
}

/* The filler after the last command: its wait (from list line `line`) or the profile's
 * minimum, whichever is longer. Returns 1 when the wait is too long (reported), else 0. */
static int set_postamble(ulk_upload *u, const ulk_profile_ops *prof, ulk_ratio wait, const char *file, int line,
                         ulk_diag *diag)
{
    int bad = 0;
    uint64_t need = 0;
    if (ulk_wait_patterns(wait, prof->filler_rate(&u->link), &need) < 0) {
        ulk_loc loc = {file, line, 1, NULL};
        ulk_diag_add(diag, ULK_SEV_ERROR, &loc, "the wait after the last command is too long");
        bad = 1;
    }
    uint64_t base = prof->gap_units(&u->link, ULK_GAP_LAST);
    u->idles_after = need > base ? need : base;
    return bad;
}

int ulk_compile(const ulk_dict *d, const ulk_cmdlist *l, ulk_upload **out, ulk_diag *diag)
{
    *out = NULL;
    if (!d || !l) return ulk_fail(diag, ULK_EINVAL, "compile: no dictionary or no command list");
    size_t errors = l->n_errors;
    int status = 0;
    const ulk_link *lk = &d->link;
    const ulk_profile_ops *prof = ulk_profile_ops_for(lk->profile);
    if (!prof) return ulk_fail(diag, ULK_EINVAL, "compile: unknown link profile");
    ulk_upload *u = ulk_calloc(1, sizeof *u);
    mtab mt = {0};
    const char **mn = NULL;
    void *enc = NULL;
    /* Packed argument bits, one per octet: D for the sub-bit profile, up to a whole TC frame. */
    size_t max_arg_bits = prof->max_arg_bits(lk);
    uint8_t *abits = ulk_malloc(max_arg_bits + 1);
    if (!u || !abits || mtab_init(&mt, d) < 0 || prof->encoder_create(lk, &enc) < 0) { status = ULK_ENOMEM; goto done; }
    u->format_version = ULK_UPLOAD_FORMAT_VERSION;
    u->dict_name = ulk_strdup(d->name ? d->name : "");
    u->dict_version = ulk_strdup(d->version ? d->version : "");
    u->source = ulk_strdup(base_name(l->file ? l->file : "<list>"));
    memcpy(u->dict_sha256, d->sha256, sizeof u->dict_sha256);
    u->dict_sha256[64] = 0;
    u->link = *lk;
    u->wait_after = ulk_ratio_make(0, 1);
    if (!u->dict_name || !u->dict_version || !u->source) { status = ULK_ENOMEM; goto done; }
    if (l->n_commands > ULK_UPLOAD_MAX_CMDS) {
        status = ulk_fail(diag, ULK_ELIMIT, "%s: %zu commands; the limit is %u", l->file, l->n_commands,
                          ULK_UPLOAD_MAX_CMDS);
        goto done;
    }
    if (l->n_commands) {
        u->cmds = ulk_calloc(l->n_commands, sizeof *u->cmds);
        if (!u->cmds) { status = ULK_ENOMEM; goto done; }
    }
    mn = ulk_calloc((size_t)d->n_commands + 1, sizeof *mn);
    if (!mn) { status = ULK_ENOMEM; goto done; }
    for (int i = 0; i < d->n_commands; i++) mn[i] = d->commands[i].mnemonic;

    ulk_ratio pending = ulk_ratio_make(0, 1);
    int pending_line = 0;
    char err[1400];
    for (size_t ii = 0; ii < l->n_items; ii++) {
        const ulk_cl_item *it = &l->items[ii];
        ulk_loc loc = {l->file, it->line, it->col, NULL};
        if (it->kind == ULK_CL_WAIT) {
            ulk_ratio sum;
            if (ratio_add(pending, it->wait_s, &sum) < 0 ||
                sum.num / sum.den > ULK_CMDLIST_MAX_WAIT_S || (sum.num / sum.den == ULK_CMDLIST_MAX_WAIT_S && sum.num % sum.den)) {
                ulk_diag_add(diag, ULK_SEV_ERROR, &loc,
                             "the waits before one word add up to more than the limit of %d s",
                             ULK_CMDLIST_MAX_WAIT_S);
                errors++;
            } else {
                pending = sum;
                if (!pending_line) pending_line = it->line;
            }
            continue;
        }
        ulk_ratio wait = pending;
        pending = ulk_ratio_make(0, 1);
        pending_line = 0;
        const ulk_command *c = mtab_find(&mt, it->mnemonic);
        if (!c) {
            const char *sug = ulk_suggest(it->mnemonic, mn, (size_t)d->n_commands);
            if (sug)
                ulk_diag_add(diag, ULK_SEV_ERROR, &loc, "unknown command '%.80s' (did you mean '%s'?)", it->mnemonic, sug);
            else
                ulk_diag_add(diag, ULK_SEV_ERROR, &loc, "unknown command '%.80s' in dictionary %s", it->mnemonic,
                             d->name ? d->name : "");
            errors++;
            continue;
        }
        int bad = 0;
        if (c->n_args > 64 || c->system_index < 0 || c->system_index >= d->n_systems) {
            ulk_diag_add(diag, ULK_SEV_ERROR, &loc, "command %s cannot be compiled: its dictionary entry is unusable",
                         c->mnemonic);
            errors++;
            continue;
        }
        ulk_argval vals[64];
        bad |= resolve_args(l, it, c, vals, diag);
        /* pack the arguments in dictionary order (the profile pads: zeros up to D, or to an octet) */
        size_t pos = 0;
        for (int j = 0; j < c->n_args && !bad; j++) {
            int w = c->args[j].bits;
            if (w < 1 || w > 64 || pos + (size_t)w > max_arg_bits) {
                char room[128];
                prof->arg_room(lk, room, sizeof room);
                ulk_diag_add(diag, ULK_SEV_ERROR, &loc, "%s: its arguments do not fit %s", c->mnemonic, room);
                bad = 1;
                break;
            }
            for (int b = 0; b < w; b++) abits[pos + b] = (uint8_t)((vals[j].raw >> (w - 1 - b)) & 1u);
            pos += (size_t)w;
        }
        if (bad) { errors++; continue; }
        if (errors) continue; /* no output will be made: only look for more errors */
        ulk_upload_cmd *uc = &u->cmds[u->n_cmds];
        uint64_t need = 0;
        if (ulk_wait_patterns(wait, prof->filler_rate(lk), &need) < 0) {
            ulk_diag_add(diag, ULK_SEV_ERROR, &loc, "the wait before %s is too long", c->mnemonic);
            errors++;
            continue;
        }
        uint64_t base = prof->gap_units(lk, u->n_cmds == 0 ? ULK_GAP_FIRST : ULK_GAP_BETWEEN);
        uc->idles_before = need > base ? need : base;
        uc->wait_before = wait;
        uc->wait_before_s = ulk_ratio_to_double(wait);
        uc->line = it->line;
        uc->critical = c->critical;
        uc->system_addr = d->systems[c->system_index].address;
        uc->opcode = c->opcode;
        ulk_unit_request req = {uc->system_addr, uc->opcode, abits, pos};
        int erc = prof->encode(enc, &req, uc, err, sizeof err);
        if (erc == ULK_ENOMEM) { status = ULK_ENOMEM; goto done; }
        u->n_cmds++; /* counted from here on, so that destroy frees what encode made */
        if (erc < 0) {
            ulk_diag_add(diag, ULK_SEV_ERROR, &loc, "%s: %s", c->mnemonic, err);
            errors++;
            continue;
        }
        if (fill_cmd(uc, d, c, vals) < 0) { status = ULK_ENOMEM; goto done; }
    }
    u->wait_after = pending;
    u->wait_after_s = ulk_ratio_to_double(pending);
    errors += set_postamble(u, prof, pending, l->file, pending_line, diag);
    if (l->n_commands == 0) {
        ulk_loc loc = {l->file, 0, 0, NULL};
        ulk_diag_add(diag, ULK_SEV_ERROR, &loc, "the command list has no commands; an empty upload is refused");
        errors++;
    }
    if (errors) status = ULK_EPARSE;
done:
    if (status == ULK_ENOMEM) ulk_fail(diag, ULK_ENOMEM, "%s: out of memory while compiling", l->file);
    ulk_free(mt.slot);
    ulk_free(mn);
    ulk_free(abits);
    if (prof) prof->encoder_destroy(enc);
    if (status < 0) {
        ulk_upload_destroy(u);
        return status;
    }
    *out = u;
    return 0;
}
