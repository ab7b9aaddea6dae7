/* tests/test_sampleio.c - sample files: WAV and raw + SigMF written and read back, the 16-bit
 * rounding rule, clipping, hostile inputs (empty, truncated, broken metadata, multi-channel),
 * and allocation failures that must end cleanly with nothing left behind. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <cjson/cJSON.h>
#include <dirent.h>
#include <math.h>
#include <sndfile.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "ulk/sampleio.h"
#include "util.h"

static char g_dir[64];

static int setup(void **st)
{
    (void)st;
    snprintf(g_dir, sizeof g_dir, "/tmp/ulk-sio-XXXXXX");
    return mkdtemp(g_dir) ? 0 : -1;
}

static int count_entries(void)
{
    DIR *dp = opendir(g_dir);
    int n = 0;
    struct dirent *e;
    while (dp && (e = readdir(dp)))
        if (strcmp(e->d_name, ".") && strcmp(e->d_name, "..")) n++;
    if (dp) closedir(dp);
    return n;
}

static void clean(void)
{
    DIR *dp = opendir(g_dir);
    struct dirent *e;
    char p[512];
    while (dp && (e = readdir(dp))) {
        if (!strcmp(e->d_name, ".") || !strcmp(e->d_name, "..")) continue;
        snprintf(p, sizeof p, "%s/%s", g_dir, e->d_name);
        unlink(p);
    }
    if (dp) closedir(dp);
}

static int teardown(void **st)
{
    (void)st;
    clean();
    rmdir(g_dir);
    return 0;
}

static const char *path_of(const char *name)
{
    static char p[4][512];
    static int k;
    k = (k + 1) % 4;
    snprintf(p[k], sizeof p[k], "%s/%s", g_dir, name);
    return p[k];
}

static void put_file(const char *name, const void *data, size_t n)
{
    FILE *fp = fopen(path_of(name), "wb");
    assert_non_null(fp);
    if (n) assert_int_equal(fwrite(data, 1, n, fp), n);
    fclose(fp);
}

static int write_samples(const char *path, ulk_sample_format fmt, double fs, const float *x, size_t n,
                         const char *extra, ulk_diag *d)
{
    ulk_sample_info info = {0};
    info.fs_hz = fs;
    info.format = fmt;
    info.channels = 1;
    info.fsc_hz = 8000;
    info.bit_rate = 62.5;
    info.subbit_rate = 250;
    info.description = "test capture of the fictional bench receiver";
    info.fs_exact = "44100";
    info.extra_json = extra;
    ulk_writer *w = NULL;
    int rc = ulk_writer_open(path, &info, &w, d);
    if (rc) return rc;
    for (size_t k = 0; k < n; k += 1000) {
        size_t m = n - k < 1000 ? n - k : 1000;
        if ((rc = ulk_writer_write(w, x + k, m)) < 0) break;
    }
    return ulk_writer_commit(w, d);
}

static float *read_all(const char *path, const ulk_sample_info *hint, int channel, size_t chunk, size_t *n, ulk_diag *d)
{
    ulk_reader *r = NULL;
    int rc = ulk_reader_open(path, hint, channel, &r, d);
    if (rc) { ulk_diag_print(d, stderr); fail_msg("%s: open %d", path, rc); }
    size_t cap = 1024, got = 0;
    float *x = malloc(cap * sizeof(float));
    long m;
    for (;;) {
        if (got + chunk > cap) { cap = 2 * (got + chunk); x = realloc(x, cap * sizeof(float)); }
        m = ulk_reader_read(r, x + got, chunk);
        if (m <= 0) break;
        got += (size_t)m;
    }
    assert_int_equal(m, 0);
    ulk_reader_close(r);
    *n = got;
    return x;
}

static float *test_signal(size_t n)
{
    float *x = malloc(n * sizeof(float));
    for (size_t i = 0; i < n; i++) x[i] = (float)(0.9 * sin(0.01 * (double)i) * cos(0.0007 * (double)i));
    x[0] = 1.0f;
    x[1] = -1.0f;
    x[2] = 0.5f;
    x[3] = -0.5f;
    x[4] = 0.0f;
    return x;
}

/* ---- round trips ---- */

typedef struct {
    const char *name;
    ulk_sample_format fmt;
    size_t chunk;
} rt_row;

static void test_round_trip(void **st)
{
    (void)st;
    static const rt_row rows[] = {
        {"rt.wav", ULK_FMT_F32, 4096}, {"rt16.wav", ULK_FMT_S16, 7},
        {"rt.f32", ULK_FMT_F32, 1},    {"rt.s16", ULK_FMT_S16, 5000},
    };
    const size_t n = 12345;
    float *x = test_signal(n);
    for (size_t r = 0; r < 4; r++) {
        ulk_diag *d = ulk_diag_create();
        const char *p = path_of(rows[r].name);
        assert_int_equal(write_samples(p, rows[r].fmt, 44100, x, n, NULL, d), 0);
        size_t m;
        float *y = read_all(p, NULL, -1, rows[r].chunk, &m, d);
        assert_int_equal(m, n);
        for (size_t i = 0; i < n; i++) {
            float want = x[i];
            if (rows[r].fmt == ULK_FMT_S16) {
                double v = 32767.0 * (double)x[i];
                want = (float)((v >= 0 ? floor(v + 0.5) : -floor(-v + 0.5)) / 32767.0);
            }
            if (y[i] != want) fail_msg("%s: sample %zu reads %.9g, want %.9g", rows[r].name, i, y[i], want);
        }
        free(y);
        ulk_diag_destroy(d);
    }
    free(x);
    clean();
}

/* 16-bit: round(32767 x), halves away from zero (docs/spec/subbit.md section 4). In [-1, 1]
 * only x = +-0.5 lands exactly on a half (32767 is odd); truncation would give 16383. */
static void test_s16_rounding(void **st)
{
    (void)st;
    static const struct { float x; int16_t want; } rows[] = {
        {1.0f, 32767}, {-1.0f, -32767}, {0.5f, 16384}, {-0.5f, -16384}, {0.25f, 8192},
        {0.75f, 24575}, {0.0f, 0}, {1.00001f, 32767}, {1.0f / 32767.0f, 1},
    };
    const size_t n = sizeof rows / sizeof rows[0];
    float x[16];
    for (size_t i = 0; i < n; i++) x[i] = rows[i].x;
    ulk_diag *d = ulk_diag_create();
    assert_int_equal(write_samples(path_of("r.s16"), ULK_FMT_S16, 8000, x, n, NULL, d), 0);
    FILE *fp = fopen(path_of("r.s16"), "rb");
    uint8_t b[64];
    assert_int_equal(fread(b, 1, sizeof b, fp), 2 * n);
    fclose(fp);
    for (size_t i = 0; i < n; i++) {
        int16_t v = (int16_t)(uint16_t)(b[2 * i] | (b[2 * i + 1] << 8)); /* little-endian on disk */
        if (v != rows[i].want) fail_msg("x = %.9g: %d, want %d", rows[i].x, v, rows[i].want);
    }
    ulk_diag_destroy(d);
    clean();
}

static void test_s16_clip_is_refused(void **st)
{
    (void)st;
    static const char *names[] = {"clip.s16", "clip.wav"};
    float x[3] = {0.1f, 1.0001f, 0.2f}; /* 32767 * 1.0001 = 32770.3: does not fit */
    for (int k = 0; k < 2; k++) {
        ulk_sample_info info = {.fs_hz = 8000, .format = ULK_FMT_S16, .channels = 1};
        ulk_writer *w = NULL;
        ulk_diag *d = ulk_diag_create();
        assert_int_equal(ulk_writer_open(path_of(names[k]), &info, &w, d), 0);
        assert_int_equal(ulk_writer_write(w, x, 3), ULK_ELIMIT);
        assert_int_equal(ulk_writer_write(w, x, 1), ULK_ELIMIT); /* sticky */
        assert_int_equal(ulk_writer_commit(w, d), ULK_ELIMIT);
        const ulk_finding *e = ulk_diag_first_error(d);
        assert_non_null(strstr(e->msg, "clip"));
        assert_non_null(strstr(e->msg, names[k]));
        assert_int_equal(count_entries(), 0);
        ulk_diag_destroy(d);
    }
}

/* ---- SigMF ---- */

static void test_sigmf_metadata(void **st)
{
    (void)st;
    float x[100];
    for (int i = 0; i < 100; i++) x[i] = (float)i / 100.0f;
    ulk_diag *d = ulk_diag_create();
    assert_int_equal(write_samples(path_of("m.f32"), ULK_FMT_F32, 44100, x, 100,
                                   "\"ulk:upload\": {\"words\": 3, \"source\": \"pass-7.cmd\"}", d), 0);
    /* the metadata file as any SigMF reader sees it (SigMF v1.0.0 core namespace) */
    char *text;
    size_t len;
    assert_int_equal(ulk_read_file(path_of("m.sigmf-meta"), 1 << 20, &text, &len, d), 0);
    cJSON *root = cJSON_Parse(text);
    ulk_free(text);
    assert_non_null(root);
    cJSON *g = cJSON_GetObjectItem(root, "global");
    assert_string_equal(cJSON_GetObjectItem(g, "core:datatype")->valuestring, "rf32_le");
    assert_string_equal(cJSON_GetObjectItem(g, "core:version")->valuestring, "1.0.0");
    assert_true(cJSON_GetObjectItem(g, "core:sample_rate")->valuedouble == 44100.0);
    assert_string_equal(cJSON_GetObjectItem(g, "ulk:sample_rate_exact")->valuestring, "44100");
    assert_true(cJSON_GetObjectItem(g, "ulk:subcarrier_hz")->valuedouble == 8000.0);
    assert_true(cJSON_GetObjectItem(g, "ulk:bit_rate")->valuedouble == 62.5);
    assert_true(cJSON_GetObjectItem(g, "ulk:subbit_rate")->valuedouble == 250.0);
    assert_int_equal(cJSON_GetObjectItem(cJSON_GetObjectItem(g, "ulk:upload"), "words")->valueint, 3);
    cJSON *caps = cJSON_GetObjectItem(root, "captures");
    assert_true(cJSON_IsArray(caps) && cJSON_GetArraySize(caps) == 1);
    assert_int_equal(cJSON_GetObjectItem(cJSON_GetArrayItem(caps, 0), "core:sample_start")->valueint, 0);
    assert_true(cJSON_IsArray(cJSON_GetObjectItem(root, "annotations")));
    cJSON_Delete(root);
    /* and as our reader sees it */
    ulk_reader *r = NULL;
    assert_int_equal(ulk_reader_open(path_of("m.f32"), NULL, -1, &r, d), 0);
    const ulk_sample_info *in = ulk_reader_info(r);
    assert_true(in->fs_hz == 44100.0);
    assert_int_equal(in->format, ULK_FMT_F32);
    assert_int_equal(in->container, ULK_CONTAINER_RAW);
    assert_true(in->fsc_hz == 8000.0 && in->bit_rate == 62.5 && in->subbit_rate == 250.0);
    assert_string_equal(in->fs_exact, "44100");
    assert_string_equal(in->description, "test capture of the fictional bench receiver");
    assert_int_equal(ulk_reader_length(r), 100);
    ulk_reader_close(r);
    /* a rate given by the caller wins; the metadata still names the type */
    ulk_sample_info hint = {.fs_hz = 48000, .format = ULK_FMT_F32, .container = ULK_CONTAINER_RAW};
    assert_int_equal(ulk_reader_open(path_of("m.f32"), &hint, -1, &r, d), 0);
    assert_true(ulk_reader_info(r)->fs_hz == 48000.0);
    ulk_reader_close(r);
    ulk_reader_close(NULL);
    ulk_diag_destroy(d);
    clean();
}

static void test_sigmf_annotations(void **st)
{
    (void)st;
    float x[10] = {0};
    ulk_sample_info info = {.fs_hz = 1000, .format = ULK_FMT_S16, .channels = 1};
    ulk_writer *w = NULL;
    ulk_diag *d = ulk_diag_create();
    assert_int_equal(ulk_writer_open(path_of("an.s16"), &info, &w, d), 0);
    assert_int_equal(ulk_writer_annotate(w, 2, 5, "BUS_NOOP", "word 1"), 0);
    assert_int_equal(ulk_writer_write(w, x, 10), 0);
    assert_int_equal(ulk_writer_commit(w, d), 0);
    char *text;
    size_t len;
    assert_int_equal(ulk_read_file(path_of("an.sigmf-meta"), 1 << 20, &text, &len, d), 0);
    cJSON *root = cJSON_Parse(text);
    ulk_free(text);
    cJSON *a = cJSON_GetArrayItem(cJSON_GetObjectItem(root, "annotations"), 0);
    assert_int_equal(cJSON_GetObjectItem(a, "core:sample_start")->valueint, 2);
    assert_int_equal(cJSON_GetObjectItem(a, "core:sample_count")->valueint, 5);
    assert_string_equal(cJSON_GetObjectItem(a, "core:label")->valuestring, "BUS_NOOP");
    assert_string_equal(cJSON_GetObjectItem(a, "core:comment")->valuestring, "word 1");
    assert_string_equal(cJSON_GetObjectItem(cJSON_GetObjectItem(root, "global"), "core:datatype")->valuestring, "ri16_le");
    cJSON_Delete(root);
    ulk_diag_destroy(d);
    clean();
}

/* ---- refusals of the writer ---- */

typedef struct {
    const char *name, *file;
    ulk_sample_format fmt;
    double fs;
    const char *extra;
    int rc;
    const char *msg;
} wrow;

static void test_writer_refusals(void **st)
{
    (void)st;
    static const wrow rows[] = {
        {"unknown extension", "x.bin", ULK_FMT_F32, 8000, NULL, ULK_EINVAL, ".wav, .f32, .s16"},
        {"extension and format disagree", "x.f32", ULK_FMT_S16, 8000, NULL, ULK_EINVAL, "extension says f32"},
        {"WAV with a fractional rate", "x.wav", ULK_FMT_F32, 8000.5, NULL, ULK_EINVAL, "whole-number"},
        {"rate not positive", "x.wav", ULK_FMT_F32, 0, NULL, ULK_EINVAL, "positive"},
        {"extra metadata outside ulk:", "x.f32", ULK_FMT_F32, 8000, "\"core:author\": \"x\"", ULK_EINVAL, "core:author"},
        {"extra metadata not JSON", "x.f32", ULK_FMT_F32, 8000, "\"ulk:a\": ", ULK_EINVAL, "JSON"},
        {"folder that does not exist", "no/such/x.f32", ULK_FMT_F32, 8000, NULL, ULK_EIO, "cannot create"},
    };
    for (size_t r = 0; r < sizeof rows / sizeof rows[0]; r++) {
        ulk_sample_info info = {.fs_hz = rows[r].fs, .format = rows[r].fmt, .channels = 1, .extra_json = rows[r].extra};
        ulk_writer *w = NULL;
        ulk_diag *d = ulk_diag_create();
        int rc = ulk_writer_open(path_of(rows[r].file), &info, &w, d);
        const ulk_finding *e = ulk_diag_first_error(d);
        if (rc != rows[r].rc || w || !e || !strstr(e->msg, rows[r].msg))
            fail_msg("%s: status %d, message '%s'", rows[r].name, rc, e ? e->msg : "");
        ulk_diag_destroy(d);
        assert_int_equal(count_entries(), 0);
    }
    ulk_writer_abort(NULL);
    assert_int_equal(ulk_writer_write(NULL, NULL, 0), ULK_EINVAL);
}

static void test_writer_abort_leaves_nothing(void **st)
{
    (void)st;
    static const char *names[] = {"ab.wav", "ab.f32", "ab.s16"};
    static const ulk_sample_format fmts[] = {ULK_FMT_F32, ULK_FMT_F32, ULK_FMT_S16};
    float x[1000] = {0};
    for (int k = 0; k < 3; k++) {
        ulk_sample_info info = {.fs_hz = 8000, .format = fmts[k], .channels = 1};
        ulk_writer *w = NULL;
        assert_int_equal(ulk_writer_open(path_of(names[k]), &info, &w, NULL), 0);
        assert_int_equal(ulk_writer_write(w, x, 1000), 0);
        assert_true(count_entries() >= 1); /* the temporary */
        ulk_writer_abort(w);
        assert_int_equal(count_entries(), 0);
    }
}

/* ---- hostile inputs to the reader ---- */

typedef struct {
    const char *name;
    const char *file;         /* written with data/len */
    const char *data;
    size_t len;
    const char *meta;         /* NULL: no .sigmf-meta */
    int channel;
    int rc;
    const char *msg;          /* part of the first error */
} rrow;

#define META(dt, extra) "{\"global\": {\"core:datatype\": \"" dt "\", \"core:sample_rate\": 8000, \"core:version\": \"1.0.0\"" extra "}, \"captures\": [], \"annotations\": []}"

static void test_reader_hostile(void **st)
{
    (void)st;
    static const rrow rows[] = {
        {"empty raw file", "e.f32", "", 0, META("rf32_le", ""), -1, ULK_EFORMAT, "no samples"},
        {"raw s16 cut mid-sample", "t.s16", "\x01\x02\x03", 3, META("ri16_le", ""), -1, ULK_EFORMAT, "truncated"},
        {"raw f32 cut mid-sample", "t.f32", "\x01\x02\x03\x04\x05\x06", 6, META("rf32_le", ""), -1, ULK_EFORMAT, "truncated"},
        {"raw without metadata or rate", "n.f32", "\0\0\0\0", 4, NULL, -1, ULK_EINVAL, "--rate"},
        {"metadata not JSON", "j.f32", "\0\0\0\0", 4, "{\n  \"global\": {\n    \"core:datatype\": rf32_le\n  }\n}", -1, ULK_EFORMAT, "not valid JSON"},
        {"complex datatype", "c.f32", "\0\0\0\0", 4, META("cf32_le", ""), -1, ULK_EFORMAT, "complex"},
        {"unknown datatype", "u.f32", "\0\0\0\0", 4, META("ru8", ""), -1, ULK_EFORMAT, "not supported"},
        {"no sample rate", "s.f32", "\0\0\0\0", 4, "{\"global\": {\"core:datatype\": \"rf32_le\"}}", -1, ULK_EFORMAT, "sample rate"},
        {"no global object", "g.f32", "\0\0\0\0", 4, "{\"captures\": []}", -1, ULK_EFORMAT, "global"},
        {"type disagrees with extension", "x.s16", "\0\0\0\0", 4, META("rf32_le", ""), -1, ULK_EFORMAT, "extension says s16"},
        {"two channels, none chosen", "2.f32", "\0\0\0\0\0\0\0\0", 8, META("rf32_le", ", \"core:num_channels\": 2"), -1, ULK_EINVAL, "choose one"},
        {"two channels, third chosen", "3.f32", "\0\0\0\0\0\0\0\0", 8, META("rf32_le", ", \"core:num_channels\": 2"), 2, ULK_EINVAL, "does not exist"},
        {"bad channel count", "4.f32", "\0\0\0\0", 4, META("rf32_le", ", \"core:num_channels\": 0.5"), -1, ULK_EFORMAT, "whole number"},
        {"zero-byte WAV", "z.wav", "", 0, NULL, -1, ULK_EFORMAT, "not a readable sound file"},
        {"text posing as WAV", "t.wav", "RIFF....WAVEjunk", 16, NULL, -1, ULK_EFORMAT, "not a readable sound file"},
        {"missing file", "missing.wav", NULL, 0, NULL, -1, ULK_EIO, "cannot open"},
    };
    for (size_t r = 0; r < sizeof rows / sizeof rows[0]; r++) {
        if (rows[r].data) put_file(rows[r].file, rows[r].data, rows[r].len);
        if (rows[r].meta) {
            char mname[64];
            snprintf(mname, sizeof mname, "%.*s.sigmf-meta", (int)(strlen(rows[r].file) - 4), rows[r].file);
            put_file(mname, rows[r].meta, strlen(rows[r].meta));
        }
        ulk_reader *rd = NULL;
        ulk_diag *d = ulk_diag_create();
        int rc = ulk_reader_open(path_of(rows[r].file), NULL, rows[r].channel, &rd, d);
        const ulk_finding *e = ulk_diag_first_error(d);
        if (rc != rows[r].rc || rd || !e || !strstr(e->msg, rows[r].msg))
            fail_msg("%s: status %d, message '%s'", rows[r].name, rc, e ? e->msg : "");
        if (!strcmp(rows[r].name, "metadata not JSON") && e->line != 3)
            fail_msg("%s: error at line %d, want 3", rows[r].name, e->line);
        ulk_diag_destroy(d);
        clean();
    }
}

/* A WAV whose data chunk was cut (e.g. a recording stopped by a full disc) is refused, not
 * read as a shorter capture; one with no frames is refused as empty. */
static void test_reader_cut_wav(void **st)
{
    (void)st;
    float x[1000];
    for (int i = 0; i < 1000; i++) x[i] = 0.001f * (float)i;
    ulk_diag *d = ulk_diag_create();
    const char *p = path_of("cut.wav");
    assert_int_equal(write_samples(p, ULK_FMT_S16, 8000, x, 1000, NULL, d), 0);
    assert_int_equal(truncate(p, 44 + 1000), 0); /* 44-byte header + half the data */
    ulk_reader *r = NULL;
    assert_int_equal(ulk_reader_open(p, NULL, -1, &r, d), ULK_EFORMAT);
    assert_non_null(strstr(ulk_diag_first_error(d)->msg, "truncated"));
    assert_int_equal(write_samples(p, ULK_FMT_S16, 8000, x, 0, NULL, d), 0);
    ulk_diag_clear(d);
    assert_int_equal(ulk_reader_open(p, NULL, -1, &r, d), ULK_EFORMAT);
    assert_non_null(strstr(ulk_diag_first_error(d)->msg, "no samples"));
    ulk_diag_destroy(d);
    clean();
}

/* Multi-channel files: refused unless a channel is chosen; the chosen one is read alone. */
static void test_reader_channels(void **st)
{
    (void)st;
    const char *p = path_of("st.wav");
    SF_INFO si = {.samplerate = 8000, .channels = 3, .format = SF_FORMAT_WAV | SF_FORMAT_FLOAT};
    SNDFILE *sf = sf_open(p, SFM_WRITE, &si);
    assert_non_null(sf);
    float fr[300];
    for (int i = 0; i < 100; i++) for (int c = 0; c < 3; c++) fr[3 * i + c] = (float)(c + 1) * 0.001f * (float)i;
    assert_int_equal(sf_writef_float(sf, fr, 100), 100);
    sf_close(sf);
    ulk_reader *r = NULL;
    ulk_diag *d = ulk_diag_create();
    assert_int_equal(ulk_reader_open(p, NULL, -1, &r, d), ULK_EINVAL);
    assert_non_null(strstr(ulk_diag_first_error(d)->msg, "3 channels"));
    size_t n;
    float *y = read_all(p, NULL, 1, 33, &n, d);
    assert_int_equal(n, 100);
    for (int i = 0; i < 100; i++) assert_true(y[i] == fr[3 * i + 1]);
    free(y);
    /* raw with two channels in the metadata */
    float raw[8] = {1, -1, 2, -2, 3, -3, 4, -4};
    put_file("two.f32", raw, sizeof raw);
    const char *meta = META("rf32_le", ", \"core:num_channels\": 2");
    put_file("two.sigmf-meta", meta, strlen(meta));
    y = read_all(path_of("two.f32"), NULL, 1, 3, &n, d);
    assert_int_equal(n, 4);
    for (int i = 0; i < 4; i++) assert_true(y[i] == -(float)(i + 1));
    free(y);
    ulk_diag_destroy(d);
    clean();
}

/* ulk_reader_read_frames: every channel interleaved in one pass equals each channel read by a
 * reader of its own, value for value, for raw complex f32 (read straight into the caller's
 * buffer) and s16 and for two-channel WAV, in chunks that straddle the reader's own. */
typedef struct {
    const char *name;
    ulk_sample_format fmt;
    size_t chunk;
} fr_row;

static const fr_row FR_ROWS[] = {
    {"fr.cf32", ULK_FMT_F32, 7777},
    {"fr.ci16", ULK_FMT_S16, 8192},
    {"fr.wav", ULK_FMT_F32, 1},
    {"fr.wav", ULK_FMT_S16, 12345},
};

static void test_reader_frames(void **st)
{
    (void)st;
    const size_t n = 20011;
    float *iq = malloc(2 * n * sizeof *iq);
    for (size_t i = 0; i < n; i++) {
        iq[2 * i] = (float)(0.9 * sin(0.013 * (double)i));
        iq[2 * i + 1] = (float)(-0.7 * cos(0.0071 * (double)i));
    }
    ulk_diag *d = ulk_diag_create();
    for (size_t t = 0; t < sizeof FR_ROWS / sizeof FR_ROWS[0]; t++) {
        const fr_row *row = &FR_ROWS[t];
        const char *p = path_of(row->name);
        ulk_sample_info info = {0};
        info.fs_hz = 48000;
        info.format = row->fmt;
        info.channels = 2;
        ulk_writer *w = NULL;
        assert_int_equal(ulk_writer_open(p, &info, &w, d), 0);
        assert_int_equal(ulk_writer_write(w, iq, n), 0);
        assert_int_equal(ulk_writer_commit(w, d), 0);
        size_t ni, nq;
        float *yi = read_all(p, NULL, 0, 1000, &ni, d), *yq = read_all(p, NULL, 1, 1000, &nq, d);
        assert_int_equal(ni, n);
        assert_int_equal(nq, n);
        ulk_reader *r = NULL;
        assert_int_equal(ulk_reader_open(p, NULL, 0, &r, d), 0);
        float *y = malloc(2 * (n + row->chunk) * sizeof *y);
        size_t got = 0;
        long m;
        while ((m = ulk_reader_read_frames(r, y + 2 * got, row->chunk)) > 0) got += (size_t)m;
        assert_int_equal(m, 0);
        ulk_reader_close(r);
        if (got != n) fail_msg("%s: %zu frames read, %zu written", row->name, got, n);
        for (size_t i = 0; i < n; i++)
            if (!(y[2 * i] == yi[i] && y[2 * i + 1] == yq[i]))
                fail_msg("%s (%s): frame %zu is (%g, %g), the channels alone (%g, %g)", row->name,
                         row->fmt == ULK_FMT_S16 ? "s16" : "f32", i, (double)y[2 * i], (double)y[2 * i + 1],
                         (double)yi[i], (double)yq[i]);
        free(y);
        free(yi);
        free(yq);
        clean();
    }
    ulk_diag_destroy(d);
    free(iq);
}

/* A rate given by the caller opens raw samples without metadata. */
static void test_reader_hint(void **st)
{
    (void)st;
    int16_t v[4] = {32767, -32767, 16384, 0};
    put_file("h.s16", v, sizeof v);
    ulk_sample_info hint = {.fs_hz = 22050, .format = ULK_FMT_S16, .container = ULK_CONTAINER_RAW};
    ulk_diag *d = ulk_diag_create();
    size_t n;
    float *y = read_all(path_of("h.s16"), &hint, -1, 2, &n, d);
    assert_int_equal(n, 4);
    assert_true(y[0] == 1.0f && y[1] == -1.0f && y[3] == 0.0f);
    assert_true(y[2] == (float)(16384 / 32767.0));
    free(y);
    /* another name: raw with a rate (even without saying raw), refused without one */
    put_file("cap.bin", v, sizeof v);
    ulk_sample_info open_hint = {.fs_hz = 22050, .format = ULK_FMT_S16};
    y = read_all(path_of("cap.bin"), &open_hint, -1, 3, &n, d);
    assert_int_equal(n, 4);
    assert_true(y[1] == -1.0f);
    free(y);
    ulk_reader *r = NULL;
    assert_int_equal(ulk_reader_open(path_of("cap.bin"), NULL, -1, &r, d), ULK_EFORMAT);
    /* a WAV under another name stays a WAV even when a rate is given */
    float x[3] = {0.25f, -0.5f, 0.75f};
    assert_int_equal(write_samples(path_of("w.wav"), ULK_FMT_F32, 8000, x, 3, NULL, d), 0);
    assert_int_equal(rename(path_of("w.wav"), path_of("w.bin")), 0);
    ulk_sample_info any = {.fs_hz = 22050, .format = ULK_FMT_S16}; /* container left open */
    y = read_all(path_of("w.bin"), &any, -1, 3, &n, d);
    assert_int_equal(n, 3);
    assert_true(y[0] == 0.25f && y[1] == -0.5f && y[2] == 0.75f);
    free(y);
    /* the metadata file names its recording */
    assert_int_equal(write_samples(path_of("named.f32"), ULK_FMT_F32, 8000, x, 3, NULL, d), 0);
    y = read_all(path_of("named.sigmf-meta"), NULL, -1, 3, &n, d);
    assert_int_equal(n, 3);
    assert_true(y[2] == 0.75f);
    free(y);
    assert_int_equal(ulk_reader_open(path_of("lonely.sigmf-meta"), NULL, -1, &r, d), ULK_EIO);
    /* a format given by the user that disagrees with the extension .s16 is refused ... */
    hint.format = ULK_FMT_F32;
    hint.format_given = 1;
    assert_int_equal(ulk_reader_open(path_of("h.s16"), &hint, -1, &r, d), ULK_EINVAL);
    /* ... but a default the user did not give yields to the extension (decode x.s16 --rate R) */
    hint.format_given = 0;
    assert_int_equal(ulk_reader_open(path_of("h.s16"), &hint, -1, &r, d), 0);
    assert_int_equal(ulk_reader_info(r)->format, ULK_FMT_S16);
    ulk_reader_close(r);
    r = NULL;
    ulk_diag_destroy(d);
    clean();
}

/* Every allocation of a write and a read, failed in turn: a clean ULK_ENOMEM (or a message
 * saying memory) and nothing left behind. */
static void test_alloc_failures(void **st)
{
    (void)st;
    static const char *names[] = {"af.f32", "af.wav"};
    float x[3000];
    for (int i = 0; i < 3000; i++) x[i] = 0.0003f * (float)i;
    for (int k = 0; k < 2; k++) {
        for (long n = 1;; n++) {
            ulk_diag *d = ulk_diag_create();
            ulk_alloc_fail_at(n);
            int rc = write_samples(path_of(names[k]), ULK_FMT_F32, 8000, x, 3000, "\"ulk:x\": 1", d);
            if (rc != 0 && count_entries() != 0) fail_msg("%s: allocation %ld: files left behind", names[k], n);
            ulk_reader *r = NULL;
            if (rc == 0) rc = ulk_reader_open(path_of(names[k]), NULL, -1, &r, d);
            ulk_alloc_fail_at(0);
            if (rc == 0) { ulk_reader_close(r); ulk_diag_destroy(d); break; }
            if (rc != ULK_ENOMEM) fail_msg("%s: allocation %ld: status %d", names[k], n, rc);
            ulk_diag_destroy(d);
            clean();
            assert_true(n < 200);
        }
        clean();
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_round_trip),
        cmocka_unit_test(test_s16_rounding),
        cmocka_unit_test(test_s16_clip_is_refused),
        cmocka_unit_test(test_sigmf_metadata),
        cmocka_unit_test(test_sigmf_annotations),
        cmocka_unit_test(test_writer_refusals),
        cmocka_unit_test(test_writer_abort_leaves_nothing),
        cmocka_unit_test(test_reader_hostile),
        cmocka_unit_test(test_reader_cut_wav),
        cmocka_unit_test(test_reader_channels),
        cmocka_unit_test(test_reader_frames),
        cmocka_unit_test(test_reader_hint),
        cmocka_unit_test(test_alloc_failures),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
