/* src/exact.h - exact numbers for everything that decides a bit (internal to libulk).
 *
 * Why: a calibrated value, a range check or a rounding tie must come out the same on every
 * machine. A double is exact but cannot hold 0.1; long double is 80 bits on x86-64 and 128
 * on aarch64, and a compiler may fuse a*b+c. So the numbers of a dictionary and of a command
 * list are kept as the exact rationals their decimal text denotes (GMP mpq/mpz), and a
 * binary value is made from a rational only at the end, by one correct rounding.
 */
#ifndef ULK_EXACT_H
#define ULK_EXACT_H

#include <gmp.h>
#include <stdint.h>

#include "ulk/dict.h"

/* Limit on the decimal exponent of a number kept exactly: the value and its last digit lie
 * within 10^-ULK_EXACT_MAX_EXP10 .. 10^ULK_EXACT_MAX_EXP10 (far beyond a double's range,
 * and small enough that no rational grows without bound). */
#define ULK_EXACT_MAX_EXP10 1100

/* The exact value of a number's text: [+-] then digits [. digits] [e|E [+-] digits]
 * (".5" and "5." too), or an integer 0x..., 0o..., 0b... (YAML core schema and JSON).
 * Returns 0; ULK_EPARSE when the text is not such a number; ULK_ELIMIT when the decimal
 * exponent of its first or last significant digit is beyond +-max_exp10 -- or, with clamp
 * set, that exponent is clamped to +-max_exp10 instead (a command-list value so far out
 * compares with every dictionary number as the clamped one does). *neg (may be NULL) is
 * set when a '-' was written (so that -0 keeps its sign). */
int ulk_q_set_text(mpq_t q, const char *text, long max_exp10, int clamp, int *neg);

/* The shortest decimal that reads back to v (what a person writing v meant), exactly. For
 * models built in code, which carry only doubles. v must be finite. */
void ulk_q_set_double_short(mpq_t q, double v);

/* q rounded once to nearest, ties to even, to a binary format with p significand bits
 * (24 or 53), smallest normal exponent emin and largest exponent emax (subnormals
 * included). Returns the value (exact in a double); on overflow returns +-HUGE_VAL and sets
 * *overflow (may be NULL). The sign of zero is positive. */
double ulk_q_round_binary(const mpq_t q, int p, int emin, int emax, int *overflow);
/* The correctly rounded double of q (+-HUGE_VAL beyond the largest finite double). */
double ulk_q_to_double(const mpq_t q);

/* 128-bit integers <-> mpz. */
void ulk_z_set_i128(mpz_t z, __int128 v);
/* 0 when z fits, -1 otherwise. */
int ulk_z_get_i128(const mpz_t z, __int128 *v);

/* A calibration as an integer polynomial over one denominator: f(r) = (sum c[k] r^k) / den,
 * den > 0 (a linear one is c[0] = offset, c[1] = scale). Built from the argument's texts
 * (the doubles when a model made in code has none). */
typedef struct {
    int n;          /* number of coefficients (2 for linear) */
    mpz_t c[16];
    mpz_t den;
} ulk_calq;

/* 0, or ULK_EPARSE / ULK_ELIMIT when a coefficient's text is not a number kept exactly.
 * Initialises k in every case; ulk_calq_clear() it afterwards. */
int ulk_calq_init(ulk_calq *k, const ulk_arg *a);
void ulk_calq_clear(ulk_calq *k);
/* The calibration of a, from a small per-thread cache (building it means reading decimal
 * texts, and the compiler converts many values of few arguments): NULL when a coefficient
 * is not an exact number. An entry is reused only when the argument's calibration (kind,
 * texts, doubles) is the same as when it was built; valid until the next call. */
const ulk_calq *ulk_calq_get(const ulk_arg *a);
/* out = sum c[k] r^k (the numerator of f(r)). */
void ulk_calq_num(const ulk_calq *k, mpz_t out, const mpz_t r);
/* out = f(r) exactly. */
void ulk_calq_value(const ulk_calq *k, mpq_t out, __int128 r);

/* The exact range bounds of a (texts, else the doubles); 0 or ULK_EPARSE / ULK_ELIMIT. */
int ulk_arg_range_q(const ulk_arg *a, mpq_t lo, mpq_t hi);
/* The same from a small per-thread cache (as ulk_calq_get): 0 with *lo and *hi valid until
 * the next call, or an error code. */
int ulk_arg_range_get(const ulk_arg *a, mpq_srcptr *lo, mpq_srcptr *hi);

#endif
