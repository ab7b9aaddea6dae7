/* tests/fuzz/fuzz_sdls.c - libFuzzer target: the key file parser and the receiving side of
 * Space Data Link Security (ulk/sdls.h).
 *
 * The first input byte chooses:
 *   even: the rest is key file text (ulk_sdls_keys_load_mem); a ring that loads is queried;
 *   odd:  the rest is a received TC frame, verified under a fixed security association of
 *         both services (SPI 7, a fixed test key), with and without a segment header and FECF
 *         layout, and read without a key; an accepted frame would be a forgery, so abort().
 */
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "ulk/sdls.h"

static const char KEYS[] = "k 000102030405060708090a0b0c0d0e0f101112131415161718191a1b1c1d1e1f\n";

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    if (size < 1) return 0;
    const uint8_t *p = data + 1;
    size_t n = size - 1;
    if (!(data[0] & 1)) {
        ulk_diag *d = ulk_diag_create();
        ulk_sdls_keys *k = NULL;
        if (ulk_sdls_keys_load_mem((const char *)p, n, "fuzz.keys", &k, d) == 0) {
            (void)ulk_sdls_keys_has(k, "k");
            (void)ulk_sdls_keys_count(k);
        }
        ulk_sdls_keys_destroy(k);
        ulk_diag_destroy(d);
        return 0;
    }
    if (n > ULK_TCF_MAX_OCTETS) n = ULK_TCF_MAX_OCTETS;
    ulk_sdls_keys *k = NULL;
    if (ulk_sdls_keys_load_mem(KEYS, sizeof KEYS - 1, "fixed", &k, NULL)) abort();
    static ulk_sdls_rx_result res;
    for (int v = 0; v < 4; v++) {
        ulk_sdls_sa sa;
        ulk_sdls_sa_default(&sa);
        sa.enabled = 1;
        sa.spi = 7;
        strcpy(sa.key, "k");
        sa.service = (v & 1) ? ULK_SDLS_AUTHENTICATED_ENCRYPTION : ULK_SDLS_AUTHENTICATION;
        sa.mac_octets = (v & 2) ? 12 : 16;
        ulk_ccsds_tc tc;
        ulk_ccsds_tc_default(&tc);
        tc.segment_header = v >> 1;
        tc.fecf = !(v & 1);
        ulk_sdls_layout(&sa, &tc);
        ulk_sdls_rx *rx = NULL;
        if (ulk_sdls_rx_create(&sa, k, NULL, &rx, NULL)) abort();
        if (ulk_sdls_rx_frame(rx, &tc, p, n, &res) == 0 && res.verdict == ULK_SEC_ACCEPTED) abort();
        ulk_sdls_frame_read(&tc, &sa, p, n, &res);
        ulk_sdls_rx_destroy(rx);
    }
    ulk_sdls_keys_destroy(k);
    return 0;
}
