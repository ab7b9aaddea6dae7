/* src/sampleio.c - sample files in chunks: WAV through libsndfile, raw little-endian samples
 * with a SigMF metadata file beside them (`<base>.sigmf-meta`).
 *
 * Why this shape:
 *   - Writers never leave a partial file: data goes to "<path>.tmp.XXXXXX" in the same folder
 *     and is renamed over the path only when every sample, the header and the metadata are
 *     written. A target that is not a regular file (a device such as /dev/null or /dev/full,
 *     a pipe) is written directly, since a rename would replace the device itself; raw data
 *     written to such a target gets no metadata file.
 *   - Errors are sticky: after the first failure every write returns it and the commit
 *     reports it with the reason (e.g. "No space left on device") and removes the temporary.
 *   - Readers move chunks of frames, so memory stays flat for hour-long captures; one channel
 *     of a multi-channel file is picked, never mixed.
 *   - Raw sample types are rows of a table (SigMF datatype, width, complex flag). Complex
 *     files (.cf32, .ci16, or a .sigmf-data whose metadata says cf32_le/ci16_le) are written
 *     from interleaved I/Q frames (channels = 2) and read as two channels, I = 0 and Q = 1,
 *     like a two-channel WAV (left I, right Q), so a reader still picks one channel.
 * 16-bit scaling is 32767 both ways: written as round(32767 x) (halves away from zero, the
 * profile's rule) and read back as v / 32767, so a written value reads back to within half an
 * LSB. Other PCM widths that libsndfile reads are normalised by libsndfile (2^(bits-1)).
 */
#include <cjson/cJSON.h>
#include <errno.h>
#include <fcntl.h>
#include <limits.h>
#include <math.h>
#include <sndfile.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>
#include <unistd.h>

#include "ulk/sampleio.h"
#include "util.h"

#define IO_CHUNK 8192 /* frames converted at a time */
#define META_MAX ((size_t)16 << 20)

/* ---- raw sample types ---- */

typedef struct {
    const char *datatype; /* SigMF core:datatype */
    int bytes;            /* per real component */
    int complex_;         /* 1: I/Q pairs (two reader channels per SigMF channel) */
    int supported;
    ulk_sample_format fmt;
} raw_type;

static const raw_type RAW_TYPES[] = {
    {"rf32_le", 4, 0, 1, ULK_FMT_F32},
    {"ri16_le", 2, 0, 1, ULK_FMT_S16},
    {"cf32_le", 4, 1, 1, ULK_FMT_F32},
    {"ci16_le", 2, 1, 1, ULK_FMT_S16},
};

static const raw_type *raw_type_of(ulk_sample_format f, int cplx)
{
    for (size_t i = 0; i < sizeof RAW_TYPES / sizeof RAW_TYPES[0]; i++)
        if (RAW_TYPES[i].supported && RAW_TYPES[i].fmt == f && RAW_TYPES[i].complex_ == !!cplx)
            return &RAW_TYPES[i];
    return NULL;
}


static const raw_type *raw_type_of_name(const char *name)
{
    for (size_t i = 0; i < sizeof RAW_TYPES / sizeof RAW_TYPES[0]; i++)
        if (!strcmp(RAW_TYPES[i].datatype, name)) return &RAW_TYPES[i];
    return NULL;
}

static int host_is_le(void)
{
    const uint16_t one = 1;
    uint8_t b;
    memcpy(&b, &one, 1);
    return b == 1;
}

/* ---- paths ---- */

static int ends_with(const char *s, const char *suffix)
{
    size_t n = strlen(s), m = strlen(suffix);
    return n >= m && strcasecmp(s + n - m, suffix) == 0;
}

/* Whether the extension names complex samples (.cf32, .ci16). */
static int ext_complex(const char *path) { return ends_with(path, ".cf32") || ends_with(path, ".ci16"); }

/* What the extension says: 1 and *c, *f set when recognised (*f = -1: no format implied). */
static int ext_kind(const char *path, ulk_container *c, int *f)
{
    if (ends_with(path, ".wav")) { *c = ULK_CONTAINER_WAV; *f = -1; return 1; }
    if (ends_with(path, ".cf32")) { *c = ULK_CONTAINER_RAW; *f = ULK_FMT_F32; return 1; }
    if (ends_with(path, ".ci16")) { *c = ULK_CONTAINER_RAW; *f = ULK_FMT_S16; return 1; }
    if (ends_with(path, ".f32")) { *c = ULK_CONTAINER_RAW; *f = ULK_FMT_F32; return 1; }
    if (ends_with(path, ".s16")) { *c = ULK_CONTAINER_RAW; *f = ULK_FMT_S16; return 1; }
    if (ends_with(path, ".sigmf-data")) { *c = ULK_CONTAINER_RAW; *f = -1; return 1; }
    return 0;
}

/* BASE.sigmf-meta for BASE.f32, BASE.s16 or BASE.sigmf-data, else the path with .sigmf-meta
 * appended. NULL when out of memory. */
static char *meta_path_of(const char *path)
{
    size_t n = strlen(path);
    if (ends_with(path, ".f32") || ends_with(path, ".s16")) n -= 4;
    else if (ext_complex(path)) n -= 5;
    else if (ends_with(path, ".sigmf-data")) n -= 11;
    char *m = ulk_malloc(n + 12);
    if (!m) return NULL;
    memcpy(m, path, n);
    memcpy(m + n, ".sigmf-meta", 12);
    return m;
}

/* ---- writer ---- */

struct ulk_writer {
    ulk_container container;
    ulk_sample_format format;
    double fs_hz;
    int channels;     /* components per frame: 1 real, 2 complex I/Q (or a stereo WAV) */
    const raw_type *rt; /* raw: the SigMF datatype */
    char *path, *tmp; /* tmp NULL when writing a device or pipe directly */
    int direct;
    int tmp_slot;     /* temporary-file registry slot (util.h), 0: none */
    FILE *fp;         /* raw */
    SNDFILE *sf;      /* WAV */
    int err;          /* sticky status */
    char msg[400];
    uint64_t n_frames;
    uint8_t *conv;    /* IO_CHUNK * 4 bytes */
    cJSON *meta;      /* raw: the SigMF document, written at commit */
};

static int wfail(ulk_writer *w, int code, const char *fmt, ...) __attribute__((format(printf, 3, 4)));
static int wfail(ulk_writer *w, int code, const char *fmt, ...)
{
    if (w->err) return w->err;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(w->msg, sizeof w->msg, fmt, ap);
    va_end(ap);
    w->err = code;
    return code;
}

static void writer_free(ulk_writer *w)
{
    if (!w) return;
    ulk_tmp_forget(w->tmp_slot);
    ulk_free(w->path);
    ulk_free(w->tmp);
    ulk_free(w->conv);
    cJSON_Delete(w->meta);
    ulk_free(w);
}

void ulk_writer_abort(ulk_writer *w)
{
    if (!w) return;
    if (w->sf) sf_close(w->sf);
    if (w->fp) fclose(w->fp);
    if (w->tmp) unlink(w->tmp);
    writer_free(w);
}

/* Builds the SigMF document of a raw file (everything but the data). */
static int build_meta(ulk_writer *w, const ulk_sample_info *info, ulk_diag *diag)
{
    const raw_type *t = w->rt;
    cJSON *root = cJSON_CreateObject();
    cJSON *g = cJSON_AddObjectToObject(root, "global");
    if (!root || !g) goto oom;
    /* SigMF core namespace, specification v1.0.0 (from memory of the published spec):
     * datatype, sample_rate and version are required; captures and annotations are arrays. */
    if (!cJSON_AddStringToObject(g, "core:datatype", t->datatype)) goto oom;
    if (!cJSON_AddNumberToObject(g, "core:sample_rate", w->fs_hz)) goto oom;
    if (!cJSON_AddStringToObject(g, "core:version", "1.0.0")) goto oom;
    /* a complex file is one channel of I/Q pairs */
    if (!cJSON_AddNumberToObject(g, "core:num_channels", t->complex_ ? 1 : w->channels)) goto oom;
    if (!cJSON_AddStringToObject(g, "core:recorder", "ulk")) goto oom;
    if (info->description && !cJSON_AddStringToObject(g, "core:description", info->description)) goto oom;
    {
        cJSON *exts = cJSON_AddArrayToObject(g, "core:extensions");
        cJSON *e = cJSON_CreateObject();
        if (!exts || !e) { cJSON_Delete(e); goto oom; }
        cJSON_AddItemToArray(exts, e);
        if (!cJSON_AddStringToObject(e, "name", "ulk") || !cJSON_AddStringToObject(e, "version", "1.0.0") ||
            !cJSON_AddBoolToObject(e, "optional", 1))
            goto oom;
    }
    if (info->fs_exact && !cJSON_AddStringToObject(g, "ulk:sample_rate_exact", info->fs_exact)) goto oom;
    if (info->fsc_hz > 0 && !cJSON_AddNumberToObject(g, "ulk:subcarrier_hz", info->fsc_hz)) goto oom;
    if (info->bit_rate > 0 && !cJSON_AddNumberToObject(g, "ulk:bit_rate", info->bit_rate)) goto oom;
    if (info->subbit_rate > 0 && !cJSON_AddNumberToObject(g, "ulk:subbit_rate", info->subbit_rate)) goto oom;
    if (info->extra_json && *info->extra_json) {
        size_t n = strlen(info->extra_json);
        char *wrapped = ulk_malloc(n + 3);
        if (!wrapped) goto oom;
        wrapped[0] = '{';
        memcpy(wrapped + 1, info->extra_json, n);
        wrapped[n + 1] = '}';
        wrapped[n + 2] = 0;
        cJSON *extra = cJSON_Parse(wrapped);
        ulk_free(wrapped);
        if (!extra) {
            /* cJSON says NULL for bad text and for no memory alike; a small probe tells which. */
            void *probe = ulk_malloc(64);
            if (!probe) goto oom;
            ulk_free(probe);
            cJSON_Delete(root);
            return ulk_fail(diag, ULK_EINVAL, "%s: extra metadata is not a list of JSON object members", w->path);
        }
        while (extra->child) {
            cJSON *it = cJSON_DetachItemViaPointer(extra, extra->child);
            if (!it->string || strncmp(it->string, "ulk:", 4) != 0) {
                char name[64];
                snprintf(name, sizeof name, "%s", it->string ? it->string : "");
                cJSON_Delete(it);
                cJSON_Delete(extra);
                cJSON_Delete(root);
                return ulk_fail(diag, ULK_EINVAL, "%s: extra metadata field '%s' is not in the \"ulk:\" namespace",
                                w->path, name);
            }
            cJSON_DeleteItemFromObjectCaseSensitive(g, it->string); /* a later value replaces */
            if (!cJSON_AddItemToObject(g, it->string, it)) { /* the key copy failed */
                cJSON_Delete(it);
                cJSON_Delete(extra);
                goto oom;
            }
        }
        cJSON_Delete(extra);
    }
    {
        cJSON *caps = cJSON_AddArrayToObject(root, "captures");
        cJSON *c0 = cJSON_CreateObject();
        if (!caps || !c0) { cJSON_Delete(c0); goto oom; }
        cJSON_AddItemToArray(caps, c0);
        if (!cJSON_AddNumberToObject(c0, "core:sample_start", 0)) goto oom;
        if (!cJSON_AddArrayToObject(root, "annotations")) goto oom;
    }
    w->meta = root;
    return 0;
oom:
    cJSON_Delete(root);
    return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", w->path);
}

const char *ulk_writer_temp_path(const ulk_writer *w) { return w ? w->tmp : NULL; }

int ulk_writer_annotate(ulk_writer *w, uint64_t sample_start, uint64_t sample_count, const char *label,
                        const char *comment)
{
    if (!w) return ULK_EINVAL;
    if (w->err) return w->err;
    if (!w->meta) return 0; /* WAV or a direct target: nowhere to put annotations */
    cJSON *arr = cJSON_GetObjectItemCaseSensitive(w->meta, "annotations");
    cJSON *a = cJSON_CreateObject();
    if (!arr || !a) { cJSON_Delete(a); return wfail(w, ULK_ENOMEM, "out of memory"); }
    cJSON_AddItemToArray(arr, a);
    if (!cJSON_AddNumberToObject(a, "core:sample_start", (double)sample_start) ||
        !cJSON_AddNumberToObject(a, "core:sample_count", (double)sample_count) ||
        (label && !cJSON_AddStringToObject(a, "core:label", label)) ||
        (comment && !cJSON_AddStringToObject(a, "core:comment", comment)))
        return wfail(w, ULK_ENOMEM, "out of memory");
    return 0;
}

int ulk_writer_open(const char *path, const ulk_sample_info *info, ulk_writer **out, ulk_diag *diag)
{
    if (out) *out = NULL;
    if (!path || !*path || !info || !out) return ulk_fail(diag, ULK_EINVAL, "sample writer: missing path or settings");
    if (!(info->fs_hz > 0) || !isfinite(info->fs_hz))
        return ulk_fail(diag, ULK_EINVAL, "%s: sample rate must be a positive number", path);
    if (info->channels > 2)
        return ulk_fail(diag, ULK_EINVAL, "%s: only real (1 channel) or complex I/Q (2 channels) output is supported", path);
    const int cplx = info->channels == 2;
    if (info->format != ULK_FMT_F32 && info->format != ULK_FMT_S16)
        return ulk_fail(diag, ULK_EINVAL, "%s: unknown sample format", path);

    /* "-" is standard output: raw samples written directly, like a pipe */
    const int is_std = !strcmp(path, "-");
    struct stat stt;
    int exists = is_std || stat(path, &stt) == 0;
    int direct = is_std || (exists && !S_ISREG(stt.st_mode));
    if (!is_std && exists && S_ISDIR(stt.st_mode)) return ulk_fail(diag, ULK_EIO, "%s: is a folder, not a file", path);

    ulk_container cont;
    int efmt;
    if (!ext_kind(path, &cont, &efmt)) {
        if (!direct)
            return ulk_fail(diag, ULK_EINVAL,
                            "%s: unknown output type: the name must end in .wav, .f32, .s16 or .sigmf-data", path);
        cont = info->container;
        efmt = -1;
    }
    if (efmt >= 0 && efmt != (int)info->format)
        return ulk_fail(diag, ULK_EINVAL, "%s: the extension says %s samples but %s was asked for", path,
                        efmt == ULK_FMT_F32 ? "f32" : "s16", info->format == ULK_FMT_F32 ? "f32" : "s16");
    if (cont == ULK_CONTAINER_RAW && !direct && !ends_with(path, ".sigmf-data") && ext_complex(path) != cplx)
        return ulk_fail(diag, ULK_EINVAL, "%s: %s samples go to a file ending %s", path,
                        cplx ? "complex (I/Q)" : "real", cplx ? ".cf32 or .ci16" : ".f32 or .s16");
    if (cont == ULK_CONTAINER_WAV && info->fs_hz != floor(info->fs_hz))
        return ulk_fail(diag, ULK_EINVAL,
                        "%s: WAV holds whole-number sample rates only (asked for %.17g Hz); write raw .f32 or "
                        ".s16 samples with SigMF metadata instead",
                        path, info->fs_hz);
    if (cont == ULK_CONTAINER_WAV && info->fs_hz > INT_MAX)
        return ulk_fail(diag, ULK_EINVAL,
                        "%s: WAV (as libsndfile writes it) holds sample rates up to %d Hz, not %.17g Hz; write "
                        "raw .f32 or .s16 samples with SigMF metadata instead",
                        path, INT_MAX, info->fs_hz);

    ulk_writer *w = ulk_calloc(1, sizeof *w);
    if (!w) return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path);
    w->container = cont;
    w->format = info->format;
    w->fs_hz = info->fs_hz;
    w->channels = cplx ? 2 : 1;
    w->rt = raw_type_of(info->format, cont == ULK_CONTAINER_RAW && cplx);
    w->direct = direct;
    w->path = ulk_strdup(is_std ? "standard output" : path); /* the name messages give */
    w->conv = ulk_malloc(IO_CHUNK * 4); /* IO_CHUNK values (not frames) are converted at a time */
    if (!w->path || !w->conv) { writer_free(w); return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path); }
    if (cont == ULK_CONTAINER_RAW && !direct) {
        int rc = build_meta(w, info, diag);
        if (rc < 0) { writer_free(w); return rc; }
    }

    int fd;
    if (direct) {
        fd = is_std ? dup(1) : open(path, O_WRONLY | O_CLOEXEC);
        if (fd < 0) {
            int e = errno;
            writer_free(w);
            return ulk_fail(diag, ULK_EIO, "%s: cannot open for writing: %s", path, strerror(e));
        }
    } else {
        size_t n = strlen(path);
        w->tmp = ulk_malloc(n + 12);
        if (!w->tmp) { writer_free(w); return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path); }
        memcpy(w->tmp, path, n);
        memcpy(w->tmp + n, ".tmp.XXXXXX", 12);
        fd = mkstemp(w->tmp);
        if (fd < 0) {
            int e = errno;
            ulk_free(w->tmp);
            w->tmp = NULL;
            writer_free(w);
            return ulk_fail(diag, ULK_EIO, "%s: cannot create output file: %s", path, strerror(e));
        }
        w->tmp_slot = ulk_tmp_register(w->tmp);
        fchmod(fd, 0644);
    }

    if (cont == ULK_CONTAINER_WAV) {
        SF_INFO si;
        memset(&si, 0, sizeof si);
        si.samplerate = (int)info->fs_hz;
        si.channels = w->channels; /* complex: left I, right Q */
        /* RF64 that downgrades itself to plain WAV when the data stays under 4 GiB: hour-long
         * outputs at high rates stay readable, ordinary ones are ordinary WAV files. */
        si.format = SF_FORMAT_RF64 | (info->format == ULK_FMT_S16 ? SF_FORMAT_PCM_16 : SF_FORMAT_FLOAT);
        errno = 0;
        w->sf = sf_open_fd(fd, SFM_WRITE, &si, 1);
        if (!w->sf) {
            char why[256];
            snprintf(why, sizeof why, "%s", sf_strerror(NULL));
            close(fd);
            if (w->tmp) unlink(w->tmp);
            writer_free(w);
            return ulk_fail(diag, ULK_EIO, "%s: cannot write WAV: %s; no output written", path, why);
        }
        sf_command(w->sf, SFC_RF64_AUTO_DOWNGRADE, NULL, SF_TRUE);
    } else {
        w->fp = fdopen(fd, "wb");
        if (!w->fp) {
            int e = errno;
            close(fd);
            if (w->tmp) unlink(w->tmp);
            writer_free(w);
            return ulk_fail(diag, ULK_EIO, "%s: cannot open output file: %s", path, strerror(e));
        }
    }
    *out = w;
    return 0;
}

/* Writes n bytes of raw data; records the system error on a short write. */
static int raw_put(ulk_writer *w, const void *p, size_t n)
{
    errno = 0;
    if (fwrite(p, 1, n, w->fp) != n) {
        int e = errno ? errno : EIO;
        return wfail(w, ULK_EIO, "write failed: %s", strerror(e));
    }
    return 0;
}

static int wav_put(ulk_writer *w, const void *p, size_t n, int s16)
{
    errno = 0;
    sf_count_t got = s16 ? sf_write_short(w->sf, (const short *)p, (sf_count_t)n)
                         : sf_write_float(w->sf, (const float *)p, (sf_count_t)n);
    if (got != (sf_count_t)n) {
        int e = errno;
        if (e) return wfail(w, ULK_EIO, "write failed: %s", strerror(e));
        return wfail(w, ULK_EIO, "write failed: %s", sf_strerror(w->sf));
    }
    return 0;
}

int ulk_writer_write(ulk_writer *w, const float *x, size_t n)
{
    if (!w) return ULK_EINVAL;
    if (w->err) return w->err;
    if (!x && n) return wfail(w, ULK_EINVAL, "no samples given");
    const int le = host_is_le();
    const size_t nv = n * (size_t)w->channels; /* values: frames times components */
    size_t done = 0;
    while (done < nv) {
        size_t m = nv - done < IO_CHUNK ? nv - done : IO_CHUNK;
        const float *s = x + done;
        int rc;
        if (w->format == ULK_FMT_S16) {
            int16_t *v = (int16_t *)(void *)w->conv;
            for (size_t k = 0; k < m; k++) {
                /* round(32767 x), halves away from zero; float x times 32767 is exact in double */
                double y = 32767.0 * (double)s[k];
                double r = y >= 0 ? floor(y + 0.5) : -floor(-y + 0.5);
                if (!(r <= 32767.0 && r >= -32767.0))
                    return wfail(w, ULK_ELIMIT,
                                 "sample %llu%s is %g, %.3g over full scale 1.0 (%.1f dB): 16-bit output would clip",
                                 (unsigned long long)(w->n_frames + (done + k) / (size_t)w->channels),
                                 w->channels == 2 ? ((done + k) % 2 ? " (Q)" : " (I)") : "", (double)s[k],
                                 fabs((double)s[k]) - 1.0, 20 * log10(fabs((double)s[k])));
                v[k] = (int16_t)r;
            }
            if (w->container == ULK_CONTAINER_WAV) rc = wav_put(w, v, m, 1);
            else {
                if (!le)
                    for (size_t k = 0; k < m; k++) {
                        uint16_t u = (uint16_t)v[k];
                        w->conv[2 * k] = (uint8_t)(u & 0xff);
                        w->conv[2 * k + 1] = (uint8_t)(u >> 8);
                    }
                rc = raw_put(w, w->conv, m * 2);
            }
        } else if (w->container == ULK_CONTAINER_WAV) {
            rc = wav_put(w, s, m, 0);
        } else if (le) {
            rc = raw_put(w, s, m * 4);
        } else {
            for (size_t k = 0; k < m; k++) {
                uint32_t u;
                memcpy(&u, &s[k], 4);
                for (int b = 0; b < 4; b++) w->conv[4 * k + b] = (uint8_t)(u >> (8 * b));
            }
            rc = raw_put(w, w->conv, m * 4);
        }
        if (rc < 0) return rc;
        done += m;
    }
    w->n_frames += n;
    return 0;
}

int ulk_writer_commit(ulk_writer *w, ulk_diag *diag)
{
    if (!w) return ulk_fail(diag, ULK_EINVAL, "sample writer: nothing to commit");
    /* finish the data: WAV header sizes, stdio buffers */
    if (!w->err && w->sf) {
        errno = 0;
        sf_write_sync(w->sf);
        int e = sf_error(w->sf);
        if (e) wfail(w, ULK_EIO, "write failed: %s", errno ? strerror(errno) : sf_error_number(e));
    }
    if (w->sf) {
        int e = sf_close(w->sf);
        w->sf = NULL;
        if (e && !w->err) wfail(w, ULK_EIO, "write failed: %s", sf_error_number(e));
    }
    if (w->fp) {
        errno = 0;
        int bad = fflush(w->fp) != 0 || ferror(w->fp);
        int e = errno;
        if (fclose(w->fp) != 0 && !bad) { bad = 1; e = errno; }
        w->fp = NULL;
        if (bad) wfail(w, ULK_EIO, "write failed: %s", strerror(e ? e : EIO));
    }
    if (w->err) {
        int rc = ulk_fail(diag, w->err, "%s: %s%s", w->path, w->msg, w->direct ? "" : "; no output written");
        ulk_writer_abort(w);
        return rc;
    }
    if (w->direct) { writer_free(w); return 0; }

    /* raw: the metadata goes beside the data; both land, or neither */
    ulk_afile mf;
    int have_meta = 0;
    if (w->meta) {
        char *mp = meta_path_of(w->path);
        char *text = cJSON_Print(w->meta);
        if (!mp || !text) {
            ulk_free(mp);
            cJSON_free(text);
            int rc = ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", w->path);
            ulk_writer_abort(w);
            return rc;
        }
        int rc = ulk_afile_open(&mf, mp, diag);
        ulk_free(mp);
        if (rc == 0) {
            fputs(text, mf.fp);
            fputc('\n', mf.fp);
        }
        cJSON_free(text);
        if (rc < 0) { ulk_writer_abort(w); return rc; }
        have_meta = 1;
    }
    if (rename(w->tmp, w->path) != 0) {
        int e = errno;
        if (have_meta) ulk_afile_abort(&mf);
        int rc = ulk_fail(diag, ULK_EIO, "%s: cannot rename into place: %s; no output written", w->path, strerror(e));
        ulk_writer_abort(w);
        return rc;
    }
    ulk_free(w->tmp);
    w->tmp = NULL;
    ulk_tmp_forget(w->tmp_slot);
    w->tmp_slot = 0;
    if (have_meta) {
        int rc = ulk_afile_commit(&mf, diag);
        if (rc < 0) {
            unlink(w->path); /* data without its rate and type is no use; take it back */
            writer_free(w);
            return rc;
        }
    }
    writer_free(w);
    return 0;
}

/* ---- reader ---- */

struct ulk_reader {
    ulk_sample_info info;
    char *desc, *fs_exact_s;
    char *path;
    int channels, channel;
    int64_t frames, left;
    SNDFILE *sf;
    int sf_short;     /* read 16-bit PCM as shorts and scale by 1/32767 */
    FILE *fp;
    const raw_type *rt;
    void *buf;        /* IO_CHUNK frames of channels components */
    int err;
    char msg[300];
};

static void reader_free(ulk_reader *r)
{
    if (!r) return;
    if (r->sf) sf_close(r->sf);
    if (r->fp) fclose(r->fp);
    ulk_free(r->desc);
    ulk_free(r->fs_exact_s);
    ulk_free(r->path);
    ulk_free(r->buf);
    ulk_free(r);
}

void ulk_reader_close(ulk_reader *r) { reader_free(r); }
const ulk_sample_info *ulk_reader_info(const ulk_reader *r) { return r ? &r->info : NULL; }
const char *ulk_reader_error(const ulk_reader *r) { return r ? r->msg : ""; }
int64_t ulk_reader_length(const ulk_reader *r) { return r ? r->frames : -1; }

static int pick_channel(ulk_reader *r, int nch, int channel, ulk_diag *diag)
{
    if (nch < 1) return ulk_fail(diag, ULK_EFORMAT, "%s: declares %d channels", r->path, nch);
    if (nch > 1 && channel < 0)
        return ulk_fail(diag, ULK_EINVAL,
                        "%s: has %d channels; choose one (0..%d) -- channels are never mixed", r->path, nch,
                        nch - 1);
    if (channel >= nch)
        return ulk_fail(diag, ULK_EINVAL, "%s: has %d channel%s; channel %d does not exist", r->path, nch,
                        nch == 1 ? "" : "s", channel);
    r->channels = nch;
    r->channel = channel < 0 ? 0 : channel;
    return 0;
}

static int open_sndfile(ulk_reader *r, int channel, ulk_diag *diag)
{
    SF_INFO si;
    memset(&si, 0, sizeof si);
    r->sf = sf_open(r->path, SFM_READ, &si);
    if (!r->sf) {
        if (access(r->path, R_OK) != 0)
            return ulk_fail(diag, ULK_EIO, "%s: cannot open: %s", r->path, strerror(errno));
        return ulk_fail(diag, ULK_EFORMAT, "%s: not a readable sound file (%s)", r->path, sf_strerror(NULL));
    }
    /* libsndfile opens a file whose data chunk is cut short and reads what is there; its parse
     * log says "(should be N)" on the data line. A cut capture is an error, not a shorter one. */
    char log[4096] = "";
    sf_command(r->sf, SFC_GET_LOG_INFO, log, sizeof log);
    for (char *line = log; line && *line;) {
        char *nl = strchr(line, '\n');
        if (nl) *nl = 0;
        if (!strncmp(line, "data", 4) && strstr(line, "should be"))
            return ulk_fail(diag, ULK_EFORMAT,
                            "%s: truncated: the header declares more sample data than the file holds (%s)",
                            r->path, line);
        line = nl ? nl + 1 : NULL;
    }
    if (si.frames <= 0) return ulk_fail(diag, ULK_EFORMAT, "%s: holds no samples", r->path);
    int rc = pick_channel(r, si.channels, channel, diag);
    if (rc < 0) return rc;
    r->frames = r->left = si.frames;
    r->info.fs_hz = si.samplerate;
    r->info.container = ULK_CONTAINER_WAV; /* any type libsndfile reads is handled like a WAV */
    int sub = si.format & SF_FORMAT_SUBMASK;
    r->sf_short = sub == SF_FORMAT_PCM_16;
    r->info.format = r->sf_short ? ULK_FMT_S16 : ULK_FMT_F32;
    r->buf = ulk_malloc((size_t)IO_CHUNK * (size_t)r->channels * 4);
    if (!r->buf) return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", r->path);
    return 0;
}

/* Reads "<base>.sigmf-meta" into r->info (rate, type, channels, annotations of ours). */
static int read_meta(ulk_reader *r, const char *mp, const ulk_sample_info *hint, int channel, ulk_diag *diag)
{
    char *text;
    size_t len;
    int rc = ulk_read_file(mp, META_MAX, &text, &len, diag);
    if (rc < 0) return rc;
    const char *endp = NULL;
    cJSON *root = cJSON_ParseWithLengthOpts(text, len, &endp, 0);
    if (!root) {
        /* point at the line and column where parsing stopped */
        const char *e = endp ? endp : cJSON_GetErrorPtr();
        int line = 1, col = 1;
        if (e && e >= text && e <= text + len)
            for (const char *p = text; p < e; p++) {
                if (*p == '\n') { line++; col = 1; } else col++;
            }
        ulk_loc loc = {mp, line, col, NULL};
        ulk_free(text);
        ulk_diag_add(diag, ULK_SEV_ERROR, &loc, "not valid JSON (SigMF metadata expected)");
        return ULK_EFORMAT;
    }
    ulk_free(text);
    rc = 0;
    ulk_loc loc = {mp, 0, 0, "global"};
    const cJSON *g = cJSON_GetObjectItemCaseSensitive(root, "global");
    const cJSON *dt = cJSON_GetObjectItemCaseSensitive(g, "core:datatype");
    const cJSON *sr = cJSON_GetObjectItemCaseSensitive(g, "core:sample_rate");
    const cJSON *nc = cJSON_GetObjectItemCaseSensitive(g, "core:num_channels");
    if (!cJSON_IsObject(g)) {
        ulk_diag_add(diag, ULK_SEV_ERROR, &loc, "SigMF metadata has no \"global\" object");
        rc = ULK_EFORMAT;
        goto done;
    }
    if (!cJSON_IsString(dt)) {
        loc.path = "global.core:datatype";
        ulk_diag_add(diag, ULK_SEV_ERROR, &loc, "missing: expected a datatype such as \"rf32_le\" or \"ri16_le\"");
        rc = ULK_EFORMAT;
        goto done;
    }
    const raw_type *t = raw_type_of_name(dt->valuestring);
    if (!t || !t->supported) {
        loc.path = "global.core:datatype";
        ulk_diag_add(diag, ULK_SEV_ERROR, &loc,
                     "datatype \"%s\" is not supported: expected rf32_le, ri16_le, cf32_le or ci16_le",
                     dt->valuestring);
        rc = ULK_EFORMAT;
        goto done;
    }
    if (!hint || !(hint->fs_hz > 0)) {
        if (!cJSON_IsNumber(sr) || !(sr->valuedouble > 0) || !isfinite(sr->valuedouble)) {
            loc.path = "global.core:sample_rate";
            ulk_diag_add(diag, ULK_SEV_ERROR, &loc, "missing or not a positive number: the sample rate is needed");
            rc = ULK_EFORMAT;
            goto done;
        }
        r->info.fs_hz = sr->valuedouble;
        r->info.format = t->fmt;
        r->rt = t;
        const cJSON *ex = cJSON_GetObjectItemCaseSensitive(g, "ulk:sample_rate_exact");
        if (cJSON_IsString(ex)) {
            r->fs_exact_s = ulk_strdup(ex->valuestring);
            if (!r->fs_exact_s) { rc = ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", mp); goto done; }
            r->info.fs_exact = r->fs_exact_s;
        }
    }
    int nch = 1;
    if (nc) {
        if (!cJSON_IsNumber(nc) || nc->valuedouble < 1 || nc->valuedouble > 64 || nc->valuedouble != floor(nc->valuedouble)) {
            loc.path = "global.core:num_channels";
            ulk_diag_add(diag, ULK_SEV_ERROR, &loc, "expected a whole number of channels from 1 to 64");
            rc = ULK_EFORMAT;
            goto done;
        }
        nch = (int)nc->valuedouble;
    }
    /* the file name (.f32/.s16 real, .cf32/.ci16 complex) and the datatype must agree */
    int name_says = ext_complex(r->path) ? 1 : (ends_with(r->path, ".f32") || ends_with(r->path, ".s16")) ? 0 : -1;
    if (name_says >= 0 && name_says != t->complex_) {
        loc.path = "global.core:datatype";
        ulk_diag_add(diag, ULK_SEV_ERROR, &loc, "datatype \"%s\" (%s samples) contradicts the file name %s (%s samples)",
                     dt->valuestring, t->complex_ ? "complex" : "real", r->path, name_says ? "complex" : "real");
        rc = ULK_EFORMAT;
        goto done;
    }
    if ((r->rt ? r->rt : t)->complex_) nch *= 2; /* I and Q are channels 0 and 1 */
    rc = pick_channel(r, nch, channel, diag);
    if (rc < 0) goto done;
    const cJSON *v;
    if (cJSON_IsNumber(v = cJSON_GetObjectItemCaseSensitive(g, "ulk:subcarrier_hz"))) r->info.fsc_hz = v->valuedouble;
    if (cJSON_IsNumber(v = cJSON_GetObjectItemCaseSensitive(g, "ulk:bit_rate"))) r->info.bit_rate = v->valuedouble;
    if (cJSON_IsNumber(v = cJSON_GetObjectItemCaseSensitive(g, "ulk:subbit_rate"))) r->info.subbit_rate = v->valuedouble;
    if (cJSON_IsString(v = cJSON_GetObjectItemCaseSensitive(g, "core:description"))) {
        r->desc = ulk_strdup(v->valuestring);
        if (!r->desc) { rc = ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", mp); goto done; }
        r->info.description = r->desc;
    }
done:
    cJSON_Delete(root);
    return rc;
}

static const char *fmt_name(int fmt, int cplx)
{
    return fmt == ULK_FMT_S16 ? (cplx ? "ci16" : "s16") : (cplx ? "cf32" : "f32");
}

static int open_raw(ulk_reader *r, const ulk_sample_info *hint, int channel, int efmt, ulk_diag *diag)
{
    char *mp = meta_path_of(r->path);
    if (!mp) return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", r->path);
    int have_meta = access(mp, F_OK) == 0;
    int rc = 0;
    if (hint && hint->fs_hz > 0) {
        if (!isfinite(hint->fs_hz)) { ulk_free(mp); return ulk_fail(diag, ULK_EINVAL, "%s: bad sample rate", r->path); }
        /* the extension decides the sample type unless the user named one; a named one must agree */
        int given_cplx = hint->format_given && hint->channels == 2;
        int cplx = ext_complex(r->path) || given_cplx;
        int fmt = efmt >= 0 && !hint->format_given ? efmt : (int)hint->format;
        if (hint->format_given && efmt >= 0 &&
            (efmt != (int)hint->format || (given_cplx && !ext_complex(r->path)) ||
             (!given_cplx && ext_complex(r->path)))) {
            ulk_free(mp);
            return ulk_fail(diag, ULK_EINVAL, "%s: the extension says %s samples but --format %s was given; drop "
                                              "--format (the extension decides) or rename the file",
                            r->path, fmt_name(efmt, ext_complex(r->path)), fmt_name(hint->format, given_cplx));
        }
        r->info.fs_hz = hint->fs_hz;
        r->info.format = (ulk_sample_format)fmt;
        r->rt = raw_type_of((ulk_sample_format)fmt, cplx);
        if (!r->rt) { ulk_free(mp); return ulk_fail(diag, ULK_EINVAL, "%s: unknown sample format", r->path); }
        /* the metadata, when there, still tells channels and our annotations */
        if (have_meta) rc = read_meta(r, mp, hint, channel, diag);
        else rc = pick_channel(r, r->rt->complex_ ? 2 : 1, channel, diag);
    } else {
        if (!have_meta) {
            /* say what is missing and which options give it */
            if (efmt >= 0)
                rc = ulk_fail(diag, ULK_EINVAL,
                              "%s: raw %s samples without metadata (no %s beside it): the sample rate is missing; "
                              "give it with --rate HZ (the extension gives the sample type)",
                              r->path, fmt_name(efmt, ext_complex(r->path)), mp);
            else
                rc = ulk_fail(diag, ULK_EINVAL,
                              "%s: raw samples without metadata (no %s beside it): the sample rate and the sample "
                              "type are missing; give them with --rate HZ --format f32|s16|cf32|ci16",
                              r->path, mp);
        } else {
            rc = read_meta(r, mp, NULL, channel, diag);
            if (rc == 0 && efmt >= 0 && (efmt != (int)r->info.format ||
                                         (!ends_with(r->path, ".sigmf-data") && ext_complex(r->path) != r->rt->complex_)))
                rc = ulk_fail(diag, ULK_EFORMAT, "%s: the extension says %s%s samples but %s says %s", r->path,
                              ext_complex(r->path) ? "complex " : "", efmt == ULK_FMT_F32 ? "f32" : "s16", mp,
                              r->rt->datatype);
        }
    }
    ulk_free(mp);
    if (rc < 0) return rc;
    r->info.container = ULK_CONTAINER_RAW;

    r->fp = fopen(r->path, "rb");
    if (!r->fp) return ulk_fail(diag, ULK_EIO, "%s: cannot open: %s", r->path, strerror(errno));
    struct stat st;
    if (fstat(fileno(r->fp), &st) != 0) return ulk_fail(diag, ULK_EIO, "%s: cannot read: %s", r->path, strerror(errno));
    const int64_t frame = (int64_t)r->rt->bytes * r->channels;
    if (S_ISREG(st.st_mode)) {
        if (st.st_size == 0) return ulk_fail(diag, ULK_EFORMAT, "%s: holds no samples (empty file)", r->path);
        if (st.st_size % frame != 0)
            return ulk_fail(diag, ULK_EFORMAT,
                            "%s: truncated: %lld bytes is not a whole number of %lld-byte %s frames", r->path,
                            (long long)st.st_size, (long long)frame, r->rt->datatype);
        r->frames = r->left = st.st_size / frame;
    } else {
        r->frames = -1; /* a pipe: length unknown */
        r->left = INT64_MAX;
    }
    r->buf = ulk_malloc((size_t)IO_CHUNK * (size_t)frame);
    if (!r->buf) return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", r->path);
    return 0;
}

/* Whether libsndfile recognises the file (any type it reads). */
static int is_sound_file(const char *path)
{
    SF_INFO si;
    memset(&si, 0, sizeof si);
    SNDFILE *sf = sf_open(path, SFM_READ, &si);
    if (!sf) return 0;
    sf_close(sf);
    return 1;
}

int ulk_reader_open(const char *path, const ulk_sample_info *hint, int channel, ulk_reader **out, ulk_diag *diag)
{
    if (out) *out = NULL;
    if (!path || !*path || !out) return ulk_fail(diag, ULK_EINVAL, "sample reader: missing path");
    ulk_reader *r = ulk_calloc(1, sizeof *r);
    if (!r) return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path);
    /* BASE.sigmf-meta names its recording: BASE.sigmf-data, else BASE.f32 or BASE.s16 */
    if (ends_with(path, ".sigmf-meta")) {
        size_t n = strlen(path) - 11;
        static const char *exts[] = {".sigmf-data", ".f32", ".s16", ".cf32", ".ci16"};
        for (int k = 0; k < 5 && !r->path; k++) {
            char *cand = ulk_malloc(n + 12);
            if (!cand) break;
            memcpy(cand, path, n);
            memcpy(cand + n, exts[k], strlen(exts[k]) + 1);
            if (access(cand, F_OK) == 0) r->path = cand;
            else ulk_free(cand);
        }
        if (!r->path) {
            reader_free(r);
            return ulk_fail(diag, ULK_EIO, "%s: no recording beside it (BASE.sigmf-data, BASE.f32 or BASE.s16)", path);
        }
    } else {
        r->path = ulk_strdup(path);
    }
    if (!r->path) { reader_free(r); return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path); }
    struct stat st;
    if (stat(r->path, &st) != 0) {
        int rc = ulk_fail(diag, ULK_EIO, "%s: cannot open: %s", r->path, strerror(errno));
        reader_free(r);
        return rc;
    }
    if (S_ISDIR(st.st_mode)) {
        int rc = ulk_fail(diag, ULK_EIO, "%s: is a folder, not a capture", r->path);
        reader_free(r);
        return rc;
    }
    ulk_container c;
    int efmt = -1;
    int known = ext_kind(r->path, &c, &efmt);
    int rc;
    /* raw when the name says so, or when the caller gives a rate for a file of another name
     * that libsndfile does not recognise (e.g. capture.bin, a pipe) */
    if ((known && c == ULK_CONTAINER_RAW) ||
        (!known && hint && hint->fs_hz > 0 &&
         (hint->container == ULK_CONTAINER_RAW || !S_ISREG(st.st_mode) || !is_sound_file(r->path))))
        rc = open_raw(r, hint, channel, known ? efmt : -1, diag);
    else
        rc = open_sndfile(r, channel, diag);
    if (rc < 0) { reader_free(r); return rc; }
    r->info.channels = r->channels;
    r->info.n_frames = r->frames;
    *out = r;
    return 0;
}

/* Frames as float into x: the reader's channel (all = 0, one value a frame) or every channel
 * interleaved (all = 1, r->channels values a frame). */
static long reader_read(ulk_reader *r, float *x, size_t n, int all)
{
    if (!r || (!x && n)) return ULK_EINVAL;
    if (r->err) return r->err;
    size_t done = 0;
    const int nch = r->channels, ch = r->channel;
    /* values a frame in x, and which channels: [c0, c0 + nv) */
    const size_t nv = all ? (size_t)nch : 1;
    const int c0 = all ? 0 : ch;
    while (done < n && r->left > 0) {
        size_t m = n - done < IO_CHUNK ? n - done : IO_CHUNK;
        if ((int64_t)m > r->left) m = (size_t)r->left;
        size_t got;
        if (r->sf) {
            sf_count_t g;
            float *o = x + done * nv;
            if (r->sf_short) {
                const short *v = r->buf;
                g = sf_readf_short(r->sf, (short *)r->buf, (sf_count_t)m);
                for (sf_count_t k = 0; k < g; k++)
                    for (size_t c = 0; c < nv; c++) o[(size_t)k * nv + c] = (float)(v[k * nch + c0 + (int)c] / 32767.0);
            } else {
                const float *v = r->buf;
                g = sf_readf_float(r->sf, (float *)r->buf, (sf_count_t)m);
                for (sf_count_t k = 0; k < g; k++)
                    for (size_t c = 0; c < nv; c++) o[(size_t)k * nv + c] = v[k * nch + c0 + (int)c];
            }
            got = g > 0 ? (size_t)g : 0;
            if (got < m) {
                r->err = ULK_EFORMAT;
                snprintf(r->msg, sizeof r->msg, "%s: ends before its declared length (%s)", r->path,
                         sf_strerror(r->sf));
                return got + done > 0 ? (long)(done + got) : r->err;
            }
        } else {
            const size_t bps = (size_t)r->rt->bytes, frame = bps * (size_t)nch;
            float *o = x + done * nv;
            /* every channel of little-endian f32 on a little-endian host: the file's bytes are
             * the floats, read straight into x */
            const int direct = nv == (size_t)nch && r->rt->fmt == ULK_FMT_F32 && host_is_le();
            got = fread(direct ? (void *)o : r->buf, frame, m, r->fp);
            const uint8_t *b = r->buf;
            if (direct) {
                /* nothing to convert */
            } else if (r->rt->fmt == ULK_FMT_S16) {
                for (size_t k = 0; k < got; k++)
                    for (size_t c = 0; c < nv; c++) {
                        const uint8_t *p = b + k * frame + (size_t)(c0 + (int)c) * 2;
                        int16_t v = (int16_t)(uint16_t)(p[0] | (p[1] << 8));
                        o[k * nv + c] = (float)(v / 32767.0);
                    }
            } else {
                for (size_t k = 0; k < got; k++)
                    for (size_t c = 0; c < nv; c++) {
                        const uint8_t *p = b + k * frame + (size_t)(c0 + (int)c) * 4;
                        uint32_t u = (uint32_t)p[0] | (uint32_t)p[1] << 8 | (uint32_t)p[2] << 16 | (uint32_t)p[3] << 24;
                        memcpy(&o[k * nv + c], &u, 4);
                    }
            }
            if (got < m) {
                if (ferror(r->fp)) {
                    r->err = ULK_EIO;
                    snprintf(r->msg, sizeof r->msg, "%s: read error: %s", r->path, strerror(errno));
                } else if (r->frames >= 0) { /* the file shrank under us */
                    r->err = ULK_EFORMAT;
                    snprintf(r->msg, sizeof r->msg, "%s: ends before its declared length", r->path);
                } else {
                    r->left = 0; /* end of a pipe */
                }
                if (r->err) return done + got > 0 ? (long)(done + got) : r->err;
            }
        }
        done += got;
        if (r->left != INT64_MAX) r->left -= (int64_t)got;
        if (got == 0) break;
    }
    return (long)done;
}

long ulk_reader_read(ulk_reader *r, float *x, size_t n) { return reader_read(r, x, n, 0); }

long ulk_reader_read_frames(ulk_reader *r, float *x, size_t n) { return reader_read(r, x, n, 1); }
