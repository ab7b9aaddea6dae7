/* src/profiles/subbit/subbit_dict.c - the sub-bit profile's dictionary section
 * (ulk_profile_ops "dictionary section"; docs/spec/subbit.md section 1, docs/spec/dictionary.md):
 * the link section (sub-bit patterns and their slips, framing, word fields, subcarrier and
 * pilot rates), its rules for system addresses, opcodes and argument widths, and its
 * canonical form. Read through the loader's helpers (src/dict/dict_build.h), so every finding
 * carries the loader's file:line:col and wording.
 */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "dict_build.h"
#include "profiles.h"

/* What link_parse learns as it goes (-1 / 0: broken or missing, so dependent rules are
 * skipped). */
typedef struct {
    int n_ok, patterns_ok, rb_ok, fsc_ok, amp_ok, check_ok;
    int vbits, sbits, obits, dbits;
    ulk_ratio amp_exact;
} sbx;

/* What the checks of systems and commands need, kept in the loader's state room (zeroed:
 * the link section was not read, no width is known). */
typedef struct {
    int parsed;
    int sbits, obits, dbits; /* -1: not valid */
} sb_state;
_Static_assert(sizeof(sb_state) <= ULK_DB_STATE_OCTETS, "the sub-bit dictionary state fits the loader's room");

static int width(ulk_dict_build *c, int which)
{
    const sb_state *st = ulk_db_state(c);
    if (!st->parsed) return -1;
    return which == 0 ? st->sbits : which == 1 ? st->obits : st->dbits;
}

static int get_pattern(ulk_dict_build *c, ulk_node *n, uint8_t *out, int *len)
{
    if (n && n->kind == ULK_NODE_SCALAR && !n->quoted) {
        ulk_db_err(c, n,
            "sub-bit pattern '%s' must be a quoted string: unquoted, %s reads it as %s; write %s: \"%.20s\"",
            ulk_db_key_name(n), ulk_db_is_json(c) ? "JSON" : "YAML", ulk_node_type_name(n), ulk_db_key_name(n), n->text);
        return 0;
    }
    const char *s;
    if (!ulk_db_str(c, n, &s)) return 0;
    size_t l = strlen(s);
    if (l < 1 || l > ULK_MAX_SUBBITS || strspn(s, "01") != l) {
        ulk_db_err(c, n, "sub-bit pattern '%s' must be 1 to %d characters 0 or 1, not \"%.40s\"", ulk_db_key_name(n),
            ULK_MAX_SUBBITS, s);
        return 0;
    }
    for (size_t i = 0; i < l; i++) out[i] = (uint8_t)(s[i] - '0');
    *len = (int)l;
    return 1;
}

static void fmt_pattern(const uint8_t *p, int n, char *buf)
{
    for (int i = 0; i < n; i++) buf[i] = (char)('0' + p[i]);
    buf[n] = 0;
}

static void build_subbits(ulk_dict_build *c, sbx *x, ulk_node *sb)
{
    ulk_link *L = ulk_db_link(c);
    static const char *const keys[] = {"zero", "one", "idle", NULL};
    if (!ulk_db_want_map(c, sb, "link.subbits")) return;
    ulk_db_check_keys(c, sb, "link.subbits", keys, keys);
    ulk_node *nz = ulk_node_get(sb, "zero"), *no = ulk_node_get(sb, "one"), *ni = ulk_node_get(sb, "idle");
    int lz = 0, lo = 0, li = 0;
    int okz = nz && get_pattern(c, nz, L->zero, &lz);
    int oko = no && get_pattern(c, no, L->one, &lo);
    int oki = ni && get_pattern(c, ni, L->idle, &li);
    if (!okz || !oko || !oki) return;
    if (lo != lz) { ulk_db_err(c, no, "pattern 'one' has %d sub-bits but 'zero' has %d: all patterns need the same length n", lo, lz); return; }
    if (li != lz) { ulk_db_err(c, ni, "pattern 'idle' has %d sub-bits but 'zero' has %d: all patterns need the same length n", li, lz); return; }
    int n = lz;
    L->n_subbits = n;
    x->n_ok = 1;
    char bz[20], bo[20], bi[20], bc[20];
    fmt_pattern(L->zero, n, bz);
    fmt_pattern(L->one, n, bo);
    fmt_pattern(L->idle, n, bi);
    uint8_t comp[ULK_MAX_SUBBITS];
    for (int i = 0; i < n; i++) comp[i] = (uint8_t)(1 - L->idle[i]);
    fmt_pattern(comp, n, bc);
    int bad = 0;
    int d = 0;
    for (int i = 0; i < n; i++) d += L->zero[i] != L->one[i];
    if (d == 0) { ulk_db_err(c, no, "patterns 'zero' and 'one' are equal (\"%s\"): bits could not be told apart", bz); bad = 1; }
    if (!memcmp(L->idle, L->zero, (size_t)n)) { ulk_db_err(c, ni, "idle pattern equals 'zero' (\"%s\")", bi); bad = 1; }
    if (!memcmp(L->idle, L->one, (size_t)n)) { ulk_db_err(c, ni, "idle pattern equals 'one' (\"%s\")", bi); bad = 1; }
    /* The decoder resolves the 180 degree ambiguity from the idle preamble: the inverted idle
     * must not look like idle, a zero or a one. */
    if (!memcmp(comp, L->idle, (size_t)n)) {
        ulk_db_err(c, ni, "the complement of the idle pattern (\"%s\") equals the idle pattern: a 180 degree phase ambiguity could not be resolved", bc);
        bad = 1;
    }
    if (!memcmp(comp, L->zero, (size_t)n)) {
        ulk_db_err(c, ni, "the complement of the idle pattern (\"%s\") equals 'zero': a 180 degree phase ambiguity could not be resolved", bc);
        bad = 1;
    }
    if (!memcmp(comp, L->one, (size_t)n)) {
        ulk_db_err(c, ni, "the complement of the idle pattern (\"%s\") equals 'one': a 180 degree phase ambiguity could not be resolved", bc);
        bad = 1;
    }
    if (d > 0 && d < n)
        ulk_db_warn(c, no, "Hamming distance between 'zero' (\"%s\") and 'one' (\"%s\") is %d, below n = %d: sensitivity loss %.2f dB (10*log10(n/d))",
             bz, bo, d, n, 10.0 * log10((double)n / d));
    x->patterns_ok = !bad;
}

/* One-sub-bit slips (review of the decoder): a receiver finds where groups of n sub-bits
 * start from the stream itself. When the idle pattern is unchanged by a one-sub-bit rotation
 * (00 under nrz-m, 0000 under nrz-l) a long wait says nothing about that; when a rotated idle
 * or a one-sub-bit shift across two bit patterns gives 'zero' or 'one', a slipped reading
 * looks like bits (nrz-m 01/10: every bit flips and an even-length word keeps its parity).
 * Sub-bits are compared as sent: under nrz-m a 1 is a transition, which the receiver
 * sees wherever groups start, so the same comparison holds. Warnings, not errors: the
 * decoder tests each word against the shifts and rejects ambiguous ones, but such a
 * profile relies on that test alone. */
static void shift_warnings(ulk_dict_build *c, ulk_node *sb)
{
    const ulk_link *L = ulk_db_link(c);
    const int n = L->n_subbits;
    if (n < 2) return;
    ulk_node *ni = ulk_node_get(sb, "idle"), *nz = ulk_node_get(sb, "zero");
    const uint8_t *pat[2] = {L->zero, L->one};
    static const char *const pname[2] = {"zero", "one"};
    const char *lc = L->line_code == ULK_LINE_NRZM ? "nrz-m" : "nrz-l";
    uint8_t w[ULK_MAX_SUBBITS];
    char bw[20], bi[20];
    fmt_pattern(L->idle, n, bi);
    for (int dir = 0; dir < 2; dir++) {
        for (int i = 0; i < n; i++) w[i] = L->idle[(i + (dir ? n - 1 : 1)) % n];
        if (!memcmp(w, L->idle, (size_t)n)) {
            ulk_db_warn(c, ni, "the idle stream (\"%s\" repeated) is unchanged by a one-sub-bit shift: it carries no group "
                        "alignment, so after a wait the decoder can place words only from their own sub-bits (%s); "
                        "words it cannot place are rejected as ambiguous",
                 bi, lc);
            break;
        }
        for (int p = 0; p < 2; p++)
            if (!memcmp(w, pat[p], (size_t)n)) {
                fmt_pattern(w, n, bw);
                ulk_db_warn(c, ni, "the idle stream (\"%s\" repeated) shifted by one sub-bit reads \"%s\", the '%s' pattern: "
                            "a slipped receiver sees bits in the idle",
                     bi, bw, pname[p]);
                dir = 2;
                break;
            }
    }
    /* Across two bit patterns X Y, a group one sub-bit late is X[1..n) Y[0], one early
     * X[n-1] Y[0..n-1). */
    for (int x = 0; x < 2; x++)
        for (int y = 0; y < 2; y++)
            for (int dir = 0; dir < 2; dir++) {
                if (dir == 0) { memcpy(w, pat[x] + 1, (size_t)n - 1); w[n - 1] = pat[y][0]; }
                else { w[0] = pat[x][n - 1]; memcpy(w + 1, pat[y], (size_t)n - 1); }
                for (int p = 0; p < 2; p++)
                    if (!memcmp(w, pat[p], (size_t)n)) {
                        char bx[20], by[20];
                        fmt_pattern(pat[x], n, bx);
                        fmt_pattern(pat[y], n, by);
                        fmt_pattern(w, n, bw);
                        ulk_db_warn(c, nz, "a one-sub-bit %s slip across '%s' then '%s' (\"%s%s\") reads \"%s\", the '%s' "
                                    "pattern (%s): a slipped word can decode to other valid bits, and a check field "
                                    "need not catch it; choose patterns whose one-sub-bit shifts match neither",
                             dir ? "early" : "late", pname[x], pname[y], bx, by, bw, pname[p], lc);
                        return;
                    }
            }
}

/* link.framing: idle patterns before the first word, between words and after the last. */
static void build_framing(ulk_dict_build *c, ulk_node *fr)
{
    ulk_link *L = ulk_db_link(c);
    static const char *const fk[] = {"preamble", "gap", "postamble", NULL};
    ulk_db_check_keys(c, fr, "link.framing", fk, fk);
    int64_t v;
    ulk_node *pn2 = ulk_node_get(fr, "preamble");
    /* 10^8 idle patterns is over a day at 1 kbit/s: beyond it is a typing error. */
    if (pn2 && ulk_db_int(c, pn2, 0, 100000000, &v, "preamble (idle patterns)")) {
        L->preamble = (int)v;
        if (v < 16)
            ulk_db_warn(c, pn2, "preamble of %lld idle patterns is short (P < 16): the decoder may not acquire the signal before the first word",
                 (long long)v);
    }
    ulk_node *gn = ulk_node_get(fr, "gap");
    if (gn && ulk_db_int(c, gn, 0, 100000000, &v, "gap (idle patterns)")) L->gap = (int)v;
    ulk_node *tn = ulk_node_get(fr, "postamble");
    if (tn && ulk_db_int(c, tn, 0, 100000000, &v, "postamble (idle patterns)")) L->postamble = (int)v;
}

/* link.word: the fields of a W-bit word and its check. */
static void build_word(ulk_dict_build *c, sbx *x, ulk_node *wn)
{
    ulk_link *L = ulk_db_link(c);
    if (!wn || !ulk_db_want_map(c, wn, "link.word")) return;
    static const char *const wk[] = {"vehicle_address", "system_address_bits", "opcode_bits",
                                     "argument_bits", "check", NULL};
    ulk_db_check_keys(c, wn, "link.word", wk, wk);
    int64_t v;
    ulk_node *va = ulk_node_get(wn, "vehicle_address");
    if (va && ulk_db_want_map(c, va, "link.word.vehicle_address")) {
        static const char *const vk[] = {"bits", "value", NULL};
        ulk_db_check_keys(c, va, "link.word.vehicle_address", vk, vk);
        ulk_node *vb = ulk_node_get(va, "bits"), *vv = ulk_node_get(va, "value");
        if (vb && ulk_db_int(c, vb, 0, 16, &v, "vehicle address width (bits)")) {
            L->vehicle_bits = (int)v;
            x->vbits = (int)v;
        }
        if (vv && ulk_db_int(c, vv, 0, INT64_MAX, &v, "vehicle address")) {
            if (x->vbits >= 0 && (uint64_t)v >= ((uint64_t)1 << x->vbits))
                ulk_db_err(c, vv, "vehicle address %lld does not fit in %d bits (must be below %llu)", (long long)v,
                    x->vbits, (unsigned long long)1 << x->vbits);
            else
                L->vehicle_value = (uint32_t)v;
        }
    }
    ulk_node *n2;
    if ((n2 = ulk_node_get(wn, "system_address_bits")) && ulk_db_int(c, n2, 0, 16, &v, "system_address_bits"))
        x->sbits = L->system_bits = (int)v;
    if ((n2 = ulk_node_get(wn, "opcode_bits")) && ulk_db_int(c, n2, 1, 16, &v, "opcode_bits"))
        x->obits = L->opcode_bits = (int)v;
    if ((n2 = ulk_node_get(wn, "argument_bits")) && ulk_db_int(c, n2, 0, 64, &v, "argument_bits"))
        x->dbits = L->argument_bits = (int)v;
    if ((n2 = ulk_node_get(wn, "check"))) {
        static const char *const ck[] = {"none", "parity-even", "parity-odd", "crc8", "crc16"};
        int k = ulk_db_choice(c, n2, ck, 5, "check");
        if (k >= 0) {
            L->check = (ulk_check_kind)k;
            L->check_bits = ulk_check_bits(L->check);
            x->check_ok = 1;
        }
    }
    if (x->vbits >= 0 && x->sbits >= 0 && x->obits >= 0 && x->dbits >= 0 && x->check_ok) {
        L->word_bits = L->vehicle_bits + L->system_bits + L->opcode_bits + L->argument_bits + L->check_bits;
        if (L->word_bits > ULK_MAX_WORD_BITS)
            ulk_db_err(c, wn, "word length W = %d bits exceeds %d", L->word_bits, ULK_MAX_WORD_BITS);
    }
}

void ulk_subbit_link_parse(ulk_dict_build *c, ulk_node *ln)
{
    ulk_link *L = ulk_db_link(c);
    static const char *const keys[] = {"profile", "bit_rate", "subbits", "line_code", "subcarrier",
                                       "pilot", "framing", "word", NULL};
    static const char *const req[] = {"profile", "bit_rate", "subbits", "subcarrier", "framing", "word", NULL};
    sbx x0 = {0}, *x = &x0;
    x->vbits = x->sbits = x->obits = x->dbits = -1;
    ulk_db_check_keys(c, ln, "link", keys, req);

    x->rb_ok = ulk_db_positive_ratio(c, ulk_node_get(ln, "bit_rate"), &L->bit_rate, "bit_rate");
    ulk_node *sb = ulk_node_get(ln, "subbits");
    if (sb) build_subbits(c, x, sb);

    ulk_node *lc = ulk_node_get(ln, "line_code");
    if (lc) {
        static const char *const codes[] = {"nrz-l", "nrz-m"};
        int k = ulk_db_choice(c, lc, codes, 2, "line code");
        if (k >= 0) L->line_code = (ulk_line_code)k;
    }
    if (sb && x->n_ok && x->patterns_ok) shift_warnings(c, sb);

    ulk_node *fsc_node = ulk_db_subcarrier(c, ulk_node_get(ln, "subcarrier"), &x->fsc_ok, &x->amp_ok, &x->amp_exact);

    ulk_node *pl = ulk_node_get(ln, "pilot");
    ulk_node *fp_node = NULL, *ap_node = NULL;
    int fp_ok = 0, ap_ok = 0;
    ulk_ratio ap_exact = {0, 1};
    if (pl && ulk_db_want_map(c, pl, "link.pilot")) {
        static const char *const pk[] = {"frequency", "amplitude", NULL};
        ulk_db_check_keys(c, pl, "link.pilot", pk, pk);
        L->has_pilot = 1;
        fp_node = ulk_node_get(pl, "frequency");
        ap_node = ulk_node_get(pl, "amplitude");
        fp_ok = ulk_db_positive_ratio(c, fp_node, &L->fp, "pilot frequency");
        ap_ok = ap_node && ulk_db_amplitude(c, ap_node, &L->pilot_amplitude, &ap_exact, "pilot amplitude");
    }

    ulk_node *fr = ulk_node_get(ln, "framing");
    if (fr && ulk_db_want_map(c, fr, "link.framing")) build_framing(c, fr);

    build_word(c, x, ulk_node_get(ln, "word"));

    /* Rates: f_sc = k * R_s with k whole >= 1; f_sc < 2 R_s warns. */
    if (x->rb_ok && x->n_ok && x->fsc_ok) {
        ulk_ratio rs, k;
        if (ulk_ratio_mul_int(L->bit_rate, L->n_subbits, &rs) || ulk_ratio_div(L->fsc, rs, &k)) {
            ulk_db_err(c, fsc_node, "subcarrier frequency and sub-bit rate are too large to relate exactly");
        } else {
            char bf[64], brs[64], bk[64];
            ulk_ratio_format(L->fsc, bf, sizeof bf);
            ulk_ratio_format(rs, brs, sizeof brs);
            ulk_ratio_format(k, bk, sizeof bk);
            if (k.den != 1 || k.num < 1)
                ulk_db_err(c, fsc_node, "subcarrier frequency %s Hz is not a whole multiple of the sub-bit rate R_s = n * R_b = %s Hz (f_sc / R_s = %s)",
                    bf, brs, bk);
            else if (k.num < 2)
                ulk_db_warn(c, fsc_node, "subcarrier frequency %s Hz is below 2 * R_s = 2 * %s Hz: the data sidebands overlap the carrier",
                     bf, brs);
        }
    }
    if (L->has_pilot && fp_ok && x->rb_ok && x->n_ok) {
        ulk_ratio rs, q1, q2;
        if (ulk_ratio_mul_int(L->bit_rate, L->n_subbits, &rs) || ulk_ratio_div(L->fp, rs, &q1) ||
            ulk_ratio_div(rs, L->fp, &q2)) {
            ulk_db_err(c, fp_node, "pilot frequency and sub-bit rate are too large to relate exactly");
        } else if (q1.den != 1 && q2.den != 1) {
            char bf[64], brs[64];
            ulk_ratio_format(L->fp, bf, sizeof bf);
            ulk_ratio_format(rs, brs, sizeof brs);
            ulk_db_err(c, fp_node, "pilot frequency %s Hz must be a whole multiple or a whole fraction of R_s = %s Hz", bf, brs);
        }
    }
    if (L->has_pilot && ap_ok && x->amp_ok) {
        /* A + A_p <= 1, exactly: a/b + c/d <= 1  <=>  a*d + c*b <= b*d. */
        __int128 lhs = (__int128)x->amp_exact.num * ap_exact.den + (__int128)ap_exact.num * x->amp_exact.den;
        __int128 rhs = (__int128)x->amp_exact.den * ap_exact.den;
        if (lhs > rhs)
            ulk_db_err(c, ap_node, "data amplitude %g plus pilot amplitude %g exceeds full scale 1 (A + A_p <= 1)",
                L->amplitude, L->pilot_amplitude);
    }
    sb_state *st = ulk_db_state(c);
    st->parsed = 1;
    st->sbits = x->sbits;
    st->obits = x->obits;
    st->dbits = x->dbits;
}

/* A system address: below 2^system_address_bits when that width is valid, and 16 bits. */
int ulk_subbit_system_address(ulk_dict_build *c, ulk_node *an, uint32_t *out)
{
    int64_t v;
    int sbits = width(c, 0);
    if (!ulk_db_int(c, an, 0, INT64_MAX, &v, "system address")) return 0;
    if (sbits >= 0 && (uint64_t)v >= ((uint64_t)1 << sbits))
        ulk_db_err(c, an, "system address %lld does not fit in system_address_bits = %d (must be below %llu)",
                   (long long)v, sbits, (unsigned long long)1 << sbits);
    else if (v > 0xFFFF)
        ulk_db_err(c, an, "system address %lld is wider than 16 bits", (long long)v);
    else {
        *out = (uint32_t)v;
        return 1;
    }
    return 0;
}

int ulk_subbit_opcode_fits(ulk_dict_build *c, ulk_node *n, int64_t v)
{
    int obits = width(c, 1);
    if (obits >= 0 && (uint64_t)v >= ((uint64_t)1 << obits)) {
        ulk_db_err(c, n, "opcode %lld does not fit in opcode_bits = %d (must be below %llu)", (long long)v, obits,
                   (unsigned long long)1 << obits);
        return 0;
    }
    return 1;
}

void ulk_subbit_command_check(ulk_dict_build *c, const ulk_command *k, ulk_node *args)
{
    int dbits = width(c, 2);
    if (dbits >= 0 && k->packed_bits > dbits)
        ulk_db_err(c, args, "arguments take %d bits, more than argument_bits D = %d", k->packed_bits, dbits);
}

static void put_pattern(ulk_dict_text *b, const uint8_t *p, int n)
{
    char t[20];
    fmt_pattern(p, n, t);
    ulk_text_json_str(b, t);
}

/* The link object of the canonical form (docs/dictionary.md section 6), keys in byte order. */
void ulk_subbit_link_canonical(ulk_dict_text *b, const ulk_link *L)
{
    ulk_text_puts(b, "{\"bit_rate\":");
    ulk_dt_ratio(b, L->bit_rate);
    ulk_text_puts(b, ",\"framing\":{");
    ulk_text_printf(b, "\"gap\":%d,\"postamble\":%d,\"preamble\":%d}", L->gap, L->postamble, L->preamble);
    ulk_text_puts(b, ",\"line_code\":");
    ulk_text_json_str(b, ulk_line_code_name(L->line_code));
    if (L->has_pilot) {
        ulk_text_puts(b, ",\"pilot\":{\"amplitude\":");
        ulk_dt_double(b, L->pilot_amplitude);
        ulk_text_puts(b, ",\"frequency\":");
        ulk_dt_ratio(b, L->fp);
        ulk_text_puts(b, "}");
    }
    ulk_text_puts(b, ",\"profile\":\"subbit\",\"subbits\":{\"idle\":");
    put_pattern(b, L->idle, L->n_subbits);
    ulk_text_puts(b, ",\"one\":");
    put_pattern(b, L->one, L->n_subbits);
    ulk_text_puts(b, ",\"zero\":");
    put_pattern(b, L->zero, L->n_subbits);
    ulk_text_puts(b, "},\"subcarrier\":{\"amplitude\":");
    ulk_dt_double(b, L->amplitude);
    ulk_text_puts(b, ",\"frequency\":");
    ulk_dt_ratio(b, L->fsc);
    ulk_text_puts(b, ",\"waveform\":");
    ulk_text_json_str(b, ulk_waveform_name(L->waveform));
    ulk_text_puts(b, "},\"word\":{\"argument_bits\":");
    ulk_text_printf(b, "%d,\"check\":", L->argument_bits);
    ulk_text_json_str(b, ulk_check_name(L->check));
    ulk_text_printf(b, ",\"opcode_bits\":%d,\"system_address_bits\":%d,\"vehicle_address\":{\"bits\":%d,\"value\":%u}}}",
              L->opcode_bits, L->system_bits, L->vehicle_bits, L->vehicle_value);
}

ulk_ratio ulk_subbit_info_bit_rate(const ulk_link *l) { return l->bit_rate; }
