/* src/tc_decode.c - the ccsds-tc decoder: soft channel symbols from the shared front end ->
 * hard bits -> CLTUs (ccsds.c, both polarities) -> commands through the dictionary
 * (docs/spec/ccsds-tc.md section 4).
 */
#include <math.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <string.h>

#include "ulk/tc_decode.h"
#include "util.h"

struct ulk_tc_decoder {
    const ulk_dict *d;
    const ulk_ccsds_tc *tc;
    ulk_tc_unit_fn fn;
    void *user;
    int status;
    int finished;
    int nrzm;
    float prev;              /* previous soft symbol (nrz-m differential decoding) */
    int have_prev;
    uint8_t *bits, *inv;     /* hard bits as received and inverted, from absolute index base */
    double *t;               /* start time of each bit */
    size_t n, cap;
    uint64_t base;
    size_t from;             /* next search position (buffer index) */
    size_t n_units, n_accepted, n_ignored;
    int n_pre;               /* bits checked before a start sequence (0: no check) */
    uint16_t pre_pat;        /* what they must be: idle, or the tail's last octets */
    ulk_cltu_result res[2];
    ulk_tc_unit unit;
    ulk_sdls_rx *sec;        /* secured links: the verifier (not owned), NULL = no keys */
    ulk_sdls_rx_result sec_res;
    ulk_cltu_result plain;   /* a secured CLTU with its verified packet, for interpret() */
};

void ulk_tc_symbols(const ulk_link *tc_link, ulk_demod_symbols *out)
{
    memset(out, 0, sizeof *out);
    out->symbol_rate = tc_link->bit_rate; /* one symbol per channel bit: R_s = R */
    out->fsc = tc_link->fsc;
    out->waveform = tc_link->waveform;
    out->line_code = tc_link->line_code;
    out->has_pilot = 0;                   /* the profile has no pilot */
    out->amplitude = tc_link->amplitude;
}

int ulk_tc_decoder_create(const ulk_dict *d, ulk_tc_unit_fn on_unit, void *user, ulk_tc_decoder **out,
                          ulk_diag *diag)
{
    if (!out) return ULK_EINVAL;
    *out = NULL;
    if (!d || d->link.profile != ULK_PROFILE_CCSDS_TC)
        return ulk_fail(diag, ULK_EINVAL, "ccsds-tc decoder: the dictionary is not a ccsds-tc one");
    ulk_tc_decoder *t = ulk_calloc(1, sizeof *t);
    if (!t) return ulk_fail(diag, ULK_ENOMEM, "ccsds-tc decoder: out of memory");
    t->d = d;
    t->tc = &d->link.tc.frame;
    t->fn = on_unit;
    t->user = user;
    t->nrzm = d->link.line_code == ULK_LINE_NRZM;
    /* What precedes a real CLTU: the idle sequence (alternating bits from 0, so the octets
     * just before the start sequence are 0x55), or with no idle between CLTUs the previous
     * CLTU's tail, whose last two octets are C5 79. The acquisition sequence is idle too. */
    uint32_t io = d->link.tc.idle_octets, ao = d->link.tc.acquisition_octets;
    if (io >= 1 && ao >= 1) {
        t->n_pre = (io >= 2 && ao >= 2) ? 16 : 8;
        t->pre_pat = t->n_pre == 16 ? 0x5555 : 0x55;
    } else if (io == 0) {
        t->n_pre = 16;
        t->pre_pat = 0xC579;
    }
    *out = t;
    return 0;
}

void ulk_tc_decoder_destroy(ulk_tc_decoder *t)
{
    if (!t) return;
    ulk_free(t->bits);
    ulk_free(t->inv);
    ulk_free(t->t);
    ulk_free(t);
}

int ulk_tc_decoder_set_security(ulk_tc_decoder *t, ulk_sdls_rx *rx)
{
    if (!t) return ULK_EINVAL;
    t->sec = rx;
    return 0;
}

size_t ulk_tc_decoder_n_units(const ulk_tc_decoder *t) { return t ? t->n_units : 0; }
size_t ulk_tc_decoder_n_accepted(const ulk_tc_decoder *t) { return t ? t->n_accepted : 0; }
size_t ulk_tc_decoder_n_ignored(const ulk_tc_decoder *t) { return t ? t->n_ignored : 0; }

/* Whether a rejected CLTU is one: the bits before its start sequence (same polarity) must be
 * within two errors of what the transmitter sends there (idle or a tail; two, because under
 * nrz-m one level error flips two bits). A start sequence matched by chance -- in the noise
 * before or after a transmission, in the bits of a CLTU already rejected, with start_errors 1
 * about 17 in 65536 positions per polarity -- is preceded by random bits and passes this with
 * probability 137/65536 (16 bits) or 37/256 (8). An accepted CLTU needs no such evidence: its
 * codeblocks and FECF are far stronger. */
static int looks_sent(const ulk_tc_decoder *t, const uint8_t *bits, size_t start)
{
    if (t->n_pre == 0) return 1;
    if (start < (size_t)t->n_pre) return 0;
    int err = 0;
    for (int i = 0; i < t->n_pre; i++)
        err += bits[start - (size_t)t->n_pre + (size_t)i] != ((t->pre_pat >> (t->n_pre - 1 - i)) & 1u);
    return err <= 2;
}

static int reject(ulk_tc_unit *u, ulk_reject_kind k, const char *fmt, ...) __attribute__((format(printf, 3, 4)));
static int reject(ulk_tc_unit *u, ulk_reject_kind k, const char *fmt, ...)
{
    u->reject = k;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(u->reason, sizeof u->reason, fmt, ap);
    va_end(ap);
    u->status = ULK_TC_REJECTED;
    return 0;
}

/* Within range, allowing half a raw step beyond the ends (the compiler sends the raw nearest
 * to the operator's value, whose calibrated value may lie just outside the range). */
static int in_range(const ulk_arg *a, uint64_t raw, double eng)
{
    if (!a->has_range) return 1;
    if (isnan(eng)) return 0;
    if (eng >= a->range_min && eng <= a->range_max) return 1;
    if (a->type == ULK_ARG_FLOAT32 || a->cal == ULK_CAL_NONE) return 0;
    uint64_t m = a->bits >= 64 ? ~0ull : ((1ull << a->bits) - 1);
    double step = INFINITY;
    uint64_t nb[2] = {(raw + 1) & m, (raw - 1) & m};
    for (int i = 0; i < 2; i++) {
        double e2 = ulk_arg_raw_to_eng(a, nb[i]);
        if (fabs(e2 - eng) < step) step = fabs(e2 - eng);
    }
    return isfinite(step) && eng >= a->range_min - step / 2 && eng <= a->range_max + step / 2;
}

/* The packet's data field through the dictionary. */
static void interpret(const ulk_dict *d, const ulk_cltu_result *r, ulk_tc_unit *u)
{
    u->apid = r->packet_hdr.apid;
    u->seq_count = r->packet_hdr.seq_count;
    u->frame_seq = r->frame_hdr.seq_num;
    u->opcode = r->data[0];
    const ulk_command *c = ulk_dict_find_opcode(d, u->apid, u->opcode);
    if (!c) {
        int s = ulk_dict_find_system_addr(d, u->apid);
        if (s < 0) reject(u, ULK_REJ_SYSTEM, "unknown APID 0x%03X", u->apid);
        else reject(u, ULK_REJ_OPCODE, "unknown opcode %u of system %s (APID 0x%03X)", u->opcode, d->systems[s].name, u->apid);
        return;
    }
    u->cmd = c;
    size_t need = 1 + ((size_t)c->packed_bits + 7) / 8;
    if (r->n_data != need) {
        reject(u, ULK_REJ_LENGTH, "argument: %s takes a %zu-octet data field, the packet has %zu", c->mnemonic, need, r->n_data);
        return;
    }
    size_t pos = 8;
    for (int k = 0; k < c->n_args && k < ULK_TC_MAX_ARGS; k++) {
        const ulk_arg *a = &c->args[k];
        uint64_t raw = 0;
        for (int b = 0; b < a->bits; b++, pos++) raw = (raw << 1) | ((r->data[pos >> 3] >> (7 - (pos & 7))) & 1u);
        ulk_tc_arg *ta = &u->args[u->n_args++];
        ta->arg = a;
        ta->raw = raw;
        ta->eng = ulk_arg_raw_to_eng(a, raw);
        ta->label = a->type == ULK_ARG_ENUM ? ulk_arg_label(a, (int64_t)raw) : NULL;
        ulk_arg_format(a, raw, ta->text, sizeof ta->text);
        if (a->type == ULK_ARG_ENUM && !ta->label) {
            reject(u, ULK_REJ_ENUM, "argument: %s %s carries the undefined enum code %llu", c->mnemonic, a->name,
                   (unsigned long long)raw);
            return;
        }
        if (!in_range(a, raw, ta->eng)) {
            reject(u, ULK_REJ_RANGE, "argument: %s %s value %s is outside the range [%g, %g]", c->mnemonic, a->name, ta->text,
                   a->range_min, a->range_max);
            return;
        }
    }
    for (; pos < 8 * r->n_data; pos++)
        if ((r->data[pos >> 3] >> (7 - (pos & 7))) & 1u) {
            reject(u, ULK_REJ_PADDING, "argument: %s padding bits are not zero", c->mnemonic);
            return;
        }
    u->status = ULK_TC_ACCEPTED;
    u->reject = ULK_REJ_NONE;
}

/* A secured frame (verdict SECURED: FECF and headers sound): verify it, then read its packet
 * from the verified (decrypted) data field. Fills the unit's security fields; returns the
 * CLTU result to interpret, or NULL when the unit is rejected here. */
static const ulk_cltu_result *open_secured(ulk_tc_decoder *t, const ulk_cltu_result *r, ulk_tc_unit *u)
{
    const ulk_sdls_sa *sa = &t->d->link.tc.security;
    ulk_sdls_rx_result *sr = &t->sec_res;
    int rc = t->sec ? ulk_sdls_rx_frame(t->sec, t->tc, r->frame, r->n_frame, sr)
                    : ulk_sdls_frame_read(t->tc, sa, r->frame, r->n_frame, sr);
    u->secured = 1;
    u->frame_seq = r->frame_hdr.seq_num;
    if (rc < 0) {
        if (rc == ULK_ENOMEM) t->status = rc;
        reject(u, ULK_REJ_CHECK, "security processing failed (%s)", ulk_status_str(rc));
        return NULL;
    }
    u->sec_verdict = sr->verdict;
    u->spi = sr->spi;
    u->iv_counter = sr->counter;
    if (sr->verdict != ULK_SEC_ACCEPTED && !(sr->verdict == ULK_SEC_UNCHECKED && sr->n_data)) {
        reject(u, ULK_REJ_CHECK, "%s", sr->reason);
        return NULL;
    }
    ulk_spp_packet pk;
    ulk_spp_parse(sr->data, sr->n_data, &pk);
    ulk_cltu_result *p = &t->plain;
    p->frame_hdr = r->frame_hdr;
    p->packet_verdict = pk.verdict;
    p->packet_hdr = pk.hdr;
    if (pk.verdict != ULK_SPP_OK) {
        reject(u, ULK_REJ_CHECK, "%s", ulk_spp_verdict_str(pk.verdict));
        u->apid = pk.hdr.apid;
        return NULL;
    }
    memcpy(p->data, pk.data, pk.n_data);
    p->n_data = pk.n_data;
    for (size_t i = 0; i < p->n_data; i++) snprintf(u->data_hex + 2 * i, 3, "%02X", p->data[i]);
    return p;
}

static void report(ulk_tc_decoder *t, const ulk_cltu_result *r, int pol)
{
    ulk_tc_unit *u = &t->unit;
    if (r->verdict != ULK_CLTU_ACCEPTED && !looks_sent(t, pol > 0 ? t->bits : t->inv, r->start_bit)) {
        t->n_ignored++;
        return;
    }
    /* Only the header fields; args[] is filled up to n_args. */
    memset(u, 0, offsetof(ulk_tc_unit, args));
    u->data_hex[0] = 0;
    u->polarity = pol;
    u->start_s = t->t[r->start_bit];
    u->start_errors = r->start_errors;
    u->n_codeblocks = r->n_codeblocks;
    u->n_corrected = r->n_corrected;
    if (r->verdict == ULK_CLTU_ACCEPTED) {
        for (size_t i = 0; i < r->n_data; i++) snprintf(u->data_hex + 2 * i, 3, "%02X", r->data[i]);
        interpret(t->d, r, u);
    } else if (r->verdict == ULK_CLTU_SECURED) {
        const ulk_cltu_result *p = open_secured(t, r, u);
        if (p) interpret(t->d, p, u);
    } else {
        reject(u, ULK_REJ_CHECK, "%s", r->reason[0] ? r->reason : ulk_cltu_verdict_str(r->verdict));
        if (r->verdict >= ULK_CLTU_FRAME_HEADER) {
            u->apid = r->packet_hdr.apid;
            u->frame_seq = r->frame_hdr.seq_num;
        }
    }
    t->n_units++;
    if (u->status == ULK_TC_ACCEPTED) t->n_accepted++;
    if (t->fn) t->fn(u, t->user);
}

/* Decodes what the buffer allows; with flush, also CLTUs cut off by its end. */
static void process(ulk_tc_decoder *t, int flush)
{
    while (t->n >= t->from + ULK_CLTU_START_BITS) {
        int m = t->nrzm ? 1 : 2;
        for (int p = 0; p < m; p++)
            ulk_cltu_decode(t->tc, p ? t->inv : t->bits, t->n, t->from, &t->res[p]);
        int best = -1;
        for (int p = 0; p < m; p++)
            if (t->res[p].verdict != ULK_CLTU_NO_START &&
                (best < 0 || t->res[p].start_bit < t->res[best].start_bit))
                best = p;
        if (best < 0) {
            /* nothing here: everything before n - 15 has been searched */
            t->from = t->n - (ULK_CLTU_START_BITS - 1);
            break;
        }
        const ulk_cltu_result *r = &t->res[best];
        if (r->verdict == ULK_CLTU_TRUNCATED) {
            if (!flush) {
                t->from = r->start_bit;
                break;
            }
            report(t, r, best ? -1 : 1);
            t->from = r->start_bit + ULK_CLTU_START_BITS;
            continue;
        }
        report(t, r, best ? -1 : 1);
        t->from = r->end_bit > r->start_bit ? r->end_bit : r->start_bit + 1;
    }
    /* Drop what no CLTU can need any more (keeping the bits a start's check looks back at). */
    if (t->from > 16 && (t->from > t->cap / 2 || t->from == t->n)) {
        size_t k = t->from - 16;
        memmove(t->bits, t->bits + k, t->n - k);
        memmove(t->inv, t->inv + k, t->n - k);
        memmove(t->t, t->t + k, (t->n - k) * sizeof *t->t);
        t->n -= k;
        t->base += k;
        t->from -= k;
    }
}

int ulk_tc_decoder_push(ulk_tc_decoder *t, const double *t_s, const float *soft, size_t n)
{
    if (!t) return ULK_EINVAL;
    if (t->status) return t->status;
    if (t->finished) return ULK_EINVAL;
    if (n == 0) return 0;
    if (!t_s || !soft) return ULK_EINVAL;
    if (t->n + n > t->cap) {
        size_t nc = t->cap ? t->cap : 4 * ULK_CLTU_MAX_OCTETS * 8;
        while (nc < t->n + n) nc *= 2;
        uint8_t *b = ulk_realloc(t->bits, nc);
        if (b) t->bits = b;
        uint8_t *iv = b ? ulk_realloc(t->inv, nc) : NULL;
        if (iv) t->inv = iv;
        double *tt = iv ? ulk_realloc(t->t, nc * sizeof *tt) : NULL;
        if (!tt) return t->status = ULK_ENOMEM;
        t->t = tt;
        t->cap = nc;
    }
    for (size_t i = 0; i < n; i++) {
        uint8_t b;
        if (t->nrzm) {
            /* a 1 toggles the level: differential detection, free of the polarity */
            b = t->have_prev ? (uint8_t)((soft[i] < 0) != (t->prev < 0)) : 0;
            t->prev = soft[i];
            t->have_prev = 1;
        } else {
            b = soft[i] > 0;
        }
        t->bits[t->n] = b;
        t->inv[t->n] = (uint8_t)(1 - b);
        t->t[t->n] = t_s[i];
        t->n++;
    }
    process(t, 0);
    return 0;
}

int ulk_tc_decoder_finish(ulk_tc_decoder *t)
{
    if (!t) return ULK_EINVAL;
    if (t->status) return t->status;
    if (!t->finished) process(t, 1);
    t->finished = 1;
    return 0;
}

/* ---------------------------------------------------------------- front end + decoder */

typedef struct {
    ulk_tc_decoder *t;
    double ts[1024];
    float sv[1024];
    size_t n;
} soft_batch;

static void on_soft(double t_s, float soft, void *user)
{
    soft_batch *b = user;
    b->ts[b->n] = t_s;
    b->sv[b->n] = soft;
    if (++b->n == 1024) {
        ulk_tc_decoder_push(b->t, b->ts, b->sv, b->n);
        b->n = 0;
    }
}

int ulk_tc_decode_samples(const ulk_dict *d, const float *x, size_t n, double fs_hz, ulk_tc_unit_fn on_unit,
                          void *user, ulk_demod_estimates *est, ulk_diag *diag)
{
    if (!d || (!x && n)) return ulk_fail(diag, ULK_EINVAL, "ccsds-tc decode: nothing to decode");
    soft_batch *b = ulk_calloc(1, sizeof *b);
    if (!b) return ulk_fail(diag, ULK_ENOMEM, "ccsds-tc decode: out of memory");
    int rc = ulk_tc_decoder_create(d, on_unit, user, &b->t, diag);
    ulk_demod_symbols sym;
    ulk_tc_symbols(&d->link, &sym);
    ulk_demod_options opt = {NULL, on_soft, b, 0, 0};
    ulk_demod *dm = NULL;
    if (!rc) rc = ulk_demod_create_symbols(&sym, fs_hz, &opt, &dm, diag);
    for (size_t i = 0; !rc && i < n; i += 65536) rc = ulk_demod_push(dm, x + i, n - i < 65536 ? n - i : 65536);
    if (!rc) rc = ulk_demod_finish(dm);
    if (!rc && b->n) rc = ulk_tc_decoder_push(b->t, b->ts, b->sv, b->n);
    if (!rc) rc = ulk_tc_decoder_finish(b->t);
    if (!rc && est) ulk_demod_get_estimates(dm, est);
    if (rc == ULK_ENOMEM && ulk_diag_errors(diag) == 0) ulk_fail(diag, rc, "ccsds-tc decode: out of memory");
    ulk_demod_destroy(dm);
    ulk_tc_decoder_destroy(b->t);
    ulk_free(b);
    return rc;
}
