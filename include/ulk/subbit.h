/* ulk/subbit.h - the sub-bit stream of docs/spec/subbit.md section 3, produced in chunks.
 *
 * Why chunks: an upload of any length expands to I^P W_1 I^G ... W_N I^T, which can be far
 * larger than memory should hold; the modulator and the timing table pull it piece by
 * piece, so memory stays flat.
 */
#ifndef ULK_SUBBIT_H
#define ULK_SUBBIT_H

#include <stddef.h>
#include <stdint.h>
#include "ulk/upload.h"

#ifdef __cplusplus
extern "C" {
#endif

/* What one sub-bit belongs to (the timing-table columns). */
typedef struct {
    uint32_t word;      /* 1-based word number, 0 for idle */
    int32_t bit;        /* bit in the word, 0 = first sent, -1 for idle */
    int8_t bit_value;   /* 0/1, -1 for idle */
} ulk_subbit_info;

typedef struct ulk_stream ulk_stream;

/* Creates a reader over u's stream. u must outlive the stream. NULL when out of memory. */
ulk_stream *ulk_stream_create(const ulk_upload *u);
void ulk_stream_destroy(ulk_stream *s);
/* Total number of sub-bits L. */
uint64_t ulk_stream_length(const ulk_stream *s);
/* Reads up to max sub-bits (values 0/1) into subbits and, when info is not NULL, what each
 * belongs to. Returns the count read, 0 at the end. */
size_t ulk_stream_read(ulk_stream *s, uint8_t *subbits, ulk_subbit_info *info, size_t max);
/* Start time in seconds of word k (1-based): its first sub-bit index / R_s. */
double ulk_stream_word_start_s(const ulk_upload *u, size_t k);
/* The same for every word in turn, in constant time per word (ulk_stream_word_start_s walks
 * the upload from the start): zero a cursor, then each call returns the start of the next
 * word (1, 2, ...), or -1 after the last. */
typedef struct {
    size_t k;          /* words done */
    uint64_t patterns; /* filler units and unit bits before word k + 1 */
} ulk_start_cursor;
double ulk_stream_start_next(const ulk_upload *u, ulk_start_cursor *c);

#ifdef __cplusplus
}
#endif
#endif
