/* src/decode.c - a recovered word against the dictionary: accepted command or rejection.
 *
 * Order of the checks (the first failure is the reason): length, check field, vehicle
 * address, system address, opcode, then each argument in dictionary order (enum code
 * defined, value within range), then the padding bits after the packed arguments. The check
 * comes first so that a corrupted word is never interpreted further.
 */
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <string.h>

#include "ulk/decode.h"
#include "ulk/error.h"
#include "util.h"

const char *ulk_reject_name(ulk_reject_kind k)
{
    switch (k) {
    case ULK_REJ_NONE: return "none";
    case ULK_REJ_CHECK: return "check";
    case ULK_REJ_VEHICLE: return "vehicle";
    case ULK_REJ_SYSTEM: return "system";
    case ULK_REJ_OPCODE: return "opcode";
    case ULK_REJ_ENUM: return "enum";
    case ULK_REJ_RANGE: return "range";
    case ULK_REJ_PADDING: return "padding";
    case ULK_REJ_LENGTH: return "length";
    case ULK_REJ_ALIGNMENT: return "alignment";
    }
    return "?";
}

const char *ulk_security_verdict_str(ulk_security_verdict v)
{
    switch (v) {
    case ULK_SEC_ACCEPTED: return "accepted";
    case ULK_SEC_UNCHECKED: return "secured, not authenticated";
    case ULK_SEC_AUTH_FAILED: return "authentication failed";
    case ULK_SEC_UNKNOWN_SPI: return "unknown SPI";
    case ULK_SEC_REPLAYED: return "replayed";
    case ULK_SEC_OUTSIDE_WINDOW: return "outside the window";
    case ULK_SEC_MALFORMED: return "malformed security fields";
    }
    return "unknown security verdict";
}

const char *ulk_security_verdict_report(ulk_security_verdict v)
{
    return v == ULK_SEC_ACCEPTED ? "authenticated" : v == ULK_SEC_UNCHECKED ? "not authenticated" : ulk_security_verdict_str(v);
}

static uint64_t mask_of(int bits) { return bits >= 64 ? ~(uint64_t)0 : (((uint64_t)1 << bits) - 1); }

static int reject(ulk_decoded *r, ulk_reject_kind k, const char *fmt, ...) __attribute__((format(printf, 3, 4)));
static int reject(ulk_decoded *r, ulk_reject_kind k, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(r->reason, sizeof r->reason, fmt, ap);
    va_end(ap);
    r->status = ULK_WORD_REJECTED;
    r->reject = k;
    return 0;
}

/* The label of an enum raw field (codes compared within the field's width). */
static const char *enum_label(const ulk_arg *a, uint64_t raw)
{
    uint64_t m = mask_of(a->bits);
    for (int i = 0; i < a->n_values; i++)
        if (((uint64_t)a->values[i].code & m) == (raw & m)) return a->values[i].label;
    return NULL;
}

/* Within range, allowing half a raw step beyond the ends: the compiler sends the raw whose
 * calibrated value is nearest to the operator's, which may lie just outside the range. */
static int in_range(const ulk_arg *a, uint64_t raw, double eng)
{
    if (!a->has_range) return 1;
    if (isnan(eng)) return 0;
    if (eng >= a->range_min && eng <= a->range_max) return 1;
    if (a->type == ULK_ARG_FLOAT32 || a->cal == ULK_CAL_NONE) return 0;
    uint64_t m = mask_of(a->bits);
    double step = INFINITY;
    uint64_t nb[2] = {(raw + 1) & m, (raw - 1) & m};
    for (int i = 0; i < 2; i++) {
        double e2 = ulk_arg_raw_to_eng(a, nb[i]);
        if (fabs(e2 - eng) < step) step = fabs(e2 - eng);
    }
    if (!isfinite(step)) return 0;
    return eng >= a->range_min - step / 2 && eng <= a->range_max + step / 2;
}

int ulk_decode_word(const ulk_dict *dict, const ulk_word *w, ulk_decoded *r)
{
    if (!dict || !w || !r) return ULK_EINVAL;
    memset(r, 0, sizeof *r);
    const ulk_link *l = &dict->link;
    r->status = ULK_WORD_ACCEPTED;
    r->reject = ULK_REJ_NONE;
    if (w->n_bits != l->word_bits || w->n_bits < 1 || w->n_bits > ULK_MAX_WORD_BITS)
        return reject(r, ULK_REJ_LENGTH, "word of %d bit%s (the dictionary's words have %d)", w->n_bits,
                      w->n_bits == 1 ? "" : "s", l->word_bits);
    ulk_word_hex(w, r->hex);
    ulk_word_layout lay = ulk_word_layout_of(l);
    r->vehicle = (uint32_t)ulk_word_get(w, lay.vehicle_pos, l->vehicle_bits);
    r->system = (uint32_t)ulk_word_get(w, lay.system_pos, l->system_bits);
    r->opcode = (uint32_t)ulk_word_get(w, lay.opcode_pos, l->opcode_bits);
    if (!ulk_word_check_ok(l, w)) {
        uint32_t got = (uint32_t)ulk_word_get(w, lay.check_pos, l->check_bits);
        uint32_t want = ulk_check_compute(l->check, w->bits, l->word_bits - l->check_bits);
        int hw = (l->check_bits + 3) / 4; /* fixed width: 0x0A5C, not 0xA5C */
        return reject(r, ULK_REJ_CHECK, "check failed (%s field 0x%0*X, content gives 0x%0*X)", ulk_check_name(l->check),
                      hw, got, hw, want);
    }
    if (l->vehicle_bits > 0 && r->vehicle != l->vehicle_value)
        return reject(r, ULK_REJ_VEHICLE, "wrong vehicle address 0x%X (this dictionary's vehicle is 0x%X)", r->vehicle,
                      l->vehicle_value);
    int si = ulk_dict_find_system_addr(dict, r->system);
    if (si < 0) return reject(r, ULK_REJ_SYSTEM, "unknown system address 0x%X", r->system);
    const ulk_command *c = ulk_dict_find_opcode(dict, r->system, r->opcode);
    if (!c)
        return reject(r, ULK_REJ_OPCODE, "unknown opcode 0x%X for system %s", r->opcode, dict->systems[si].name);
    r->cmd = c;
    int pos = lay.args_pos, used = 0;
    for (int i = 0; i < c->n_args && i < ULK_DECODE_MAX_ARGS; i++) {
        const ulk_arg *a = &c->args[i];
        ulk_decoded_arg *da = &r->args[r->n_args++];
        da->arg = a;
        da->raw = ulk_word_get(w, pos, a->bits);
        pos += a->bits;
        used += a->bits;
        da->eng = ulk_arg_raw_to_eng(a, da->raw);
        ulk_arg_format(a, da->raw, da->text, sizeof da->text);
        if (a->type == ULK_ARG_ENUM) {
            da->label = enum_label(a, da->raw);
            if (!da->label)
                return reject(r, ULK_REJ_ENUM, "%s argument %s: undefined code %llu", c->mnemonic, a->name,
                              (unsigned long long)da->raw);
        }
        if (!in_range(a, da->raw, da->eng))
            return reject(r, ULK_REJ_RANGE, "%s argument %s: value %s outside the range [%g, %g]", c->mnemonic, a->name,
                          da->text, a->range_min, a->range_max);
    }
    for (int b = lay.args_pos + used; b < lay.args_pos + l->argument_bits; b++)
        if (w->bits[b])
            return reject(r, ULK_REJ_PADDING, "%s: argument field bit %d after the packed arguments is 1 (padding must be 0)",
                          c->mnemonic, b - lay.args_pos);
    return 0;
}

/* The value the raw field encodes: a calibrated or float32 value as the shortest decimal that
 * reads back as the same double (1.11 for raw 3 at a step of 0.37, where the command-list
 * text "1" compiles to the same raw); labels, booleans and uncalibrated integers as
 * ulk_arg_format writes them (integers exact beyond 2^53). */
void ulk_arg_encoded(const ulk_arg *a, uint64_t raw, char *buf, size_t len)
{
    if (a->type == ULK_ARG_ENUM || a->type == ULK_ARG_BOOLEAN || (a->type != ULK_ARG_FLOAT32 && a->cal == ULK_CAL_NONE)) {
        ulk_arg_format(a, raw, buf, len);
        return;
    }
    double eng = ulk_arg_raw_to_eng(a, raw);
    if (!isfinite(eng)) ulk_arg_format(a, raw, buf, len);
    else ulk_fmt_double(eng, buf, len);
}

int ulk_decoded_format(const ulk_decoded *r, char *buf, size_t len)
{
    if (!r || !r->cmd) return snprintf(buf, len, "%s", "");
    size_t n = (size_t)snprintf(buf, len, "%s", r->cmd->mnemonic);
    for (int i = 0; i < r->n_args; i++) {
        char v[64];
        ulk_arg_encoded(r->args[i].arg, r->args[i].raw, v, sizeof v);
        /* a unit is written straight after a decimal number, as the command list takes it */
        const ulk_arg *a = r->args[i].arg;
        int unit = a->units && a->units[0] && a->type != ULK_ARG_ENUM && a->type != ULK_ARG_BOOLEAN;
        n += (size_t)snprintf(n < len ? buf + n : NULL, n < len ? len - n : 0, " %s=%s%s", a->name, v,
                              unit ? a->units : "");
    }
    if (r->cmd->critical) n += (size_t)snprintf(n < len ? buf + n : NULL, n < len ? len - n : 0, " confirm");
    return (int)n;
}

int ulk_decode_demod_word(const ulk_dict *dict, const ulk_demod_word *w, ulk_decoded *r)
{
    if (!dict || !w || !r) return ULK_EINVAL;
    int rc = ulk_decode_word(dict, &w->word, r);
    if (rc || !w->ambiguous || r->reject == ULK_REJ_LENGTH) return rc;
    char hex[sizeof r->hex];
    memcpy(hex, r->hex, sizeof hex);
    memset(r, 0, sizeof *r);
    memcpy(r->hex, hex, sizeof hex);
    return reject(r, ULK_REJ_ALIGNMENT,
                  "ambiguous alignment: a one-sub-bit shift fits the word nearly as well "
                  "(bits as read: %s)", hex);
}
