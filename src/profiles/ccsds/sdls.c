/* src/sdls.c - Space Data Link Security on TC frames (CCSDS 355.0-B-1 section 3) with AES-256-GCM
 * (CCSDS 352.0-B-2 section 5, from memory) through OpenSSL's EVP interface; key file, anti-replay state file,
 * sending and receiving side. See ulk/sdls.h for the layout and docs/sdls.md for the rules.
 */
#define _GNU_SOURCE
#include "ulk/sdls.h"

#include <ctype.h>
#include <errno.h>
#include <fcntl.h>
#include <inttypes.h>
#include <openssl/crypto.h>
#include <openssl/evp.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <unistd.h>

#include "ulk/upload.h"
#include "util.h"

/* ---------------------------------------------------------------- security association */

void ulk_sdls_sa_default(ulk_sdls_sa *sa)
{
    if (!sa) return;
    memset(sa, 0, sizeof *sa);
    sa->service = ULK_SDLS_AUTHENTICATION;
    sa->algorithm = ULK_SDLS_AES_256_GCM;
    sa->iv_octets = 12;
    sa->mac_octets = 16;
    sa->window = 64;
}

int ulk_sdls_key_name_ok(const char *name)
{
    if (!name || !name[0]) return 0;
    size_t n = 0;
    for (const char *p = name; *p; p++, n++)
        if (!(isalnum((unsigned char)*p) || *p == '_' || *p == '.' || *p == '-')) return 0;
    return n < ULK_SDLS_KEY_NAME_MAX;
}

static int sa_fail(char *err, size_t errlen, const char *msg)
{
    if (err && errlen) snprintf(err, errlen, "%s", msg);
    return ULK_EINVAL;
}

int ulk_sdls_sa_check(const ulk_sdls_sa *sa, char *err, size_t errlen)
{
    if (err && errlen) err[0] = 0;
    if (!sa) return sa_fail(err, errlen, "no security association");
    if (!sa->enabled) return ULK_OK;
    /* SPI 0 and 0xFFFF are reserved (CCSDS 355.0-B-1 section 3.2.2, from memory). */
    if (sa->spi < 1 || sa->spi > 65534) return sa_fail(err, errlen, "spi must be 1..65534");
    if (!ulk_sdls_key_name_ok(sa->key))
        return sa_fail(err, errlen, "key must be a key name of 1..47 letters, digits, '_', '.' or '-'");
    if (sa->service != ULK_SDLS_AUTHENTICATION && sa->service != ULK_SDLS_AUTHENTICATED_ENCRYPTION)
        return sa_fail(err, errlen, "service must be authentication or authenticated-encryption");
    if (sa->algorithm != ULK_SDLS_AES_256_GCM) return sa_fail(err, errlen, "algorithm must be aes-256-gcm");
    if (sa->iv_octets < ULK_SDLS_MIN_IV_OCTETS || sa->iv_octets > ULK_SDLS_MAX_IV_OCTETS)
        return sa_fail(err, errlen, "iv_octets must be 12..16");
    if (sa->mac_octets < ULK_SDLS_MIN_MAC_OCTETS || sa->mac_octets > ULK_SDLS_MAX_MAC_OCTETS)
        return sa_fail(err, errlen, "mac_octets must be 12..16");
    if (sa->window < 1 || sa->window > ULK_SDLS_MAX_WINDOW) return sa_fail(err, errlen, "window must be 1..1048576");
    return ULK_OK;
}

const char *ulk_sdls_service_name(ulk_sdls_service s)
{
    return s == ULK_SDLS_AUTHENTICATED_ENCRYPTION ? "authenticated-encryption" : "authentication";
}

size_t ulk_sdls_header_octets(const ulk_sdls_sa *sa)
{
    return sa && sa->enabled ? ULK_SDLS_SPI_OCTETS + (size_t)sa->iv_octets : 0;
}

size_t ulk_sdls_trailer_octets(const ulk_sdls_sa *sa) { return sa && sa->enabled ? (size_t)sa->mac_octets : 0; }

void ulk_sdls_layout(const ulk_sdls_sa *sa, ulk_ccsds_tc *tc)
{
    if (!tc) return;
    tc->sec_header_octets = (uint8_t)ulk_sdls_header_octets(sa);
    tc->sec_trailer_octets = (uint8_t)ulk_sdls_trailer_octets(sa);
}

/* ---------------------------------------------------------------- AES-256-GCM (EVP) */

int ulk_aes256_gcm_seal(const uint8_t key[ULK_SDLS_KEY_OCTETS], const uint8_t *iv, size_t n_iv, const uint8_t *aad,
                        size_t n_aad, const uint8_t *pt, size_t n_pt, uint8_t *ct, uint8_t *tag, size_t n_tag)
{
    if (!key || !iv || n_iv == 0 || n_iv > 1024 || (n_aad && !aad) || (n_pt && (!pt || !ct)) || !tag ||
        n_tag < 4 || n_tag > 16 || n_aad > INT32_MAX || n_pt > INT32_MAX)
        return ULK_EINVAL;
    EVP_CIPHER_CTX *x = EVP_CIPHER_CTX_new();
    if (!x) return ULK_ENOMEM;
    int len = 0, ok = EVP_EncryptInit_ex(x, EVP_aes_256_gcm(), NULL, NULL, NULL) == 1 &&
                      EVP_CIPHER_CTX_ctrl(x, EVP_CTRL_GCM_SET_IVLEN, (int)n_iv, NULL) == 1 &&
                      EVP_EncryptInit_ex(x, NULL, NULL, key, iv) == 1;
    if (ok && n_aad) ok = EVP_EncryptUpdate(x, NULL, &len, aad, (int)n_aad) == 1;
    if (ok && n_pt) ok = EVP_EncryptUpdate(x, ct, &len, pt, (int)n_pt) == 1;
    uint8_t last[16];
    if (ok) ok = EVP_EncryptFinal_ex(x, last, &len) == 1;
    uint8_t full[16];
    if (ok) ok = EVP_CIPHER_CTX_ctrl(x, EVP_CTRL_GCM_GET_TAG, 16, full) == 1;
    if (ok) memcpy(tag, full, n_tag); /* a shorter tag is the leading octets (SP 800-38D s.7.1, from memory) */
    EVP_CIPHER_CTX_free(x);
    return ok ? 0 : ULK_ENOMEM;
}

int ulk_aes256_gcm_open(const uint8_t key[ULK_SDLS_KEY_OCTETS], const uint8_t *iv, size_t n_iv, const uint8_t *aad,
                        size_t n_aad, const uint8_t *ct, size_t n_ct, const uint8_t *tag, size_t n_tag, uint8_t *pt)
{
    if (!key || !iv || n_iv == 0 || n_iv > 1024 || (n_aad && !aad) || (n_ct && (!ct || !pt)) || !tag || n_tag < 4 ||
        n_tag > 16 || n_aad > INT32_MAX || n_ct > INT32_MAX)
        return ULK_EINVAL;
    EVP_CIPHER_CTX *x = EVP_CIPHER_CTX_new();
    if (!x) return ULK_ENOMEM;
    int len = 0, ok = EVP_DecryptInit_ex(x, EVP_aes_256_gcm(), NULL, NULL, NULL) == 1 &&
                      EVP_CIPHER_CTX_ctrl(x, EVP_CTRL_GCM_SET_IVLEN, (int)n_iv, NULL) == 1 &&
                      EVP_DecryptInit_ex(x, NULL, NULL, key, iv) == 1;
    if (ok && n_aad) ok = EVP_DecryptUpdate(x, NULL, &len, aad, (int)n_aad) == 1;
    if (ok && n_ct) ok = EVP_DecryptUpdate(x, pt, &len, ct, (int)n_ct) == 1;
    if (ok) ok = EVP_CIPHER_CTX_ctrl(x, EVP_CTRL_GCM_SET_TAG, (int)n_tag, (void *)tag) == 1;
    if (!ok) {
        EVP_CIPHER_CTX_free(x);
        if (n_ct) OPENSSL_cleanse(pt, n_ct);
        return ULK_ENOMEM;
    }
    uint8_t last[16];
    int good = EVP_DecryptFinal_ex(x, last, &len) == 1; /* the tag comparison (constant time in libcrypto) */
    EVP_CIPHER_CTX_free(x);
    if (!good && n_ct) OPENSSL_cleanse(pt, n_ct);
    return good ? 1 : 0;
}

/* ---------------------------------------------------------------- key file */

typedef struct {
    char name[ULK_SDLS_KEY_NAME_MAX];
    uint8_t key[ULK_SDLS_KEY_OCTETS];
} key_entry;

struct ulk_sdls_keys {
    key_entry *e;
    size_t n, cap;
};

void ulk_sdls_keys_destroy(ulk_sdls_keys *k)
{
    if (!k) return;
    if (k->e) OPENSSL_cleanse(k->e, k->cap * sizeof *k->e);
    ulk_free(k->e);
    ulk_free(k);
}

static const uint8_t *key_find(const ulk_sdls_keys *k, const char *name)
{
    for (size_t i = 0; k && name && i < k->n; i++)
        if (!strcmp(k->e[i].name, name)) return k->e[i].key;
    return NULL;
}

int ulk_sdls_keys_has(const ulk_sdls_keys *k, const char *name) { return key_find(k, name) != NULL; }
size_t ulk_sdls_keys_count(const ulk_sdls_keys *k) { return k ? k->n : 0; }

static int hexval(int c)
{
    if (c >= '0' && c <= '9') return c - '0';
    if (c >= 'a' && c <= 'f') return c - 'a' + 10;
    if (c >= 'A' && c <= 'F') return c - 'A' + 10;
    return -1;
}

static int key_err(ulk_diag *diag, const char *file, int line, int col, const char *msg)
{
    ulk_loc l = {file, line, col, NULL};
    ulk_diag_add(diag, ULK_SEV_ERROR, &l, "%s", msg);
    return ULK_EPARSE;
}

/* Parses the key text. Messages never quote a key's digits: only positions and counts. */
int ulk_sdls_keys_load_mem(const char *text, size_t n, const char *name, ulk_sdls_keys **out, ulk_diag *diag)
{
    if (!out) return ULK_EINVAL;
    *out = NULL;
    if (!text && n) return ULK_EINVAL;
    const char *file = name ? name : "(keys)";
    ulk_sdls_keys *k = ulk_calloc(1, sizeof *k);
    if (!k) return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", file);
    int rc = 0, line = 0;
    size_t i = 0;
    while (i < n && rc == 0) {
        size_t s = i;
        while (i < n && text[i] != '\n') i++;
        size_t e = i;
        if (i < n) i++;
        line++;
        size_t p = s;
        while (p < e && (text[p] == ' ' || text[p] == '\t' || text[p] == '\r')) p++;
        if (p == e || text[p] == '#') continue;
        size_t ns = p;
        while (p < e && !isspace((unsigned char)text[p])) p++;
        size_t nl = p - ns;
        char nm[ULK_SDLS_KEY_NAME_MAX];
        if (nl == 0 || nl >= sizeof nm) {
            rc = key_err(diag, file, line, (int)(ns - s + 1), "expected a key name of 1..47 characters, then 64 hex digits");
            break;
        }
        memcpy(nm, text + ns, nl);
        nm[nl] = 0;
        if (!ulk_sdls_key_name_ok(nm)) {
            rc = key_err(diag, file, line, (int)(ns - s + 1), "a key name is letters, digits, '_', '.' or '-'");
            break;
        }
        while (p < e && (text[p] == ' ' || text[p] == '\t')) p++;
        size_t hs = p;
        while (p < e && !isspace((unsigned char)text[p])) p++;
        size_t hl = p - hs;
        while (p < e && isspace((unsigned char)text[p])) p++;
        if (p < e) {
            rc = key_err(diag, file, line, (int)(p - s + 1), "unexpected text after the key (one key a line: NAME HEX)");
            break;
        }
        if (key_find(k, nm)) {
            char msg[128];
            snprintf(msg, sizeof msg, "key '%s' appears twice", nm);
            rc = key_err(diag, file, line, (int)(ns - s + 1), msg);
            break;
        }
        if (hl != 2 * ULK_SDLS_KEY_OCTETS) {
            char msg[128];
            snprintf(msg, sizeof msg, "key '%s': expected 64 hex digits (AES-256), found %zu characters", nm, hl);
            rc = key_err(diag, file, line, (int)(hs - s + 1), msg);
            break;
        }
        if (k->n == k->cap) {
            size_t nc = k->cap ? 2 * k->cap : 4;
            key_entry *ne = ulk_calloc(nc, sizeof *ne);
            if (!ne) { rc = ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", file); break; }
            if (k->e) {
                memcpy(ne, k->e, k->n * sizeof *ne);
                OPENSSL_cleanse(k->e, k->cap * sizeof *k->e); /* no stale copy of a key in freed memory */
                ulk_free(k->e);
            }
            k->e = ne;
            k->cap = nc;
        }
        key_entry *ke = &k->e[k->n];
        memcpy(ke->name, nm, nl + 1);
        for (size_t j = 0; j < ULK_SDLS_KEY_OCTETS; j++) {
            int hi = hexval((unsigned char)text[hs + 2 * j]), lo = hexval((unsigned char)text[hs + 2 * j + 1]);
            if (hi < 0 || lo < 0) {
                char msg[128];
                snprintf(msg, sizeof msg, "key '%s': character %zu is not a hex digit", nm, 2 * j + (hi < 0 ? 1 : 2));
                rc = key_err(diag, file, line, (int)(hs - s + 2 * j + (hi < 0 ? 1 : 2)), msg);
                break;
            }
            ke->key[j] = (uint8_t)(hi << 4 | lo);
        }
        if (rc) break;
        k->n++;
    }
    if (rc == 0 && k->n == 0) rc = key_err(diag, file, 0, 0, "no key in the key file (one key a line: NAME HEX)");
    if (rc) {
        ulk_sdls_keys_destroy(k);
        return rc;
    }
    *out = k;
    return 0;
}

int ulk_sdls_keys_load(const char *path, ulk_sdls_keys **out, ulk_diag *diag)
{
    if (!out || !path) return ULK_EINVAL;
    *out = NULL;
    int fd = open(path, O_RDONLY | O_CLOEXEC);
    if (fd < 0) return ulk_fail(diag, ULK_EIO, "%s: cannot open the key file: %s", path, strerror(errno));
    struct stat st;
    if (fstat(fd, &st) != 0 || !S_ISREG(st.st_mode)) {
        close(fd);
        return ulk_fail(diag, ULK_EIO, "%s: the key file must be a regular file", path);
    }
    /* Checked on the open file, so a rename between the check and the read cannot cheat it. */
    if (st.st_mode & 077) {
        close(fd);
        return ulk_fail(diag, ULK_EIO,
                        "%s: mode %04o: a key file must not be readable or writable by group or others (chmod 600 %s)",
                        path, (unsigned)(st.st_mode & 07777), path);
    }
    if (st.st_size > 1 << 20) {
        close(fd);
        return ulk_fail(diag, ULK_ELIMIT, "%s: a key file of more than 1 MiB is not a key file", path);
    }
    size_t n = (size_t)st.st_size;
    char *buf = ulk_malloc(n + 1);
    if (!buf) {
        close(fd);
        return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path);
    }
    size_t got = 0;
    while (got < n) {
        ssize_t r = read(fd, buf + got, n - got);
        if (r < 0 && errno == EINTR) continue;
        if (r <= 0) break;
        got += (size_t)r;
    }
    int e = errno;
    close(fd);
    int rc;
    if (got != n) rc = ulk_fail(diag, ULK_EIO, "%s: cannot read the key file: %s", path, strerror(e));
    else rc = ulk_sdls_keys_load_mem(buf, n, path, out, diag);
    OPENSSL_cleanse(buf, n + 1);
    ulk_free(buf);
    return rc;
}

/* ---------------------------------------------------------------- one frame */

typedef struct {
    size_t sec;    /* offset of the security header (SPI) */
    size_t iv;     /* offset of the IV */
    size_t data;   /* offset of the data field */
    size_t n_data;
    size_t mac;    /* offset of the MAC */
    size_t end;    /* end of the MAC (FECF follows when configured) */
} layout;

static int frame_layout(const ulk_ccsds_tc *tc, const ulk_sdls_sa *sa, size_t n_frame, layout *l)
{
    size_t seg = tc->segment_header ? ULK_TCF_SEG_OCTETS : 0, fecf = tc->fecf ? ULK_TCF_FECF_OCTETS : 0;
    size_t h = ulk_sdls_header_octets(sa), t = ulk_sdls_trailer_octets(sa);
    if (!sa->enabled || tc->sec_header_octets != h || tc->sec_trailer_octets != t) return ULK_EINVAL;
    if (n_frame < ULK_TCF_HDR_OCTETS + seg + h + t + fecf + 1) return ULK_ELIMIT;
    l->sec = ULK_TCF_HDR_OCTETS + seg;
    l->iv = l->sec + ULK_SDLS_SPI_OCTETS;
    l->data = l->sec + h;
    l->mac = n_frame - fecf - t;
    l->n_data = l->mac - l->data;
    l->end = l->mac + t;
    return 0;
}

static void put_counter(uint8_t *iv, int n_iv, uint64_t c)
{
    memset(iv, 0, (size_t)n_iv);
    for (int i = 0; i < 8; i++) iv[n_iv - 1 - i] = (uint8_t)(c >> (8 * i));
}

static uint64_t get_counter(const uint8_t *iv, int n_iv)
{
    for (int i = 0; i < n_iv - 8; i++)
        if (iv[i]) return UINT64_MAX;
    uint64_t c = 0;
    for (int i = n_iv - 8; i < n_iv; i++) c = c << 8 | iv[i];
    return c;
}

static void put_fecf(const ulk_ccsds_tc *tc, uint8_t *frame, size_t n)
{
    if (!tc->fecf) return;
    uint16_t c = ulk_tcf_crc16(frame, n - 2);
    frame[n - 2] = (uint8_t)(c >> 8);
    frame[n - 1] = (uint8_t)c;
}

int ulk_sdls_protect(const ulk_ccsds_tc *tc, const ulk_sdls_sa *sa, const ulk_sdls_keys *keys, uint64_t counter,
                     uint8_t *frame, size_t n_frame, char *err, size_t errlen)
{
    char dummy[8];
    if (!err) { err = dummy; errlen = sizeof dummy; }
    if (!tc || !sa || !frame) return sa_fail(err, errlen, "nothing to secure");
    layout L = {0};
    if (ulk_sdls_sa_check(sa, err, errlen) || !sa->enabled || frame_layout(tc, sa, n_frame, &L))
        return sa_fail(err, errlen, "the frame is not laid out for this security association");
    if (counter == 0 || counter == ULK_SDLS_COUNTER_MAX) return sa_fail(err, errlen, "IV counter must be 1..2^64-2");
    const uint8_t *key = key_find(keys, sa->key);
    if (!key) {
        snprintf(err, errlen, "key '%s' is not in the key file", sa->key);
        return ULK_EINVAL;
    }
    frame[L.sec] = (uint8_t)(sa->spi >> 8);
    frame[L.sec + 1] = (uint8_t)sa->spi;
    put_counter(frame + L.iv, sa->iv_octets, counter);
    int rc;
    if (sa->service == ULK_SDLS_AUTHENTICATION) {
        /* everything before the trailer is additional data; nothing is encrypted (GMAC) */
        rc = ulk_aes256_gcm_seal(key, frame + L.iv, (size_t)sa->iv_octets, frame, L.mac, NULL, 0, NULL, frame + L.mac,
                                 (size_t)sa->mac_octets);
    } else {
        uint8_t ct[ULK_TCF_MAX_OCTETS];
        rc = ulk_aes256_gcm_seal(key, frame + L.iv, (size_t)sa->iv_octets, frame, L.data, frame + L.data, L.n_data, ct,
                                 frame + L.mac, (size_t)sa->mac_octets);
        if (!rc) memcpy(frame + L.data, ct, L.n_data);
    }
    if (rc) {
        snprintf(err, errlen, "AES-GCM failed in libcrypto");
        return rc;
    }
    put_fecf(tc, frame, n_frame);
    return 0;
}

/* the text lives with the verdict in the receive layer (ulk/decode.h) */
const char *ulk_sdls_verdict_str(ulk_security_verdict v) { return ulk_security_verdict_str(v); }

static void rx_reason(ulk_sdls_rx_result *res, ulk_security_verdict v, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
static void rx_reason(ulk_sdls_rx_result *res, ulk_security_verdict v, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(res->reason, sizeof res->reason, fmt, ap);
    va_end(ap);
    res->verdict = v;
}

int ulk_sdls_frame_read(const ulk_ccsds_tc *tc, const ulk_sdls_sa *sa, const uint8_t *frame, size_t n_frame,
                        ulk_sdls_rx_result *res)
{
    if (!tc || !sa || !frame || !res) return ULK_EINVAL;
    memset(res, 0, offsetof(ulk_sdls_rx_result, data));
    res->n_data = 0;
    layout L = {0};
    if (frame_layout(tc, sa, n_frame, &L)) {
        rx_reason(res, ULK_SEC_MALFORMED, "frame of %zu octets cannot hold its security header and trailer", n_frame);
        return 0;
    }
    res->spi = (uint16_t)(frame[L.sec] << 8 | frame[L.sec + 1]);
    res->counter = get_counter(frame + L.iv, sa->iv_octets);
    if (sa->service == ULK_SDLS_AUTHENTICATION) {
        memcpy(res->data, frame + L.data, L.n_data);
        res->n_data = L.n_data;
    }
    rx_reason(res, ULK_SEC_UNCHECKED, "secured (SPI %u, IV counter %" PRIu64 "), not authenticated: no keys given",
              (unsigned)res->spi, res->counter);
    return 0;
}

int ulk_sdls_check_frame(const ulk_ccsds_tc *tc, const ulk_sdls_sa *sa, const uint8_t *want, const uint8_t *got,
                         size_t n_frame, char *err, size_t errlen)
{
    layout L = {0};
    if (!tc || !sa || !want || !got || frame_layout(tc, sa, n_frame, &L)) {
        snprintf(err, errlen, "the frame does not have the link's security header and trailer");
        return ULK_EPARSE;
    }
    if (memcmp(want, got, L.sec)) {
        snprintf(err, errlen, "the frame's headers are not the ones its fields make");
        return ULK_EPARSE;
    }
    uint16_t spi = (uint16_t)(got[L.sec] << 8 | got[L.sec + 1]);
    if (spi != sa->spi) {
        snprintf(err, errlen, "the frame's SPI %u is not the link's %u", (unsigned)spi, (unsigned)sa->spi);
        return ULK_EPARSE;
    }
    uint64_t c = get_counter(got + L.iv, sa->iv_octets);
    if (c == 0 || c == UINT64_MAX) {
        snprintf(err, errlen, "the frame's IV is not a counter 1..2^64-2");
        return ULK_EPARSE;
    }
    if (sa->service == ULK_SDLS_AUTHENTICATION && memcmp(want + L.data, got + L.data, L.n_data)) {
        snprintf(err, errlen, "the frame's data field is not the one its fields make");
        return ULK_EPARSE;
    }
    if (tc->fecf && ulk_tcf_crc16(got, n_frame - 2) != (uint16_t)(got[n_frame - 2] << 8 | got[n_frame - 1])) {
        snprintf(err, errlen, "the frame's FECF is not the CRC of the frame");
        return ULK_EPARSE;
    }
    return 0;
}

/* ---------------------------------------------------------------- state file */

typedef struct {
    uint16_t spi;
    uint64_t value;
    int has_res;
    uint64_t res_first, res_last;
    char *res_path;
} state_entry;

struct ulk_sdls_state {
    ulk_sdls_side side;
    state_entry *e;
    size_t n, cap;
};

int ulk_sdls_state_create(ulk_sdls_side side, ulk_sdls_state **out)
{
    if (!out) return ULK_EINVAL;
    *out = ulk_calloc(1, sizeof **out);
    if (!*out) return ULK_ENOMEM;
    (*out)->side = side;
    return 0;
}

void ulk_sdls_state_destroy(ulk_sdls_state *s)
{
    if (!s) return;
    for (size_t i = 0; i < s->n; i++) ulk_free(s->e[i].res_path);
    ulk_free(s->e);
    ulk_free(s);
}

static state_entry *state_find(const ulk_sdls_state *s, uint16_t spi)
{
    for (size_t i = 0; s && i < s->n; i++)
        if (s->e[i].spi == spi) return &s->e[i];
    return NULL;
}

static state_entry *state_get(ulk_sdls_state *s, uint16_t spi)
{
    state_entry *e = state_find(s, spi);
    if (e) return e;
    if (s->n == s->cap) {
        size_t nc = s->cap ? 2 * s->cap : 4;
        state_entry *ne = ulk_realloc(s->e, nc * sizeof *ne);
        if (!ne) return NULL;
        s->e = ne;
        s->cap = nc;
    }
    e = &s->e[s->n++];
    memset(e, 0, sizeof *e);
    e->spi = spi;
    e->value = s->side == ULK_SDLS_SEND ? 1 : 0;
    return e;
}

uint64_t ulk_sdls_state_value(const ulk_sdls_state *s, uint16_t spi)
{
    const state_entry *e = state_find(s, spi);
    if (e) return e->value;
    return s && s->side == ULK_SDLS_RECEIVE ? 0 : 1;
}

int ulk_sdls_state_set(ulk_sdls_state *s, uint16_t spi, uint64_t value)
{
    if (!s) return ULK_EINVAL;
    state_entry *e = state_get(s, spi);
    if (!e) return ULK_ENOMEM;
    e->value = value;
    return 0;
}

int ulk_sdls_state_reserve(ulk_sdls_state *s, uint16_t spi, uint64_t first, uint64_t last, const char *path)
{
    if (!s || s->side != ULK_SDLS_SEND || !path || last < first) return ULK_EINVAL;
    if (first != ulk_sdls_state_value(s, spi)) return ULK_EINVAL;
    if (last >= ULK_SDLS_COUNTER_MAX - 1) return ULK_ELIMIT;
    char *p = ulk_strdup(path);
    state_entry *e = p ? state_get(s, spi) : NULL;
    if (!e) {
        ulk_free(p);
        return ULK_ENOMEM;
    }
    ulk_free(e->res_path);
    e->value = last + 1;
    e->has_res = 1;
    e->res_first = first;
    e->res_last = last;
    e->res_path = p;
    return 0;
}

int ulk_sdls_state_reservation(const ulk_sdls_state *s, uint16_t spi, uint64_t *first, uint64_t *last,
                               const char **path)
{
    const state_entry *e = state_find(s, spi);
    if (!e || !e->has_res) return 0;
    if (first) *first = e->res_first;
    if (last) *last = e->res_last;
    if (path) *path = e->res_path;
    return 1;
}

static int parse_u64(const char *s, uint64_t *v, const char **end)
{
    if (!isdigit((unsigned char)*s)) return -1;
    errno = 0;
    char *e;
    unsigned long long x = strtoull(s, &e, 10);
    if (errno) return -1;
    *v = x;
    *end = e;
    return 0;
}

static int state_err(ulk_diag *diag, const char *file, int line, const char *msg)
{
    ulk_loc l = {file, line, 1, NULL};
    ulk_diag_add(diag, ULK_SEV_ERROR, &l, "%s", msg);
    return ULK_EPARSE;
}

static const char *side_name(ulk_sdls_side s) { return s == ULK_SDLS_SEND ? "send" : "receive"; }

int ulk_sdls_state_load(const char *path, ulk_sdls_side side, ulk_sdls_state **out, int *created, ulk_diag *diag)
{
    if (!path || !out) return ULK_EINVAL;
    *out = NULL;
    if (created) *created = 0;
    struct stat st;
    if (stat(path, &st) != 0 && errno == ENOENT) {
        if (created) *created = 1;
        int rc = ulk_sdls_state_create(side, out);
        return rc ? ulk_fail(diag, rc, "%s: out of memory", path) : 0;
    }
    char *text = NULL;
    size_t n = 0;
    int rc = ulk_read_file(path, 16u << 20, &text, &n, diag);
    if (rc) return rc;
    ulk_sdls_state *s = NULL;
    if (ulk_sdls_state_create(side, &s)) {
        ulk_free(text);
        return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path);
    }
    int line = 0, seen_head = 0;
    char *p = text;
    rc = 0;
    while (*p && !rc) {
        char *e = strchr(p, '\n');
        if (e) *e = 0;
        line++;
        char *q = p;
        p = e ? e + 1 : p + strlen(p);
        while (*q == ' ' || *q == '\t') q++;
        size_t ql = strlen(q);
        while (ql && (q[ql - 1] == '\r' || q[ql - 1] == ' ' || q[ql - 1] == '\t')) q[--ql] = 0;
        if (!*q || *q == '#') continue;
        if (!seen_head) {
            int ver = 0;
            char sd[16] = "";
            if (sscanf(q, "ulk-sdls-state %d %15s", &ver, sd) != 2 || ver != 1) {
                rc = state_err(diag, path, line, "expected the first line 'ulk-sdls-state 1 send' or 'ulk-sdls-state 1 receive'");
                break;
            }
            ulk_sdls_side fs = !strcmp(sd, "send") ? ULK_SDLS_SEND : !strcmp(sd, "receive") ? ULK_SDLS_RECEIVE : (ulk_sdls_side)-1;
            if ((int)fs < 0) {
                rc = state_err(diag, path, line, "the side must be send or receive");
                break;
            }
            if (fs != side) {
                char msg[160];
                snprintf(msg, sizeof msg, "this is a %s-side state file; a %s-side one is needed here", side_name(fs),
                         side_name(side));
                state_err(diag, path, line, msg);
                rc = ULK_EMISMATCH;
                break;
            }
            seen_head = 1;
            continue;
        }
        const char *c = q;
        uint64_t spi, v, a, b;
        if (!strncmp(c, "spi ", 4)) {
            const char *want = side == ULK_SDLS_SEND ? " next " : " last ";
            if (parse_u64(c + 4, &spi, &c) || spi < 1 || spi > 65534 || strncmp(c, want, 6) ||
                parse_u64(c + 6, &v, &c) || *c || (side == ULK_SDLS_SEND && (v < 1 || v >= ULK_SDLS_COUNTER_MAX))) {
                rc = state_err(diag, path, line,
                               side == ULK_SDLS_SEND ? "expected 'spi N next C' (N 1..65534, C 1..2^64-2)"
                                                     : "expected 'spi N last C' (N 1..65534)");
                break;
            }
            if (state_find(s, (uint16_t)spi)) {
                rc = state_err(diag, path, line, "an SPI appears twice");
                break;
            }
            state_entry *se = state_get(s, (uint16_t)spi);
            if (!se) { rc = ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path); break; }
            se->value = v;
        } else if (side == ULK_SDLS_SEND && !strncmp(c, "reserved ", 9)) {
            if (parse_u64(c + 9, &spi, &c) || *c != ' ' || parse_u64(c + 1, &a, &c) || *c != ' ' ||
                parse_u64(c + 1, &b, &c) || *c != ' ' || !c[1] || b < a || spi < 1 || spi > 65534) {
                rc = state_err(diag, path, line, "expected 'reserved SPI FIRST LAST PATH'");
                break;
            }
            state_entry *se = state_find(s, (uint16_t)spi);
            if (!se || se->has_res || b >= se->value) {
                rc = state_err(diag, path, line, "a reservation must follow its 'spi' line, once, below its next counter");
                break;
            }
            se->res_path = ulk_strdup(c + 1);
            if (!se->res_path) { rc = ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path); break; }
            se->has_res = 1;
            se->res_first = a;
            se->res_last = b;
        } else {
            rc = state_err(diag, path, line,
                           side == ULK_SDLS_SEND ? "expected 'spi N next C' or 'reserved SPI FIRST LAST PATH'"
                                                 : "expected 'spi N last C'");
        }
    }
    if (!rc && !seen_head) rc = state_err(diag, path, line ? line : 1, "empty state file: expected 'ulk-sdls-state 1 send|receive'");
    ulk_free(text);
    if (rc) {
        ulk_sdls_state_destroy(s);
        return rc;
    }
    *out = s;
    return 0;
}

int ulk_sdls_state_save(const ulk_sdls_state *s, const char *path, ulk_diag *diag)
{
    if (!s || !path) return ULK_EINVAL;
    size_t n = strlen(path);
    char *tmp = ulk_malloc(n + 16);
    if (!tmp) return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path);
    memcpy(tmp, path, n);
    memcpy(tmp + n, ".tmp.XXXXXX", 12);
    int fd = mkstemp(tmp);
    if (fd < 0) {
        int e = errno;
        ulk_free(tmp);
        return ulk_fail(diag, ULK_EIO, "%s: cannot create the state file: %s", path, strerror(e));
    }
    fchmod(fd, 0600);
    FILE *f = fdopen(fd, "w");
    if (!f) {
        close(fd);
        unlink(tmp);
        ulk_free(tmp);
        return ulk_fail(diag, ULK_EIO, "%s: cannot write the state file", path);
    }
    fprintf(f, "ulk-sdls-state 1 %s\n", side_name(s->side));
    fprintf(f, "# %s\n", s->side == ULK_SDLS_SEND ? "next IV counter to hand out per SPI; never lower it"
                                                   : "highest IV counter accepted per SPI");
    for (size_t i = 0; i < s->n; i++) {
        const state_entry *e = &s->e[i];
        fprintf(f, "spi %u %s %" PRIu64 "\n", (unsigned)e->spi, s->side == ULK_SDLS_SEND ? "next" : "last", e->value);
        if (s->side == ULK_SDLS_SEND && e->has_res)
            fprintf(f, "reserved %u %" PRIu64 " %" PRIu64 " %s\n", (unsigned)e->spi, e->res_first, e->res_last, e->res_path);
    }
    int bad = ferror(f) != 0 || fflush(f) != 0;
    int e = errno;
    if (!bad && fsync(fileno(f)) != 0) { bad = 1; e = errno; }
    if (fclose(f) != 0 && !bad) { bad = 1; e = errno; }
    if (!bad && rename(tmp, path) != 0) { bad = 1; e = errno; }
    if (bad) {
        unlink(tmp);
        ulk_free(tmp);
        return ulk_fail(diag, ULK_EIO, "%s: cannot write the state file: %s; it is unchanged", path, strerror(e));
    }
    ulk_free(tmp);
    /* the rename itself reaches the disk with the folder */
    char *dir = ulk_strdup(path);
    if (dir) {
        char *sl = strrchr(dir, '/');
        const char *d = sl ? (sl == dir ? "/" : (*sl = 0, dir)) : ".";
        int dfd = open(d, O_RDONLY | O_DIRECTORY | O_CLOEXEC);
        if (dfd >= 0) {
            fsync(dfd);
            close(dfd);
        }
        ulk_free(dir);
    }
    return 0;
}

int ulk_sdls_state_lock(const char *path, ulk_diag *diag)
{
    if (!path) return ULK_EINVAL;
    size_t n = strlen(path);
    char *lp = ulk_malloc(n + 6);
    if (!lp) return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path);
    memcpy(lp, path, n);
    memcpy(lp + n, ".lock", 6);
    int fd = open(lp, O_RDWR | O_CREAT | O_CLOEXEC, 0600);
    if (fd < 0) {
        int e = errno;
        int rc = ulk_fail(diag, ULK_EIO, "%s: cannot create the state's lock file: %s", lp, strerror(e));
        ulk_free(lp);
        return rc;
    }
    if (flock(fd, LOCK_EX | LOCK_NB) != 0) {
        int e = errno;
        close(fd);
        int rc = e == EWOULDBLOCK
                     ? ulk_fail(diag, ULK_EIO, "%s: in use by another ulk run (%s is locked); try again when it has finished",
                                path, lp)
                     : ulk_fail(diag, ULK_EIO, "%s: cannot lock %s: %s", path, lp, strerror(e));
        ulk_free(lp);
        return rc;
    }
    ulk_free(lp);
    return fd;
}

void ulk_sdls_state_unlock(int fd)
{
    if (fd >= 0) close(fd); /* closing releases the flock */
}

/* ---------------------------------------------------------------- receiving side */

struct ulk_sdls_rx {
    ulk_sdls_sa sa;
    const uint8_t *key;
    ulk_sdls_state *state; /* not owned; NULL: the window is this run's */
    int have_last;
    uint64_t last;
};

int ulk_sdls_rx_create(const ulk_sdls_sa *sa, const ulk_sdls_keys *keys, ulk_sdls_state *state, ulk_sdls_rx **out,
                       ulk_diag *diag)
{
    if (!out) return ULK_EINVAL;
    *out = NULL;
    char why[160];
    if (!sa || !sa->enabled || ulk_sdls_sa_check(sa, why, sizeof why))
        return ulk_fail(diag, ULK_EINVAL, "the link has no valid security association");
    if (state && state->side != ULK_SDLS_RECEIVE)
        return ulk_fail(diag, ULK_EINVAL, "a receive-side state is needed to verify frames");
    const uint8_t *key = key_find(keys, sa->key);
    if (!key) return ulk_fail(diag, ULK_EINVAL, "key '%s' (SPI %u) is not in the key file", sa->key, (unsigned)sa->spi);
    ulk_sdls_rx *rx = ulk_calloc(1, sizeof *rx);
    if (!rx) return ulk_fail(diag, ULK_ENOMEM, "out of memory");
    rx->sa = *sa;
    rx->key = key;
    rx->state = state;
    if (state) {
        rx->have_last = 1;
        rx->last = ulk_sdls_state_value(state, sa->spi);
    }
    *out = rx;
    return 0;
}

void ulk_sdls_rx_destroy(ulk_sdls_rx *rx) { ulk_free(rx); }

int ulk_sdls_rx_frame(ulk_sdls_rx *rx, const ulk_ccsds_tc *tc, const uint8_t *frame, size_t n_frame,
                      ulk_sdls_rx_result *res)
{
    if (!rx || !tc || !frame || !res) return ULK_EINVAL;
    const ulk_sdls_sa *sa = &rx->sa;
    ulk_sdls_frame_read(tc, sa, frame, n_frame, res);
    res->n_data = 0;
    if (res->verdict == ULK_SEC_MALFORMED) return 0;
    layout L = {0};
    frame_layout(tc, sa, n_frame, &L);
    if (res->spi != sa->spi) {
        rx_reason(res, ULK_SEC_UNKNOWN_SPI, "unknown SPI %u (the link's is %u)", (unsigned)res->spi, (unsigned)sa->spi);
        return 0;
    }
    /* MAC first: the counter of a frame that does not authenticate means nothing. */
    int ok;
    if (sa->service == ULK_SDLS_AUTHENTICATION) {
        ok = ulk_aes256_gcm_open(rx->key, frame + L.iv, (size_t)sa->iv_octets, frame, L.mac, NULL, 0, frame + L.mac,
                                 (size_t)sa->mac_octets, NULL);
        if (ok == 1) memcpy(res->data, frame + L.data, L.n_data);
    } else {
        ok = ulk_aes256_gcm_open(rx->key, frame + L.iv, (size_t)sa->iv_octets, frame, L.data, frame + L.data, L.n_data,
                                 frame + L.mac, (size_t)sa->mac_octets, res->data);
    }
    if (ok < 0) return ok;
    if (ok == 0) {
        rx_reason(res, ULK_SEC_AUTH_FAILED, "authentication failed (SPI %u, IV counter %" PRIu64 "): the MAC does not verify",
                  (unsigned)res->spi, res->counter);
        return 0;
    }
    uint64_t c = res->counter;
    /* Anti-replay (CCSDS 355.0-B-1 section 4, from memory of its sequence-number window): above the last
     * accepted, at most window above it. Without a state the first authentic frame opens it. */
    if (rx->have_last && c <= rx->last) {
        OPENSSL_cleanse(res->data, L.n_data);
        rx_reason(res, ULK_SEC_REPLAYED, "replayed: IV counter %" PRIu64 " is not above the last accepted %" PRIu64, c,
                  rx->last);
        return 0;
    }
    if (c == UINT64_MAX || (rx->have_last && c - rx->last > sa->window)) {
        OPENSSL_cleanse(res->data, L.n_data);
        rx_reason(res, ULK_SEC_OUTSIDE_WINDOW,
                  "outside the window: IV counter %" PRIu64 " is more than %u above the last accepted %" PRIu64, c,
                  (unsigned)sa->window, rx->last);
        return 0;
    }
    if (rx->state) {
        int rc = ulk_sdls_state_set(rx->state, sa->spi, c);
        if (rc) return rc;
    }
    rx->have_last = 1;
    rx->last = c;
    res->n_data = L.n_data;
    res->verdict = ULK_SEC_ACCEPTED;
    res->reason[0] = 0;
    return 0;
}

/* ---------------------------------------------------------------- a whole upload */

int ulk_sdls_secure_upload(struct ulk_upload *u, const ulk_sdls_keys *keys, uint64_t first, ulk_diag *diag)
{
    if (!u) return ULK_EINVAL;
    const ulk_tc_params *T = &u->link.tc;
    const ulk_sdls_sa *sa = &T->security;
    if (u->link.profile != ULK_PROFILE_CCSDS_TC || !sa->enabled)
        return ulk_fail(diag, ULK_EINVAL, "the upload's link has no security association");
    if (u->lean) return ulk_fail(diag, ULK_EINVAL, "a lean upload cannot be secured");
    if (!key_find(keys, sa->key))
        return ulk_fail(diag, ULK_EINVAL, "key '%s' (SPI %u) is not in the key file", sa->key, (unsigned)sa->spi);
    if (first == 0 || first >= ULK_SDLS_COUNTER_MAX || u->n_cmds >= ULK_SDLS_COUNTER_MAX - first)
        return ulk_fail(diag, ULK_ELIMIT, "SPI %u: IV counters from %" PRIu64 " for %zu frames would run out",
                        (unsigned)sa->spi, first, u->n_cmds);
    for (size_t i = 0; i < u->n_cmds; i++) {
        ulk_upload_cmd *c = &u->cmds[i];
        char why[160] = "CLTU build failed";
        int rc = ulk_sdls_protect(&T->frame, sa, keys, first + i, c->frame, c->n_frame, why, sizeof why);
        size_t nc = 0;
        if (!rc) rc = ulk_cltu_build(&T->frame, c->frame, c->n_frame, c->cltu, c->n_cltu, &nc);
        if (!rc && nc != c->n_cltu) rc = ULK_EINVAL;
        if (rc) return ulk_fail(diag, rc, "command %zu (line %d): cannot secure its frame: %s", i + 1, c->line, why);
    }
    return 0;
}
