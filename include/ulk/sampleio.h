/* ulk/sampleio.h - sample files in chunks: WAV (libsndfile), raw little-endian f32/s16
 * with a SigMF metadata file beside them.
 *
 * Why: captures can be hour-long; readers and writers move chunks, keep a sticky error,
 * and writers produce a temporary file that is renamed only when everything is written.
 */
#ifndef ULK_SAMPLEIO_H
#define ULK_SAMPLEIO_H

#include <stddef.h>
#include <stdint.h>
#include "ulk/error.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef enum { ULK_FMT_F32 = 0, ULK_FMT_S16 = 1 } ulk_sample_format;
typedef enum { ULK_CONTAINER_WAV = 0, ULK_CONTAINER_RAW = 1 } ulk_container;

/* What a writer records and a reader finds. */
typedef struct {
    double fs_hz;              /* sample rate */
    ulk_sample_format format;
    ulk_container container;
    int channels;              /* 1 = real; 2 = complex I/Q (writer: .cf32/.ci16 raw with SigMF
                                * cf32_le/ci16_le, or a two-channel WAV, left I, right Q; reader: a
                                * complex raw file is two channels, I = 0, Q = 1); readers mix
                                * nothing: see ulk_reader_open */
    /* SigMF annotations (writer: written when non-zero/non-NULL; reader: read when present) */
    double fsc_hz, bit_rate, subbit_rate;
    const char *description;   /* e.g. upload identity */
    const char *extra_json;    /* extra "ulk:" global fields as JSON object members, or NULL */
    /* Added by the modulator's engineer (additive): */
    const char *fs_exact;      /* exact rate as decimal text ("48000", "62.5"): writer records it as
                                * "ulk:sample_rate_exact" when not NULL; reader sets it from the
                                * metadata when present (owned by the reader), else NULL */
    int64_t n_frames;          /* reader: frames in the file; writer: ignored */
    /* Reader hint only: 1 when format (and, with channels 2, complex I/Q) was given by the
     * user. 0: the file name's extension (.f32, .s16, .cf32, .ci16) decides and format is
     * used only for a name that says nothing; 1: a contradicting extension is refused. */
    int format_given;
} ulk_sample_info;

typedef struct ulk_writer ulk_writer;
/* Opens path for writing (container from the extension: .wav, .f32, .s16, .cf32, .ci16,
 * .sigmf-data; the raw ones also write BASE.sigmf-meta; .cf32/.ci16 need info->channels 2,
 * .f32/.s16 need 1). Data goes to "<path>.tmp.XXXXXX" in the same
 * folder until ulk_writer_commit(). A path that exists and is not a regular file (a device
 * such as /dev/null or /dev/full, a pipe) is written directly, with info->container for its
 * type and no metadata file. One channel (real) or two (complex I/Q). Returns 0 and *out, or ULK_EINVAL (unknown extension,
 * extension contradicting info->format, a rate WAV cannot hold, bad extra_json), ULK_EIO
 * (cannot create: the reason, e.g. "Permission denied", names the path), ULK_ENOMEM. The
 * writer is freed by ulk_writer_commit() or ulk_writer_abort(). */
int ulk_writer_open(const char *path, const ulk_sample_info *info, ulk_writer **out, ulk_diag *diag);
/* Writes n frames (float, full scale 1.0): n samples when real, n interleaved I, Q pairs (2n
 * floats) when the writer was opened with two channels. s16 output rounds round(32767*x), halves away from
 * zero, and fails with ULK_ELIMIT if |x| > 1 would clip. Sticky errors: after one failure every
 * call returns it. */
int ulk_writer_write(ulk_writer *w, const float *x, size_t n);
/* Flushes, closes, writes the metadata, renames into place, frees w. Returns 0 or the sticky
 * error with its reason in diag (e.g. "/dev/full: write failed: No space left on device");
 * then nothing is left behind. NULL w gives ULK_EINVAL. */
int ulk_writer_commit(ulk_writer *w, ulk_diag *diag);
/* Abandons: closes and removes the temporary files. NULL does nothing. */
void ulk_writer_abort(ulk_writer *w);
/* The temporary file the data goes to before the commit (NULL when writing a device or pipe
 * directly, or for NULL w); owned by w. A program's signal handler may unlink() it, so that
 * an interrupted run leaves nothing behind. */
const char *ulk_writer_temp_path(const ulk_writer *w);
/* Records a SigMF annotation (core:sample_start, core:sample_count, core:label, core:comment;
 * label/comment may be NULL) in a raw file's metadata; WAV keeps none (returns 0). Returns 0,
 * ULK_EINVAL for NULL w, ULK_ENOMEM, or the sticky error. */
int ulk_writer_annotate(ulk_writer *w, uint64_t sample_start, uint64_t sample_count, const char *label,
                        const char *comment);

typedef struct ulk_reader ulk_reader;
/* Opens a capture. For raw files hint supplies rate and format (fs_hz 0 = take them from the
 * .sigmf-meta beside the file). channel: which channel of a multi-channel WAV (0-based);
 * -1 refuses multi-channel files with a message saying so.
 * Which reader: .f32/.s16/.cf32/.ci16/.sigmf-data are raw (complex ones: two channels); BASE.sigmf-meta opens BASE.sigmf-data (or
 * BASE.f32, BASE.s16); any other name is read by libsndfile (WAV, FLAC, ...), except that a
 * file libsndfile does not recognise, or a pipe, is read raw when hint gives a rate.
 * Returns 0 and *out (close with ulk_reader_close), or ULK_EIO (cannot open), ULK_EFORMAT
 * (not a sound file, empty, truncated, bad metadata), ULK_EINVAL (channel choice, missing
 * rate, contradicting hint), ULK_ENOMEM; the reason names the file in diag. */
int ulk_reader_open(const char *path, const ulk_sample_info *hint, int channel,
                    ulk_reader **out, ulk_diag *diag);
/* What the file holds (owned by r; NULL for NULL r). */
const ulk_sample_info *ulk_reader_info(const ulk_reader *r);
/* Total frames when known, else -1. */
int64_t ulk_reader_length(const ulk_reader *r);
/* Reads up to n samples as float (s16 data as v / 32767); returns count (0 at end) or a negative
 * status: ULK_EFORMAT when the file ends before its declared length, ULK_EIO on a read error
 * (reason from ulk_reader_error). Sticky. */
long ulk_reader_read(ulk_reader *r, float *x, size_t n);
/* Reads up to n frames of every channel, interleaved: n * info->channels floats into x (a
 * complex capture's I, Q pairs; a two-channel WAV's left, right), whatever channel the reader
 * was opened with: one pass over the file, where ulk_reader_read needs a reader a channel.
 * Values (s16 as v / 32767), count (frames), end and errors as ulk_reader_read; both move the
 * same position, by whole frames. */
long ulk_reader_read_frames(ulk_reader *r, float *x, size_t n);
/* The reason for the last failed ulk_reader_read ("" when none). Never NULL for non-NULL r. */
const char *ulk_reader_error(const ulk_reader *r);
/* Closes r; NULL does nothing. */
void ulk_reader_close(ulk_reader *r);

#ifdef __cplusplus
}
#endif
#endif
