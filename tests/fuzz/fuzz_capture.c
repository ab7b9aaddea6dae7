/* tests/fuzz/fuzz_capture.c - libFuzzer target: sample readers and the blind demodulator.
 *
 * The readers take paths, so the input is written to files in a private temporary folder
 * (created once per process). The first input byte chooses the way in:
 *   0: the rest is a .wav file (libsndfile's header parsing, channel choice, short files);
 *   1: the rest is raw little-endian f32 (.f32) with the rate given by the caller;
 *   2: the rest is raw .s16 plus a SigMF metadata file: the first two bytes (little-endian)
 *      give the metadata's length, it follows, then the samples;
 *   3: the rest is float32 samples pushed straight into ulk_demod_push in chunks whose sizes
 *      come from the input too.
 * Samples are then pushed through the demodulator of the demo dictionary's link, so NaN,
 * Inf, huge levels and odd lengths reach the DSP. Sample rates that the file claims outside
 * [37.5 kHz, 2 MHz] are not demodulated: the lower bound is the demodulator's documented
 * refusal, the upper keeps a fuzz run's memory bounded (absurd rates are covered by
 * tests/test_hostile.sh through the CLI). */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "ulk/demod.h"
#include "ulk/sampleio.h"
#include "fuzz_common.h"

#define MAX_SAMPLES 200000

static char dir[64];
static void cleanup(void)
{
    static const char *const names[] = {"c.wav", "c.f32", "c.s16", "c.sigmf-meta"};
    char p[128];
    for (size_t i = 0; i < sizeof names / sizeof names[0]; i++) {
        snprintf(p, sizeof p, "%s/%s", dir, names[i]);
        unlink(p);
    }
    rmdir(dir);
}
static void put(const char *name, const uint8_t *p, size_t n, char *path, size_t pathlen)
{
    snprintf(path, pathlen, "%s/%s", dir, name);
    FILE *f = fopen(path, "wb");
    if (!f) abort();
    if (n && fwrite(p, 1, n, f) != n) abort();
    if (fclose(f) != 0) abort();
}

static void demodulate(const ulk_dict *dict, double fs_hz, ulk_reader *r, const uint8_t *raw, size_t n_raw)
{
    if (!(fs_hz >= 37500.0 && fs_hz <= 2e6)) return;
    ulk_demod *d = NULL;
    ulk_diag *diag = ulk_diag_create();
    if (ulk_demod_create(&dict->link, fs_hz, NULL, &d, diag) == 0) {
        float buf[4096];
        if (r) {
            long got, total = 0;
            while (total < MAX_SAMPLES && (got = ulk_reader_read(r, buf, 4096)) > 0) {
                total += got;
                if (ulk_demod_push(d, buf, (size_t)got) < 0) break;
            }
        } else {
            size_t pos = 0;
            while (pos + 1 < n_raw) {
                size_t chunk = 1 + raw[pos++] * 16u;
                size_t avail = (n_raw - pos) / 4;
                if (chunk > avail) chunk = avail;
                if (chunk > 4096) chunk = 4096;
                if (chunk == 0) break;
                memcpy(buf, raw + pos, chunk * 4);
                pos += chunk * 4;
                if (ulk_demod_push(d, buf, chunk) < 0) break;
            }
        }
        ulk_demod_finish(d);
        ulk_demod_estimates e;
        ulk_demod_get_estimates(d, &e);
        for (size_t i = 0; i < ulk_demod_n_words(d); i++)
            if (!ulk_demod_word_at(d, i)) abort();
    }
    ulk_demod_destroy(d);
    ulk_diag_destroy(diag);
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const ulk_dict *dict = fuzz_demo_dict();
    if (!dir[0]) {
        const char *t = getenv("TMPDIR");
        snprintf(dir, sizeof dir, "%s/ulkfuzzXXXXXX", t && strlen(t) < 40 ? t : "/tmp");
        if (!mkdtemp(dir)) abort();
        atexit(cleanup);
    }
    if (size < 1) return 0;
    const int mode = data[0] & 3;
    data++, size--;
    char path[128], meta[128];
    ulk_reader *r = NULL;
    ulk_diag *diag = ulk_diag_create();
    ulk_sample_info hint;
    memset(&hint, 0, sizeof hint);
    int rc = -1;
    switch (mode) {
    case 0:
        put("c.wav", data, size, path, sizeof path);
        rc = ulk_reader_open(path, NULL, -1, &r, diag);
        break;
    case 1:
        put("c.f32", data, size, path, sizeof path);
        hint.fs_hz = 48000.0;
        hint.format = ULK_FMT_F32;
        hint.container = ULK_CONTAINER_RAW;
        rc = ulk_reader_open(path, &hint, -1, &r, diag);
        break;
    case 2: {
        if (size < 2) break;
        size_t mlen = data[0] | (size_t)data[1] << 8;
        data += 2, size -= 2;
        if (mlen > size) mlen = size;
        put("c.sigmf-meta", data, mlen, meta, sizeof meta);
        put("c.s16", data + mlen, size - mlen, path, sizeof path);
        rc = ulk_reader_open(path, NULL, 0, &r, diag);
        unlink(meta);
        break;
    }
    case 3:
        demodulate(dict, 48000.0, NULL, data, size);
        break;
    }
    if (rc == 0) {
        if (!r) abort();
        const ulk_sample_info *info = ulk_reader_info(r);
        demodulate(dict, info->fs_hz, r, NULL, 0);
        ulk_reader_close(r);
    } else if (r) {
        abort();
    }
    ulk_diag_destroy(diag);
    return 0;
}
