/* src/verify.c - an upload against the units a receiver found (include/ulk/verify.h). */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "ulk/profile.h"
#include "ulk/verify.h"
#include "util.h"

static int same_word(const ulk_word *a, const ulk_word *b)
{
    return a->n_bits == b->n_bits && !memcmp(a->bits, b->bits, (size_t)a->n_bits);
}

/* The upload's command and a received word (or CLTU) are the same: the same bits; for
 * ccsds-tc the same command, APID, packet count, N(S) and argument raws (the frame and CLTU
 * are functions of these, checked when the upload was read and when the CLTU was decoded). */
static int same_unit(const ulk_upload_cmd *c, const ulk_verify_unit *w)
{
    if (!w->tc) return same_word(&c->word, &w->word);
    if (!w->cmd || strcmp(c->mnemonic, w->cmd->mnemonic) || c->system_addr != w->system ||
        c->seq_count != w->seq_count || c->frame_seq != w->frame_seq || c->n_args != w->n_args)
        return 0;
    for (int k = 0; k < c->n_args; k++)
        if (c->args[k].raw != w->raw[k]) return 0;
    return 1;
}

/* The upload command's identity as the report shows it: the word in hex, or (ccsds-tc) its
 * packet data field, read from the frame. */
void ulk_verify_sent_hex(const ulk_upload *u, const ulk_upload_cmd *c, char *buf, size_t len)
{
    ulk_profile_of(&u->link)->unit_hex(&u->link, c, buf, len);
}

typedef ulk_verify_op op;
#define OP_MATCH ULK_VERIFY_MATCH
#define OP_MISSING ULK_VERIFY_MISSING
#define OP_EXTRA ULK_VERIFY_EXTRA
#define OP_CHANGED ULK_VERIFY_CHANGED

/* Scheduled start of each upload unit in seconds from the first one's (the profile's
 * unit_start_times), and the capture's offset from the first accepted unit equal to an upload
 * unit. NULL when the profile gives no time preference, or out of memory. */
static double *schedule(const ulk_upload *u, const ulk_verify_unit *acc, size_t na, double *offset)
{
    size_t nu = u->n_cmds;
    const ulk_profile_ops *p = ulk_profile_of(&u->link);
    if (!nu || !p->unit_start_times) return NULL;
    double *t = p->unit_start_times(u);
    if (!t) return NULL;
    double t0 = t[0];
    for (size_t i = 0; i < nu; i++) t[i] -= t0;
    *offset = 0;
    for (size_t j = 0; j < na; j++)
        for (size_t i = 0; i < nu; i++)
            if (same_unit(&u->cmds[i], &acc[j])) { *offset = acc[j].start_s - t[i]; return t; }
    return t;
}

/* Edit script between the upload's words and the accepted words: equal words match (0),
 * the same command with other bits is "changed" (1), else missing/extra (1 each). DP when
 * the table is small enough, else a greedy walk. Among scripts of equal cost, the one whose
 * paired words lie nearest the upload's schedule wins (a tie-break only: the summed penalty
 * stays below one edit), so that when a word is received twice, once where it was sent and
 * once in place of another, the word received where it was sent is the one matched.
 * Returns the op count, ops malloc'd. */
static size_t align(const ulk_upload *u, const ulk_verify_unit *acc, size_t na, op **out)
{
    size_t nu = u->n_cmds, cap = nu + na + 1, n = 0;
    op *ops = ulk_malloc(cap * sizeof *ops);
    *out = ops;
    if (!ops) return 0;
    if ((nu + 1) * (na + 1) <= 20000000u) {
        unsigned *c = ulk_malloc((nu + 1) * (na + 1) * sizeof *c);
        double off = 0, *sched = (nu + 1) * (na + 1) <= 4000000u ? schedule(u, acc, na, &off) : NULL;
        float *pt = sched ? ulk_malloc((nu + 1) * (na + 1) * sizeof *pt) : NULL;
        if (c) {
#define C(i, j) c[(i) * (na + 1) + (j)]
#define P(i, j) (pt ? pt[(i) * (na + 1) + (j)] : 0.0f)
#define PEN(i, j) (pt ? (float)(fabs(acc[(j)-1].start_s - off - sched[(i)-1]) / \
                               (1.0 + fabs(acc[(j)-1].start_s - off - sched[(i)-1])) / (double)(nu + na + 1)) : 0.0f)
            for (size_t i = 0; i <= nu; i++) { C(i, 0) = (unsigned)i; if (pt) pt[i * (na + 1)] = 0; }
            for (size_t j = 0; j <= na; j++) { C(0, j) = (unsigned)j; if (pt) pt[j] = 0; }
            for (size_t i = 1; i <= nu; i++)
                for (size_t j = 1; j <= na; j++) {
                    unsigned best = C(i - 1, j) + 1;
                    float bp = P(i - 1, j);
                    if (C(i, j - 1) + 1 < best || (C(i, j - 1) + 1 == best && P(i, j - 1) < bp)) {
                        best = C(i, j - 1) + 1;
                        bp = P(i, j - 1);
                    }
                    unsigned dc = 0;
                    int diag = 0;
                    if (same_unit(&u->cmds[i - 1], &acc[j - 1])) { dc = C(i - 1, j - 1); diag = 1; }
                    else if (!strcmp(u->cmds[i - 1].mnemonic, acc[j - 1].cmd->mnemonic)) { dc = C(i - 1, j - 1) + 1; diag = 1; }
                    if (diag) {
                        float dp = P(i - 1, j - 1) + PEN(i, j);
                        if (dc < best || (dc == best && dp < bp)) { best = dc; bp = dp; }
                    }
                    C(i, j) = best;
                    if (pt) pt[i * (na + 1) + j] = bp;
                }
            size_t i = nu, j = na;
            while (i > 0 || j > 0) {
                if (i > 0 && j > 0) {
                    int eq = same_unit(&u->cmds[i - 1], &acc[j - 1]);
                    int sm = !strcmp(u->cmds[i - 1].mnemonic, acc[j - 1].cmd->mnemonic);
                    float dp = P(i - 1, j - 1) + PEN(i, j);
                    if (eq && C(i, j) == C(i - 1, j - 1) && dp == P(i, j)) { ops[n++] = (op){OP_MATCH, i - 1, j - 1}; i--; j--; continue; }
                    if (!eq && sm && C(i, j) == C(i - 1, j - 1) + 1 && dp == P(i, j)) { ops[n++] = (op){OP_CHANGED, i - 1, j - 1}; i--; j--; continue; }
                }
                if (i > 0 && C(i, j) == C(i - 1, j) + 1 && P(i - 1, j) == P(i, j)) { ops[n++] = (op){OP_MISSING, i - 1, 0}; i--; continue; }
                if (j > 0 && C(i, j) == C(i, j - 1) + 1 && P(i, j - 1) == P(i, j)) { ops[n++] = (op){OP_EXTRA, 0, j - 1}; j--; continue; }
                /* unreachable: every cell came from one of the moves above; keep the old walk */
                if (i > 0 && (j == 0 || C(i, j) == C(i - 1, j) + 1)) { ops[n++] = (op){OP_MISSING, i - 1, 0}; i--; continue; }
                ops[n++] = (op){OP_EXTRA, 0, j - 1};
                j--;
            }
#undef PEN
#undef P
#undef C
            ulk_free(c);
            ulk_free(pt);
            ulk_free(sched);
            for (size_t a = 0; a < n / 2; a++) { op t = ops[a]; ops[a] = ops[n - 1 - a]; ops[n - 1 - a] = t; }
            return n;
        }
        ulk_free(pt);
        ulk_free(sched);
    }
    /* greedy: walk both lists in order */
    size_t i = 0, j = 0;
    while (i < nu || j < na) {
        if (i < nu && j < na && same_unit(&u->cmds[i], &acc[j])) { ops[n++] = (op){OP_MATCH, i++, j++}; continue; }
        if (i < nu && j < na && !strcmp(u->cmds[i].mnemonic, acc[j].cmd->mnemonic)) { ops[n++] = (op){OP_CHANGED, i++, j++}; continue; }
        if (i < nu) ops[n++] = (op){OP_MISSING, i++, 0};
        else ops[n++] = (op){OP_EXTRA, 0, j++};
    }
    return n;
}


typedef struct {
    ulk_verify_unit *u;
    size_t n, cap;
} unit_list;

struct ulk_verify {
    const ulk_dict *dict;
    const ulk_upload *u;
    unit_list acc, rej;
    ulk_verify_op *ops;
    size_t n_ops;
    int compared;
    int have_est;
    ulk_rx_estimates est;  /* a copy: the event's pointer dies with the next pull */
};

int ulk_verify_create(const ulk_dict *dict, const ulk_upload *u, ulk_verify **out, ulk_diag *diag)
{
    *out = ulk_calloc(1, sizeof **out);
    if (!*out) return ulk_fail(diag, ULK_ENOMEM, "out of memory");
    (*out)->dict = dict;
    (*out)->u = u;
    return 0;
}

static ulk_verify_unit *list_add(unit_list *l)
{
    if (l->n == l->cap) {
        size_t cap = l->cap ? 2 * l->cap : 64;
        ulk_verify_unit *nu = ulk_realloc(l->u, cap * sizeof *nu);
        if (!nu) return NULL;
        l->u = nu;
        l->cap = cap;
    }
    ulk_verify_unit *w = &l->u[l->n++];
    memset(w, 0, sizeof *w);
    return w;
}

int ulk_verify_add(ulk_verify *v, const ulk_rx_event *ev)
{
    if (ev->kind == ULK_RX_ESTIMATES && ev->est) {
        v->est = *ev->est;
        v->have_est = 1;
        return 0;
    }
    if (ev->kind != ULK_RX_WORD && ev->kind != ULK_RX_CLTU) return 0;
    const ulk_decoded *d = ev->dec;
    int acc = d->status == ULK_WORD_ACCEPTED;
    ulk_verify_unit *w = list_add(acc ? &v->acc : &v->rej);
    if (!w) return ULK_ENOMEM;
    w->start_s = ev->dw.start_s;
    w->tc = ev->kind == ULK_RX_CLTU;
    w->accepted = acc;
    w->system = d->system;
    w->seq_count = ev->seq_count;
    w->frame_seq = ev->frame_seq;
    w->reject = d->reject;
    if (!w->tc) w->word = ev->dw.word;
    w->hex = ulk_strdup(ev->hex);
    if (acc) {
        char line[4096];
        ulk_decoded_format(d, line, sizeof line);
        w->cmd = d->cmd;
        w->n_args = d->n_args;
        w->text = ulk_strdup(line);
        w->raw = ulk_malloc((size_t)(d->n_args ? d->n_args : 1) * sizeof *w->raw);
        if (w->raw)
            for (int k = 0; k < d->n_args; k++) w->raw[k] = d->args[k].raw;
    } else {
        w->text = ulk_strdup(d->reason);
    }
    if (!w->hex || !w->text || (acc && !w->raw)) return ULK_ENOMEM;
    return 0;
}

int ulk_verify_compare(ulk_verify *v)
{
    ulk_free(v->ops);
    v->n_ops = align(v->u, v->acc.u, v->acc.n, &v->ops);
    v->compared = 1;
    return v->ops ? 0 : ULK_ENOMEM;
}

size_t ulk_verify_n_accepted(const ulk_verify *v) { return v->acc.n; }
const ulk_verify_unit *ulk_verify_accepted(const ulk_verify *v, size_t i) { return i < v->acc.n ? &v->acc.u[i] : NULL; }
size_t ulk_verify_n_rejected(const ulk_verify *v) { return v->rej.n; }
const ulk_verify_unit *ulk_verify_rejected(const ulk_verify *v, size_t i) { return i < v->rej.n ? &v->rej.u[i] : NULL; }
size_t ulk_verify_n_ops(const ulk_verify *v) { return v->n_ops; }
const ulk_rx_estimates *ulk_verify_estimates(const ulk_verify *v) { return v->have_est ? &v->est : NULL; }
const ulk_verify_op *ulk_verify_op_at(const ulk_verify *v, size_t i) { return i < v->n_ops ? &v->ops[i] : NULL; }

int ulk_verify_good(const ulk_verify *v)
{
    if (!v->compared) return 0;
    for (size_t k = 0; k < v->n_ops; k++)
        if (v->ops[k].kind != ULK_VERIFY_MATCH) return 0;
    return 1;
}

static void list_free(unit_list *l)
{
    for (size_t i = 0; i < l->n; i++) {
        ulk_free(l->u[i].raw);
        ulk_free(l->u[i].hex);
        ulk_free(l->u[i].text);
    }
    ulk_free(l->u);
}

void ulk_verify_destroy(ulk_verify *v)
{
    if (!v) return;
    list_free(&v->acc);
    list_free(&v->rej);
    ulk_free(v->ops);
    ulk_free(v);
}
