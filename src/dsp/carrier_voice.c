/* src/carrier_voice.c - the voice channel's audio from a sound file: peak normalisation,
 * linear-interpolation resampling on exact sample-index arithmetic, trapezoidal integration
 * into the FM phase term Delta * integral a(u) du (docs/spec/carrier.md section 1;
 * include/ulk/carrier.h, docs/carrier.md).
 *
 * Why two passes: the audio must have peak 1 before it is integrated, and the peak of a long
 * file is only known at its end; reading it twice keeps memory at one chunk.
 */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "ulk/carrier.h"
#include "ulk/sampleio.h"
#include "util.h"

#define VA_CHUNK 8192 /* input samples per read */

struct ulk_vaudio {
    char *path;
    int channel;
    ulk_reader *rd;
    float *buf;
    size_t buf_n, buf_pos;
    int eof;
    int err;
    char errmsg[512];
    double peak, fin_hz, scale; /* scale = 1 / peak */
    uint64_t frames;
    /* input position of output sample i: k + rem / den input samples (k counts the samples
     * consumed so far: s0 = a[k], s1 = a[k+1]) */
    int64_t step, den, rem;
    double s0, s1;
    /* integral */
    double dev_over_2fs; /* Delta / (2 fs) */
    double acc;          /* Delta * I_i in cycles, in [0, 1) */
    double a_prev;
    int started;
};

void ulk_vaudio_destroy(ulk_vaudio *v)
{
    if (!v) return;
    ulk_reader_close(v->rd);
    ulk_free(v->buf);
    ulk_free(v->path);
    ulk_free(v);
}

/* The next input sample, normalised; 0 after the end (silence). Sets v->err on a read error. */
static double next_input(ulk_vaudio *v)
{
    if (v->buf_pos >= v->buf_n) {
        if (v->eof || v->err) return 0.0;
        long got = ulk_reader_read(v->rd, v->buf, VA_CHUNK);
        if (got < 0) {
            v->err = (int)got;
            snprintf(v->errmsg, sizeof v->errmsg, "%s: %s", v->path, ulk_reader_error(v->rd));
            return 0.0;
        }
        if (got == 0) { v->eof = 1; return 0.0; }
        v->buf_n = (size_t)got;
        v->buf_pos = 0;
    }
    return (double)v->buf[v->buf_pos++] * v->scale;
}

static int open_reader(ulk_vaudio *v, ulk_diag *diag)
{
    ulk_reader_close(v->rd);
    v->rd = NULL;
    return ulk_reader_open(v->path, NULL, v->channel, &v->rd, diag);
}

int ulk_vaudio_create(const char *path, int channel, ulk_ratio fs, double dev_hz, ulk_vaudio **out,
                      ulk_diag *diag)
{
    if (out) *out = NULL;
    if (!path || !out) return ulk_fail(diag, ULK_EINVAL, "voice audio: no file given");
    if (fs.num <= 0 || fs.den <= 0 || !(dev_hz > 0))
        return ulk_fail(diag, ULK_EINVAL, "voice audio %s: the sample rate and deviation must be > 0", path);
    ulk_vaudio *v = ulk_calloc(1, sizeof *v);
    if (!v) return ulk_fail(diag, ULK_ENOMEM, "voice audio %s: out of memory", path);
    v->channel = channel;
    v->path = ulk_strdup(path);
    v->buf = ulk_malloc(VA_CHUNK * sizeof(float));
    if (!v->path || !v->buf) { ulk_vaudio_destroy(v); return ulk_fail(diag, ULK_ENOMEM, "voice audio %s: out of memory", path); }
    int rc = open_reader(v, diag);
    if (rc) { ulk_vaudio_destroy(v); return rc; }
    const ulk_sample_info *inf = ulk_reader_info(v->rd);
    v->fin_hz = inf->fs_hz;
    if (!(v->fin_hz > 0) || v->fin_hz != floor(v->fin_hz) || v->fin_hz > 4e9) {
        ulk_vaudio_destroy(v);
        return ulk_fail(diag, ULK_EINVAL, "voice audio %s: sample rate %g Hz is not a whole number of Hz", path,
                        inf->fs_hz);
    }
    /* pass 1: the peak (streamed) */
    double peak = 0;
    uint64_t frames = 0;
    long got;
    while ((got = ulk_reader_read(v->rd, v->buf, VA_CHUNK)) > 0) {
        for (long k = 0; k < got; k++) {
            double a = fabs((double)v->buf[k]);
            if (a > peak || a != a) peak = a; /* NaN poisons the peak: refused below */
        }
        frames += (uint64_t)got;
    }
    if (got < 0) {
        rc = ulk_fail(diag, (int)got, "voice audio %s: %s", path, ulk_reader_error(v->rd));
        ulk_vaudio_destroy(v);
        return rc;
    }
    if (!(peak > 0) || !isfinite(peak)) {
        ulk_vaudio_destroy(v);
        return ulk_fail(diag, ULK_EINVAL, "voice audio %s: %s (%llu samples): nothing to normalise to peak 1", path,
                        frames ? (isfinite(peak) ? "the file is silent" : "the file holds non-finite samples")
                               : "the file is empty",
                        (unsigned long long)frames);
    }
    v->peak = peak;
    v->frames = frames;
    v->scale = 1.0 / peak;
    /* pass 2 starts: reopen at the beginning */
    rc = open_reader(v, diag);
    if (rc) { ulk_vaudio_destroy(v); return rc; }
    ulk_ratio q;
    if (ulk_ratio_div(ulk_ratio_make((int64_t)v->fin_hz, 1), fs, &q) || q.num <= 0 || q.den <= 0) {
        ulk_vaudio_destroy(v);
        return ulk_fail(diag, ULK_ELIMIT, "voice audio %s: the rates %g Hz and the output's are too fine for exact "
                                          "arithmetic", path, v->fin_hz);
    }
    v->step = q.num;
    v->den = q.den;
    v->rem = 0;
    v->dev_over_2fs = dev_hz / (2.0 * ulk_ratio_to_double(fs));
    v->s0 = next_input(v);
    v->s1 = next_input(v);
    if (v->err) {
        rc = ulk_fail(diag, v->err, "voice audio %s", v->errmsg);
        ulk_vaudio_destroy(v);
        return rc;
    }
    *out = v;
    return 0;
}

long ulk_vaudio_run(ulk_vaudio *v, double *cycles, size_t n)
{
    if (!v || (!cycles && n)) return ULK_EINVAL;
    if (v->err) return v->err;
    for (size_t i = 0; i < n; i++) {
        /* a at this output sample: between a[k] and a[k+1] at rem / den */
        double a = v->s0 + ((double)v->rem / (double)v->den) * (v->s1 - v->s0);
        if (v->started) {
            v->acc += v->dev_over_2fs * (v->a_prev + a);
            v->acc -= floor(v->acc); /* whole cycles drop out of the phase */
        }
        v->started = 1;
        v->a_prev = a;
        cycles[i] = v->acc;
        /* advance by f_in / fs input samples: count + remainder, exact */
        int64_t r = v->rem + v->step; /* both < 2^62 */
        if (r >= v->den) {
            int64_t adv = r / v->den;
            r %= v->den;
            for (int64_t s = 0; s < adv; s++) {
                v->s0 = v->s1;
                v->s1 = next_input(v);
                if (v->eof && v->s0 == 0.0 && v->buf_pos >= v->buf_n) break; /* silence from here on */
            }
        }
        v->rem = r;
        if (v->err) return v->err;
    }
    return (long)n;
}

double ulk_vaudio_peak(const ulk_vaudio *v) { return v ? v->peak : 0.0; }
double ulk_vaudio_rate(const ulk_vaudio *v) { return v ? v->fin_hz : 0.0; }
uint64_t ulk_vaudio_frames(const ulk_vaudio *v) { return v ? v->frames : 0; }
const char *ulk_vaudio_error(const ulk_vaudio *v) { return v ? v->errmsg : NULL; }
