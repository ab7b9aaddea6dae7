/* tests/fuzz/fuzz_upload.c - libFuzzer target: the upload file reader (ulk_upload_read_mem).
 *
 * Why a digest fix-up: the reader checks the SHA-256 digest before anything else, so random
 * bytes would almost never get past it. The first input byte chooses:
 *   even: the rest is a file body without its digest line; the target appends the correct
 *         line, so the fuzzer reaches the field checks (the "hand-edited, digest recomputed"
 *         case the format's reader must still refuse when the fields disagree);
 *   odd:  the rest is given as it is (digest and framing checks themselves).
 * A file that reads is printed back as a command list and expanded into its stream. */
#include <openssl/evp.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "ulk/subbit.h"
#include "ulk/upload.h"

static FILE *devnull;

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    if (size < 1) return 0;
    if (!devnull && !(devnull = fopen("/dev/null", "w"))) abort();
    const int fixup = !(data[0] & 1);
    const char *body = (const char *)data + 1;
    size_t n = size - 1;
    char *text = malloc(n + 128);
    if (!text) return 0;
    memcpy(text, body, n);
    size_t len = n;
    if (fixup) {
        unsigned char md[EVP_MAX_MD_SIZE];
        unsigned int mdlen = 0;
        EVP_Digest(text, n, md, &mdlen, EVP_sha256(), NULL);
        len += (size_t)sprintf(text + n, "  \"digest\": \"sha256:");
        for (unsigned i = 0; i < mdlen; i++) len += (size_t)sprintf(text + len, "%02x", md[i]);
        len += (size_t)sprintf(text + len, "\"\n}\n");
    }
    ulk_diag *diag = ulk_diag_create();
    ulk_upload *u = NULL;
    int rc = ulk_upload_read_mem("fuzz.ulku", text, len, &u, diag);
    if (rc == 0) {
        if (!u) abort();
        if (ulk_upload_print_list(u, devnull) != 0) abort();
        (void)ulk_upload_duration_s(u);
        uint64_t total = ulk_upload_n_subbits(u);
        if (total < 200000) {
            ulk_stream *s = ulk_stream_create(u);
            if (s) {
                uint8_t sb[4096];
                uint64_t got = 0;
                size_t k;
                while ((k = ulk_stream_read(s, sb, NULL, sizeof sb)) > 0) got += k;
                if (got != total) abort();
                ulk_stream_destroy(s);
            }
        }
    } else if (u) {
        abort();
    }
    ulk_upload_destroy(u);
    ulk_diag_destroy(diag);
    free(text);
    return 0;
}
