/* ulk/dict.h - the command dictionary: loading (YAML or JSON), the model, validation.
 *
 * Why: every later stage reads the dictionary, and a dictionary error found in flight is
 * a mission risk. Both formats load into one model; every element keeps the place it came
 * from (file:line:col and the node path, e.g. "commands[12].arguments[0].bits") so that
 * any later stage can point the operator at the line to fix.
 *
 * The model is plain read-only data owned by the ulk_dict object; strings stay valid
 * until ulk_dict_destroy().
 */
#ifndef ULK_DICT_H
#define ULK_DICT_H

#include <stdint.h>
#include "ulk/error.h"
#include "ulk/link.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef enum {
    ULK_ARG_UNSIGNED = 0,
    ULK_ARG_SIGNED,
    ULK_ARG_BOOLEAN,
    ULK_ARG_ENUM,
    ULK_ARG_FLOAT32
} ulk_arg_type;

typedef enum { ULK_CAL_NONE = 0, ULK_CAL_LINEAR, ULK_CAL_POLY } ulk_cal_kind;

typedef struct {
    char *label;
    int64_t code;
    ulk_loc loc;
} ulk_enum_value;

typedef struct {
    char *name;
    ulk_arg_type type;
    int bits;                  /* raw width */
    int has_range;
    double range_min, range_max; /* engineering range */
    int has_tolerance;         /* dictionary key 'tolerance' given (numeric types only) */
    double tolerance;          /* largest |encoded - requested| compile accepts, engineering units */
    char *units;               /* NULL when none */
    ulk_cal_kind cal;
    double cal_scale, cal_offset; /* eng = offset + scale * raw */
    double *poly;              /* eng = sum poly[k] raw^k */
    int n_poly;
    ulk_enum_value *values;    /* enum only */
    int n_values;
    char *default_text;        /* scalar text of the default, NULL when none */
    ulk_loc default_loc;
    ulk_loc loc;
    /* Set by the loader once the default has been converted (ulk_arg_from_text): */
    int has_default;
    uint64_t default_raw;      /* raw field of the default */
    double default_eng;        /* its engineering value */
    /* The numbers as written in the dictionary (decimal, or 0x/0o/0b integer text): bits are
     * decided on the exact rationals they denote, never on the doubles above, which serve
     * messages and the canonical form. NULL in a model built in code: then the shortest
     * decimal that reads back to the double is taken as written. */
    char *range_min_text, *range_max_text;
    char *cal_scale_text, *cal_offset_text;
    char **poly_text;          /* n_poly texts, or NULL */
} ulk_arg;

typedef struct {
    char *mnemonic;
    char *system;              /* system name */
    int system_index;          /* index into dict->systems, -1 when unknown */
    uint32_t opcode;
    int critical;
    char *description;
    ulk_arg *args;
    int n_args;
    int packed_bits;           /* sum of argument widths */
    ulk_loc loc;
} ulk_command;

typedef struct {
    char *name;
    uint32_t address;
    ulk_loc loc;
} ulk_system;

typedef struct ulk_dict {
    char *file;                /* path it was loaded from */
    char *name, *version;
    char sha256[65];           /* hex SHA-256 of the canonical content (see ulk_dict_canonical) */
    ulk_link link;
    ulk_system *systems;
    int n_systems;
    ulk_command *commands;
    int n_commands;
} ulk_dict;

/* Loads and validates path (".json" => JSON, anything else YAML; content sniffing may
 * override). Every finding goes to diag. Returns 0 with *out set when no errors were found
 * (warnings allowed); ULK_EIO when the file cannot be read; ULK_EPARSE when any error was
 * found (then *out is NULL). The caller frees *out with ulk_dict_destroy(). */
int ulk_dict_load(const char *path, ulk_dict **out, ulk_diag *diag);
/* The same from memory; name is used in locations. */
int ulk_dict_load_mem(const char *name, const char *text, size_t len, int is_json,
                      ulk_dict **out, ulk_diag *diag);
void ulk_dict_destroy(ulk_dict *d);

/* Lookups; NULL / -1 when absent (also when d or a name is NULL). Mnemonics are
 * case-sensitive. find_command and find_opcode are O(log n) (sorted indexes built at load). */
const ulk_command *ulk_dict_find_command(const ulk_dict *d, const char *mnemonic);
const ulk_command *ulk_dict_find_opcode(const ulk_dict *d, uint32_t system_address, uint32_t opcode);
int ulk_dict_find_system_addr(const ulk_dict *d, uint32_t address);
int ulk_dict_find_system(const ulk_dict *d, const char *name);           /* index by name */
const ulk_arg *ulk_command_find_arg(const ulk_command *c, const char *name);

/* The canonical content whose SHA-256 is d->sha256 (docs/dictionary.md): compact JSON of
 * the model with sorted keys, defaults applied, numbers normalised, so that a YAML and a
 * JSON file describing the same dictionary give the same text. Returns 0 with *out (NUL
 * terminated, caller frees with free()) and *len (may be NULL); ULK_ENOMEM; ULK_EINVAL when
 * d is NULL. */
int ulk_dict_canonical(const ulk_dict *d, char **out, size_t *len);

/* ---- argument values: engineering <-> raw, the rules of docs/spec/subbit.md section 2 ---- */

/* A value of one argument: the raw field (bits right-aligned, two's complement masked to
 * the width for signed) and its engineering value. For enums eng is the code; for float32
 * eng is the float value; for booleans 0/1. */
typedef struct {
    uint64_t raw;
    double eng;
} ulk_argval;

/* Converts an operator's value text (without unit; "21.5", "0x1F", "-3", "true", "OPEN",
 * "1.5e3") to raw and engineering values, applying range check, calibration (nearest raw,
 * ties to the smaller raw, refusal beyond half a step) and float32 rounding, all on the
 * exact rational the decimal text denotes (docs/dictionary.md section 4).
 * scale multiplies a numeric value first (SI prefix of a unit; 1.0 when none): a power of
 * ten is taken as exactly that, any other scale as the shortest decimal of the double.
 * Returns 0, or ULK_EPARSE with a one-line reason in err ("value 300 is outside the range
 * [0, 255]", "no label 'OPN' (did you mean 'OPEN'?)"). */
int ulk_arg_from_text(const ulk_arg *a, const char *text, double scale, ulk_argval *out,
                      char *err, size_t errlen);
/* Engineering value of a raw field (calibration applied, sign extended): the double
 * nearest to the exact value (ties to even), the same on every machine. */
double ulk_arg_raw_to_eng(const ulk_arg *a, uint64_t raw);
/* Label of an enum code, NULL when undefined. */
const char *ulk_arg_label(const ulk_arg *a, int64_t code);
/* Formats a raw value in engineering form as the command-list syntax takes it back
 * (label, true/false, or the shortest decimal that converts back to the same raw). */
void ulk_arg_format(const ulk_arg *a, uint64_t raw, char *buf, size_t len);

const char *ulk_arg_type_name(ulk_arg_type t);

#ifdef __cplusplus
}
#endif
#endif
