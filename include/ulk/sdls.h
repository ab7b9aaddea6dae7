/* ulk/sdls.h - authenticated telecommand frames on the CCSDS profile: the Space Data Link
 * Security protocol (CCSDS 355.0-B-1, September 2015, section 3; from memory) with AES-256-GCM (CCSDS 352.0-B-2,
 * August 2019; its GCM section, 5, from memory).
 *
 * Why a stage of its own: an uplink that accepts any well-formed frame obeys whoever can
 * radiate one. Every TC frame of a secured link carries a security header (SPI and IV) after
 * the primary header and segment header, and a security trailer (the MAC) before the FECF:
 *
 *   | primary header 5 | segment header 0/1 | SPI 2 | IV iv_octets | data field | MAC mac_octets | FECF 0/2 |
 *
 * With AES-GCM the IV doubles as the anti-replay sequence number, so the sequence-number
 * and pad-length fields of the security header have length 0. The frame length field and the
 * FECF cover header and trailer. The MAC covers the primary header, segment header,
 * security header and data field:
 *   - service authentication: all of it is additional authenticated data, nothing is
 *     encrypted (GMAC);
 *   - service authenticated-encryption: the headers are additional authenticated data, the
 *     data field is encrypted.
 * The IV is a counter: its last 8 octets hold the counter big-endian, the octets before them
 * are 0. The sending side hands out every counter once (the state file); the receiving side
 * accepts a counter only above the last one it accepted and at most `window` above it.
 *
 * All cryptography is OpenSSL libcrypto's EVP interface; nothing here implements a cipher.
 * Key material never leaves this module: it is not printed, not put in a message, and wiped
 * (OPENSSL_cleanse) when the key ring is destroyed.
 *
 * Usage, sending (what `ulk compile --keys --state` does):
 *     ulk_sdls_keys *k; ulk_sdls_keys_load("ops.keys", &k, diag);
 *     ulk_sdls_state *s; int created; ulk_sdls_state_load("ops.state", ULK_SDLS_SEND, &s, &created, diag);
 *     uint64_t first = ulk_sdls_state_value(s, sa->spi);
 *     ulk_sdls_secure_upload(upload, sa, k, first, diag);     // counters first .. first+n-1
 *     write the upload to a temporary file, ulk_sdls_state_reserve + _save, rename the upload
 * Receiving: ulk_sdls_rx_create(sa, keys, state, &rx, diag); ulk_sdls_rx_frame() per frame.
 */
#ifndef ULK_SDLS_H
#define ULK_SDLS_H

#include <stddef.h>
#include <stdint.h>

#include "ulk/ccsds.h"
#include "ulk/decode.h"
#include "ulk/error.h"

#ifdef __cplusplus
extern "C" {
#endif

#define ULK_SDLS_KEY_OCTETS 32       /* AES-256 */
#define ULK_SDLS_SPI_OCTETS 2
/* ULK_SDLS_KEY_NAME_MAX (key names: 1..47 of [A-Za-z0-9_.-]) is in ulk/link.h */
#define ULK_SDLS_MIN_IV_OCTETS 12    /* the counter needs 8; GCM's recommended IV is 12 */
#define ULK_SDLS_MAX_IV_OCTETS 16
#define ULK_SDLS_MIN_MAC_OCTETS 12   /* 96..128-bit tags (NIST SP 800-38D s.5.2.1.2, from memory) */
#define ULK_SDLS_MAX_MAC_OCTETS 16
#define ULK_SDLS_MAX_WINDOW 1048576u
#define ULK_SDLS_COUNTER_MAX UINT64_MAX /* never handed out: the counter would wrap after it */

/* ulk_sdls_service, ulk_sdls_algorithm and ulk_sdls_sa, the security association of a link
 * (the dictionary's link.tc.security map), are declared in ulk/link.h with the link model. */

/* Defaults: disabled, SPI 0, authentication, aes-256-gcm, IV 12, MAC 16, window 64. */
void ulk_sdls_sa_default(ulk_sdls_sa *sa);
/* Checks an enabled SA's fields. 0, or ULK_EINVAL with a one-line reason naming the field. */
int ulk_sdls_sa_check(const ulk_sdls_sa *sa, char *err, size_t errlen);
/* 1 when name is a valid key name (1..47 of A-Z a-z 0-9 _ . -). */
int ulk_sdls_key_name_ok(const char *name);
const char *ulk_sdls_service_name(ulk_sdls_service s); /* "authentication", "authenticated-encryption" */
/* Security header octets (2 + iv_octets) and trailer octets (mac_octets); 0 when disabled. */
size_t ulk_sdls_header_octets(const ulk_sdls_sa *sa);
size_t ulk_sdls_trailer_octets(const ulk_sdls_sa *sa);
/* Sets tc's sec_header_octets / sec_trailer_octets from sa (0 when disabled), so that
 * ulk_tcf_build lays frames out with room for them and ulk_tcf_parse / ulk_cltu_decode know
 * where the data field is. */
void ulk_sdls_layout(const ulk_sdls_sa *sa, ulk_ccsds_tc *tc);

/* ---- AES-256-GCM through OpenSSL EVP ---- */

/* Encrypts n_pt octets (pt may be NULL when 0) with additional data aad (may be NULL when
 * 0) under key and iv (n_iv >= 1; 12 is GCM's fast path, others are hashed as GCM defines).
 * ct receives n_pt octets, tag n_tag (4..16) octets. Returns 0, ULK_EINVAL, or ULK_ENOMEM
 * when libcrypto fails. */
int ulk_aes256_gcm_seal(const uint8_t key[ULK_SDLS_KEY_OCTETS], const uint8_t *iv, size_t n_iv, const uint8_t *aad,
                        size_t n_aad, const uint8_t *pt, size_t n_pt, uint8_t *ct, uint8_t *tag, size_t n_tag);
/* Decrypts and verifies: returns 1 when the tag verifies (pt holds n_ct octets), 0 when it
 * does not (pt is zeroed), negative on a bad argument or a libcrypto failure. */
int ulk_aes256_gcm_open(const uint8_t key[ULK_SDLS_KEY_OCTETS], const uint8_t *iv, size_t n_iv, const uint8_t *aad,
                        size_t n_aad, const uint8_t *ct, size_t n_ct, const uint8_t *tag, size_t n_tag, uint8_t *pt);

/* ---- key file ----
 * Text, one key a line: NAME HEX, HEX exactly 64 hex digits (AES-256); blank lines and lines
 * starting with '#' (after blanks) are ignored; a name twice is an error. A file readable or
 * writable by group or others is refused, naming its mode ("mode 0644: must not be readable
 * by group or others (chmod 600)"). Errors carry file:line:col and never any key material. */
typedef struct ulk_sdls_keys ulk_sdls_keys;

/* Returns 0 with *out; ULK_EIO (cannot read, or the mode), ULK_EPARSE (a bad line), ULK_ENOMEM. */
int ulk_sdls_keys_load(const char *path, ulk_sdls_keys **out, ulk_diag *diag);
/* The same from memory (no mode check); name is used in messages. */
int ulk_sdls_keys_load_mem(const char *text, size_t n, const char *name, ulk_sdls_keys **out, ulk_diag *diag);
/* 1 when the ring holds a key of that name. */
int ulk_sdls_keys_has(const ulk_sdls_keys *k, const char *name);
size_t ulk_sdls_keys_count(const ulk_sdls_keys *k);
/* Wipes every key (OPENSSL_cleanse) and frees. NULL does nothing. */
void ulk_sdls_keys_destroy(ulk_sdls_keys *k);

/* ---- one frame ---- */

/* Secures a frame laid out by ulk_tcf_build under tc (whose sec_* octets are sa's layout):
 * writes the SPI and the IV holding counter, computes the MAC (and encrypts the data field for
 * authenticated-encryption) with the key sa->key of keys, and recomputes the FECF. In place.
 * Returns 0; ULK_EINVAL (message in err) for a layout that does not match, an unknown key,
 * counter 0 or ULK_SDLS_COUNTER_MAX; ULK_ENOMEM when libcrypto fails. */
int ulk_sdls_protect(const ulk_ccsds_tc *tc, const ulk_sdls_sa *sa, const ulk_sdls_keys *keys, uint64_t counter,
                     uint8_t *frame, size_t n_frame, char *err, size_t errlen);

/* ulk_security_verdict, the verdict on a received secured frame, is declared in ulk/decode.h
 * beside the other reasons a received unit is refused (receiver events carry it). */
const char *ulk_sdls_verdict_str(ulk_security_verdict v); /* "accepted", "authentication failed", ...: the same as
                                                       * ulk_security_verdict_str (ulk/decode.h) */

typedef struct {
    ulk_security_verdict verdict;
    char reason[160];         /* one line; "" when accepted */
    uint16_t spi;             /* from the security header */
    uint64_t counter;         /* the IV's counter (UINT64_MAX when its leading octets are not 0) */
    /* The frame data field in clear: when ACCEPTED, and when UNCHECKED under the
     * authentication service (it travels in clear); else n_data 0. */
    uint8_t data[ULK_TCF_MAX_OCTETS];
    size_t n_data;
} ulk_sdls_rx_result;

/* Reads the SPI and counter of a secured frame without a key (for inspect and for decode
 * without keys): verdict UNCHECKED (or MALFORMED), the data field when it is in clear.
 * Returns 0 or ULK_EINVAL for NULL. */
int ulk_sdls_frame_read(const ulk_ccsds_tc *tc, const ulk_sdls_sa *sa, const uint8_t *frame, size_t n_frame,
                        ulk_sdls_rx_result *res);

/* Checks a stored secured frame against the frame its fields make (want, built by
 * ulk_tcf_build with zeroed security fields): every octet not protected by the key must be
 * equal (headers, SPI, and the data field under authentication), and the FECF must be the
 * CRC of the frame. The IV and the MAC (and an encrypted data field) can be checked only
 * with the key. Returns 0, or ULK_EPARSE with the first difference in err. */
int ulk_sdls_check_frame(const ulk_ccsds_tc *tc, const ulk_sdls_sa *sa, const uint8_t *want, const uint8_t *got,
                         size_t n_frame, char *err, size_t errlen);

/* ---- anti-replay state file ----
 * Text (docs/sdls.md):
 *     ulk-sdls-state 1 send            (or: receive)
 *     spi 1 next 19                    send: the next counter to hand out
 *     spi 1 last 18                    receive: the highest counter accepted
 *     reserved 1 1 18 PATH             send: SPI, counters, the upload they were reserved for
 * Written atomically: a temporary file in the same folder, fsync, rename, fsync of the folder.
 * The file holds no key material. */
typedef enum { ULK_SDLS_SEND = 0, ULK_SDLS_RECEIVE = 1 } ulk_sdls_side;
typedef struct ulk_sdls_state ulk_sdls_state;

/* Loads path for side. An absent file gives an empty state with *created = 1 (the caller
 * prints the notice). Returns 0; ULK_EPARSE (a bad line, file:line), ULK_EMISMATCH (a state
 * of the other side), ULK_EIO, ULK_ENOMEM. */
int ulk_sdls_state_load(const char *path, ulk_sdls_side side, ulk_sdls_state **out, int *created, ulk_diag *diag);
/* An empty state of a side (no file). */
int ulk_sdls_state_create(ulk_sdls_side side, ulk_sdls_state **out);
/* Send: the next counter of spi (1 when unknown). Receive: the last accepted (0 when unknown). */
uint64_t ulk_sdls_state_value(const ulk_sdls_state *s, uint16_t spi);
/* Sets it. 0 or ULK_ENOMEM. */
int ulk_sdls_state_set(ulk_sdls_state *s, uint16_t spi, uint64_t value);
/* Send side: counters first..last of spi are handed to the upload at path: next becomes
 * last + 1 and the reservation is recorded (it replaces an earlier one of that SPI).
 * ULK_ELIMIT when last would leave no next counter; ULK_EINVAL when first is not the next. */
int ulk_sdls_state_reserve(ulk_sdls_state *s, uint16_t spi, uint64_t first, uint64_t last, const char *path);
/* The recorded reservation of spi: 1 with its counters and path (owned by s), 0 when none. */
int ulk_sdls_state_reservation(const ulk_sdls_state *s, uint16_t spi, uint64_t *first, uint64_t *last,
                               const char **path);
/* Writes s to path atomically (temporary file, fsync, rename, folder fsync), mode 0600.
 * Returns 0 or ULK_EIO / ULK_ENOMEM (message in diag); on failure path is unchanged. */
int ulk_sdls_state_save(const ulk_sdls_state *s, const char *path, ulk_diag *diag);
void ulk_sdls_state_destroy(ulk_sdls_state *s); /* NULL does nothing */
/* Two runs on one state file would read the same counters: a run takes an exclusive lock on
 * "<path>.lock" (created beside the state, mode 0600, left in place) before loading the state
 * and keeps it until after saving. Returns the lock's descriptor (>= 0), or ULK_EIO when
 * another process holds it ("in use") or it cannot be created (message in diag). */
int ulk_sdls_state_lock(const char *path, ulk_diag *diag);
void ulk_sdls_state_unlock(int fd); /* fd < 0 does nothing */

/* ---- receiving side ---- */
typedef struct ulk_sdls_rx ulk_sdls_rx;

/* A verifier for frames of sa. keys must hold sa->key (else ULK_EINVAL naming the key, not
 * its material) and outlive rx. state (may be NULL; a receive state, outliving rx) carries
 * the window across captures and is updated on every accepted frame; without it the first
 * authentic frame of the SPI opens the window (only this run's frames are compared).
 * Returns 0 with *out, ULK_EINVAL, ULK_ENOMEM. */
int ulk_sdls_rx_create(const ulk_sdls_sa *sa, const ulk_sdls_keys *keys, ulk_sdls_state *state, ulk_sdls_rx **out,
                       ulk_diag *diag);
/* Verifies one frame (exactly n_frame octets, FECF already checked): SPI, then MAC (and
 * decryption), then the window. Only an accepted frame moves the window. The verdict goes to
 * res. Returns 0, ULK_EINVAL for NULL, ULK_ENOMEM when libcrypto fails. */
int ulk_sdls_rx_frame(ulk_sdls_rx *rx, const ulk_ccsds_tc *tc, const uint8_t *frame, size_t n_frame,
                      ulk_sdls_rx_result *res);
void ulk_sdls_rx_destroy(ulk_sdls_rx *rx); /* NULL does nothing */

/* ---- a whole upload ---- */
struct ulk_upload;
/* Secures every frame of a compiled ccsds-tc upload whose link has security (frames laid out
 * with room for it) with counters first, first+1, ... in command order, and rebuilds each
 * CLTU. Returns 0; ULK_EINVAL (message in diag) when the link has no security, the key is
 * missing, or the counters would reach ULK_SDLS_COUNTER_MAX; ULK_ENOMEM. On failure the upload
 * must not be written. */
int ulk_sdls_secure_upload(struct ulk_upload *u, const ulk_sdls_keys *keys, uint64_t first, ulk_diag *diag);

#ifdef __cplusplus
}
#endif
#endif
