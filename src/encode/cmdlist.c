/* src/cmdlist.c - the command-list parser: lines, tokens and columns, no dictionary.
 *
 * Why tolerant: an operator fixing a list wants every mistake at once, so a bad line is
 * reported and skipped, and the lines that parsed are kept for the compiler, which then
 * reports its own findings about them.
 */
#include <ctype.h>
#include <string.h>

#include "ulk/cmdlist.h"
#include "util.h"

static int is_blank(int c) { return c == ' ' || c == '\t' || c == '\r' || c == '\f' || c == '\v'; }

static int eq_nocase(const char *a, size_t n, const char *kw)
{
    size_t k = strlen(kw);
    if (n != k) return 0;
    for (size_t i = 0; i < n; i++)
        if (tolower((unsigned char)a[i]) != kw[i]) return 0;
    return 1;
}

typedef struct {
    const char *s;
    size_t n;
    int col;
} tok_t;

static void item_free(ulk_cl_item *it)
{
    ulk_free(it->mnemonic);
    for (int i = 0; i < it->n_args; i++) {
        ulk_free(it->args[i].name);
        ulk_free(it->args[i].value);
    }
    ulk_free(it->args);
}

void ulk_cmdlist_destroy(ulk_cmdlist *l)
{
    if (!l) return;
    for (size_t i = 0; i < l->n_items; i++) item_free(&l->items[i]);
    ulk_free(l->items);
    ulk_free(l->file);
    ulk_free(l);
}

static int err_at(ulk_diag *d, ulk_cmdlist *l, int line, int col, const char *fmt, ...)
    __attribute__((format(printf, 5, 6)));
static int err_at(ulk_diag *d, ulk_cmdlist *l, int line, int col, const char *fmt, ...)
{
    ulk_loc loc = {l->file, line, col, NULL};
    va_list ap;
    va_start(ap, fmt);
    ulk_diag_vadd(d, ULK_SEV_ERROR, &loc, fmt, ap);
    va_end(ap);
    l->n_errors++;
    return ULK_EPARSE;
}

/* Parses "2.5s", "250ms", "1min" (or number and unit as two tokens) into exact seconds. */
static int parse_wait(ulk_cmdlist *l, ulk_diag *d, int line, const tok_t *t, int nt, ulk_ratio *out)
{
    if (nt < 1) return err_at(d, l, line, t[-1].col, "'wait' needs a duration, e.g. 'wait 2.5s' (units s, ms or min)");
    char num[128], unit[16];
    size_t k = 0;
    const char *s = t[0].s;
    size_t n = t[0].n;
    while (k < n && (isdigit((unsigned char)s[k]) || s[k] == '.' || s[k] == '+' || s[k] == '-' ||
                     ((s[k] == 'e' || s[k] == 'E') && k + 1 < n &&
                      (isdigit((unsigned char)s[k + 1]) || s[k + 1] == '-' || s[k + 1] == '+'))))
        k++;
    if (k == 0 || k >= sizeof num)
        return err_at(d, l, line, t[0].col, "expected a duration after 'wait', found '%.*s' (e.g. 'wait 2.5s')",
                      (int)(n > 60 ? 60 : n), s);
    memcpy(num, s, k);
    num[k] = 0;
    const char *us;
    size_t un;
    int ucol;
    int used = 1;
    if (k < n) { us = s + k; un = n - k; ucol = t[0].col + (int)k; }
    else if (nt >= 2) { us = t[1].s; un = t[1].n; ucol = t[1].col; used = 2; }
    else return err_at(d, l, line, t[0].col + (int)k, "wait '%s' has no unit (write s, ms or min, e.g. 'wait %ss')", num, num);
    if (nt > used)
        return err_at(d, l, line, t[used].col, "unexpected '%.*s' after the wait (one wait per line)",
                      (int)(t[used].n > 60 ? 60 : t[used].n), t[used].s);
    if (un >= sizeof unit) un = sizeof unit - 1;
    memcpy(unit, us, un);
    unit[un] = 0;
    ulk_ratio v;
    int rc = ulk_ratio_parse(num, &v);
    if (rc == ULK_ELIMIT)
        return err_at(d, l, line, t[0].col, "wait '%s' has more digits than can be kept exactly", num);
    if (rc < 0) return err_at(d, l, line, t[0].col, "'%s' is not a duration", num);
    if (v.num < 0) return err_at(d, l, line, t[0].col, "a wait cannot be negative ('%s')", num);
    ulk_ratio f;
    if (!strcmp(unit, "s")) f = ulk_ratio_make(1, 1);
    else if (!strcmp(unit, "ms")) f = ulk_ratio_make(1, 1000);
    else if (!strcmp(unit, "min")) f = ulk_ratio_make(60, 1);
    else {
        static const char *const units[] = {"s", "ms", "min"};
        const char *sug = ulk_suggest(unit, units, 3);
        return err_at(d, l, line, ucol, "unknown wait unit '%s' (expected s, ms or min%s%s%s)", unit,
                      sug ? "; did you mean '" : "", sug ? sug : "", sug ? "'?" : "");
    }
    /* v * f, exactly */
    __int128 nn = (__int128)v.num * f.num, dd = (__int128)v.den * f.den;
    __int128 a = nn, b = dd;
    while (b) { __int128 tt = a % b; a = b; b = tt; }
    if (a) { nn /= a; dd /= a; }
    if (nn > (__int128)ULK_CMDLIST_MAX_WAIT_S * dd)
        return err_at(d, l, line, t[0].col, "wait %s%s is longer than the limit of %d s (24 h)", num, unit,
                      ULK_CMDLIST_MAX_WAIT_S);
    if (dd >= ((__int128)1 << 62))
        return err_at(d, l, line, t[0].col, "wait '%s' has more digits than can be kept exactly", num);
    out->num = (int64_t)nn;
    out->den = (int64_t)dd;
    return 0;
}

static int push_item(ulk_cmdlist *l, size_t *cap, const ulk_cl_item *it)
{
    if (l->n_items == *cap) {
        size_t nc = *cap ? *cap * 2 : 64;
        ulk_cl_item *ni = ulk_realloc(l->items, nc * sizeof *ni);
        if (!ni) return ULK_ENOMEM;
        l->items = ni;
        *cap = nc;
    }
    l->items[l->n_items++] = *it;
    return 0;
}

/* One line (without its newline). Returns 0, ULK_EPARSE (recorded) or ULK_ENOMEM. */
static int parse_line(ulk_cmdlist *l, size_t *cap, ulk_diag *d, int line, const char *s, size_t n)
{
    /* comment and NUL bytes */
    for (size_t i = 0; i < n; i++) {
        if (s[i] == '#') { n = i; break; }
        if (s[i] == 0) return err_at(d, l, line, (int)i + 1, "NUL byte in the command list");
    }
    tok_t tk[64];
    int nt = 0;
    size_t i = 0;
    while (i < n) {
        while (i < n && is_blank((unsigned char)s[i])) i++;
        if (i >= n) break;
        size_t st = i;
        while (i < n && !is_blank((unsigned char)s[i])) i++;
        if (nt == 64) return err_at(d, l, line, (int)st + 1, "more than 63 arguments on one line");
        tk[nt].s = s + st;
        tk[nt].n = i - st;
        tk[nt].col = (int)st + 1;
        nt++;
    }
    if (nt == 0) return 0;

    ulk_cl_item it;
    memset(&it, 0, sizeof it);
    it.line = line;
    it.col = tk[0].col;
    if (eq_nocase(tk[0].s, tk[0].n, "wait")) {
        it.kind = ULK_CL_WAIT;
        if (parse_wait(l, d, line, tk + 1, nt - 1, &it.wait_s) < 0) return ULK_EPARSE;
        return push_item(l, cap, &it);
    }
    if (memchr(tk[0].s, '=', tk[0].n))
        return err_at(d, l, line, tk[0].col,
                      "a line starts with a command mnemonic or 'wait', found '%.*s'",
                      (int)(tk[0].n > 60 ? 60 : tk[0].n), tk[0].s);
    if (eq_nocase(tk[0].s, tk[0].n, "confirm"))
        return err_at(d, l, line, tk[0].col, "'confirm' goes after the command it confirms, on the same line");
    it.kind = ULK_CL_COMMAND;
    int bad = 0;
    for (int k = 1; k < nt; k++) {
        const tok_t *t = &tk[k];
        if (eq_nocase(t->s, t->n, "confirm")) {
            if (it.confirm) { err_at(d, l, line, t->col, "'confirm' given twice"); bad = 1; }
            it.confirm = 1;
            continue;
        }
        const char *eq = memchr(t->s, '=', t->n);
        if (!eq) {
            int next_eq = k + 1 < nt && tk[k + 1].s[0] == '=';
            err_at(d, l, line, t->col, "expected name=value or 'confirm', found '%.*s'%s",
                   (int)(t->n > 60 ? 60 : t->n), t->s, next_eq ? " (write name=value without spaces)" : "");
            bad = 1;
            if (next_eq) k++;
            continue;
        }
        size_t nn = (size_t)(eq - t->s), vn = t->n - nn - 1;
        if (nn == 0) { err_at(d, l, line, t->col, "argument value '%.*s' has no name before '='", (int)(t->n > 60 ? 60 : t->n), t->s); bad = 1; continue; }
        if (vn == 0) {
            err_at(d, l, line, t->col, "argument '%.*s' has no value after '='%s", (int)(nn > 60 ? 60 : nn), t->s,
                   k + 1 < nt ? " (write name=value without spaces)" : "");
            bad = 1;
            continue;
        }
        if (bad) continue;
        ulk_cl_arg *na = ulk_realloc(it.args, (size_t)(it.n_args + 1) * sizeof *na);
        if (!na) { item_free(&it); return ULK_ENOMEM; }
        it.args = na;
        ulk_cl_arg *a = &it.args[it.n_args];
        memset(a, 0, sizeof *a);
        a->name = ulk_strndup(t->s, nn);
        a->value = ulk_strndup(eq + 1, vn);
        a->col = t->col;
        a->value_col = t->col + (int)nn + 1;
        it.n_args++;
        if (!a->name || !a->value) { item_free(&it); return ULK_ENOMEM; }
    }
    if (bad) { item_free(&it); return ULK_EPARSE; }
    it.mnemonic = ulk_strndup(tk[0].s, tk[0].n);
    if (!it.mnemonic) { item_free(&it); return ULK_ENOMEM; }
    if (push_item(l, cap, &it) < 0) { item_free(&it); return ULK_ENOMEM; }
    l->n_commands++;
    return 0;
}

/* Offset of the first byte that makes text not UTF-8 text (a NUL, a control character other
 * than tab, CR and LF, an invalid, overlong or surrogate sequence), or len when it is all text.
 * *why says what was found. Why check the whole file first: a binary file given as a command
 * list gets one line of refusal instead of a diagnostic per line of garbage. */
static size_t first_bad_byte(const unsigned char *t, size_t len, const char **why)
{
    size_t i = 0;
    while (i < len) {
        unsigned c = t[i];
        if (c < 0x80) {
            if (c == 0) { *why = "NUL byte"; return i; }
            if ((c < 0x20 && c != '\t' && c != '\r' && c != '\n') || c == 0x7F) { *why = "control character"; return i; }
            i++;
            continue;
        }
        size_t n = c >= 0xC2 && c <= 0xDF ? 2 : c >= 0xE0 && c <= 0xEF ? 3 : c >= 0xF0 && c <= 0xF4 ? 4 : 0;
        if (!n || i + n > len) { *why = "byte that is not UTF-8"; return i; }
        for (size_t k = 1; k < n; k++)
            if ((t[i + k] & 0xC0) != 0x80) { *why = "byte that is not UTF-8"; return i; }
        unsigned c1 = t[i + 1];
        if ((c == 0xE0 && c1 < 0xA0) || (c == 0xED && c1 >= 0xA0) || (c == 0xF0 && c1 < 0x90) || (c == 0xF4 && c1 >= 0x90)) {
            *why = "byte that is not UTF-8";
            return i;
        }
        i += n;
    }
    return len;
}

int ulk_cmdlist_parse(const char *name, const char *text, size_t len, ulk_cmdlist **out, ulk_diag *diag)
{
    *out = NULL;
    ulk_cmdlist *l = ulk_calloc(1, sizeof *l);
    if (!l) return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", name ? name : "command list");
    l->file = ulk_strdup(name ? name : "<list>");
    if (!l->file) { ulk_cmdlist_destroy(l); return ulk_fail(diag, ULK_ENOMEM, "out of memory"); }
    size_t cap = 0, pos = 0;
    int line = 0;
    /* a UTF-8 byte-order mark (editors on some systems write one) is not part of the text */
    if (len >= 3 && (unsigned char)text[0] == 0xEF && (unsigned char)text[1] == 0xBB && (unsigned char)text[2] == 0xBF)
        pos = 3;
    const char *why = NULL;
    size_t bad = first_bad_byte((const unsigned char *)text + pos, len - pos, &why) + pos;
    if (bad < len) {
        int bl = 1, bc = 1;
        for (size_t k = pos; k < bad; k++) {
            if (text[k] == '\n') { bl++; bc = 1; }
            else if (((unsigned char)text[k] & 0xC0) != 0x80) bc++;
        }
        err_at(diag, l, bl, bc, "%s 0x%02X at byte offset %zu: a command list is UTF-8 text; this looks like a binary "
                                "file or another encoding",
               why, (unsigned char)text[bad], bad);
        *out = l;
        return ULK_EPARSE;
    }
    while (pos < len) {
        line++;
        const char *nl = memchr(text + pos, '\n', len - pos);
        size_t end = nl ? (size_t)(nl - text) : len;
        size_t n = end - pos;
        if (n > 0 && text[pos + n - 1] == '\r') n--;
        if (n > ULK_CMDLIST_MAX_LINE) {
            err_at(diag, l, line, ULK_CMDLIST_MAX_LINE + 1, "line is longer than %d characters (%zu); split it",
                   ULK_CMDLIST_MAX_LINE, n);
        } else if (parse_line(l, &cap, diag, line, text + pos, n) == ULK_ENOMEM) {
            ulk_cmdlist_destroy(l);
            return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", name ? name : "command list");
        }
        pos = nl ? end + 1 : len;
    }
    *out = l;
    return l->n_errors ? ULK_EPARSE : 0;
}

int ulk_cmdlist_load(const char *path, ulk_cmdlist **out, ulk_diag *diag)
{
    *out = NULL;
    char *buf;
    size_t len;
    /* "-" is standard input (`ulk compile --dict D - -o U`) */
    int rc = ulk_read_file(path, ULK_CMDLIST_MAX_BYTES, &buf, &len, diag);
    if (rc < 0) return rc;
    rc = ulk_cmdlist_parse(strcmp(path, "-") ? path : "<stdin>", buf, len, out, diag);
    ulk_free(buf);
    return rc;
}
