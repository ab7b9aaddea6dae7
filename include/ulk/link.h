/* ulk/link.h - the parameters of a link profile, shared by every stage.
 *
 * Why: the encoder, modulator, timing table and decoder must agree exactly on rates and
 * patterns, so rates are kept as exact rationals (62.5 bit/s is 125/2) parsed from the
 * decimal text of the dictionary, never as rounded doubles.
 */
#ifndef ULK_LINK_H
#define ULK_LINK_H

#include <stdint.h>

#ifdef __cplusplus
extern "C" {
#endif

/* An exact positive rational num/den, kept reduced. den > 0. */
typedef struct {
    int64_t num;
    int64_t den;
} ulk_ratio;

/* Parses a decimal literal ("62.5", "2000", "1e3", "0x10") into an exact rational.
 * Returns 0, or ULK_EPARSE when text is not a finite decimal, ULK_ELIMIT when it does not fit
 * (numerator and denominator must fit in 62 bits after reduction). */
int ulk_ratio_parse(const char *text, ulk_ratio *out);
ulk_ratio ulk_ratio_make(int64_t num, int64_t den); /* reduces; den != 0 */
double ulk_ratio_to_double(ulk_ratio r);
/* r * k; returns 0 or ULK_ELIMIT on overflow. */
int ulk_ratio_mul_int(ulk_ratio r, int64_t k, ulk_ratio *out);
/* a / b; returns 0 or ULK_ELIMIT on overflow, ULK_EINVAL when b is zero. */
int ulk_ratio_div(ulk_ratio a, ulk_ratio b, ulk_ratio *out);
/* Formats r as a decimal when it is one ("62.5"), else "num/den". */
void ulk_ratio_format(ulk_ratio r, char *buf, int len);

typedef enum { ULK_PROFILE_SUBBIT = 0, ULK_PROFILE_CCSDS_TC = 1 } ulk_profile;
typedef enum { ULK_LINE_NRZL = 0, ULK_LINE_NRZM = 1 } ulk_line_code;
typedef enum { ULK_WAVE_SINE = 0, ULK_WAVE_SQUARE = 1 } ulk_waveform;
typedef enum {
    ULK_CHECK_NONE = 0,
    ULK_CHECK_PARITY_EVEN,
    ULK_CHECK_PARITY_ODD,
    ULK_CHECK_CRC8,
    ULK_CHECK_CRC16
} ulk_check_kind;

#define ULK_MAX_SUBBITS 16
#define ULK_MAX_WORD_BITS 128 /* 16 + 16 + 16 + 64 + 16 */

/* The bit layer's configuration of the CCSDS telecommand profile (its functions are in
 * ulk/ccsds.h; docs/spec/ccsds-tc.md section 1). */
typedef enum { ULK_BCH_SEC = 0, ULK_BCH_TED = 1 } ulk_bch_mode;
typedef enum { ULK_TC_EXPEDITED = 0, ULK_TC_SEQUENCE_CONTROLLED = 1 } ulk_tc_service;

typedef struct {
    uint16_t spacecraft_id;    /* SCID, 0..1023 */
    uint8_t virtual_channel;   /* VCID, 0..63 */
    ulk_tc_service service;    /* expedited: Type-BD (bypass 1, N(S) 0); else Type-AD */
    int segment_header;        /* 1: a one-octet segment header (sequence flags '11') */
    uint8_t map_id;            /* MAP ID of the segment header, 0..63 */
    int fecf;                  /* 1: frames end in a 16-bit FECF */
    int randomize;             /* 1: frames are pseudo-randomized before coding */
    int start_errors;          /* start-sequence bit errors the decoder tolerates, 0 or 1 */
    ulk_bch_mode correction;   /* codeblock decoding mode */
    /* Space Data Link Security (ulk/sdls.h): octets of the security header (SPI + IV) after
     * the segment header and of the security trailer (MAC) before the FECF; 0 and 0 for an
     * unsecured link. ulk_tcf_build leaves them zero for ulk_sdls_protect to fill. */
    uint8_t sec_header_octets;  /* 0, or 3..64 */
    uint8_t sec_trailer_octets; /* 0..64 (0 unless sec_header_octets) */
} ulk_ccsds_tc;

/* The security association of a secured ccsds-tc link (its functions are in ulk/sdls.h):
 * the dictionary's link.tc.security map. */
#define ULK_SDLS_KEY_NAME_MAX 48     /* key names: 1..47 of [A-Za-z0-9_.-] */
typedef enum { ULK_SDLS_AUTHENTICATION = 0, ULK_SDLS_AUTHENTICATED_ENCRYPTION = 1 } ulk_sdls_service;
typedef enum { ULK_SDLS_AES_256_GCM = 0 } ulk_sdls_algorithm;

/* The security association of a link: the dictionary's link.tc.security map. */
typedef struct {
    int enabled;                       /* 0: no security (every other field unused) */
    uint16_t spi;                      /* 1..65534 */
    char key[ULK_SDLS_KEY_NAME_MAX];   /* the key's name in the key file (never key material) */
    ulk_sdls_service service;
    ulk_sdls_algorithm algorithm;
    int iv_octets;                     /* 12..16, default 12 */
    int mac_octets;                    /* 12..16, default 16 */
    uint32_t window;                   /* receiving side's anti-replay window, 1..2^20, default 64 */
} ulk_sdls_sa;

/* The `tc` section of the CCSDS telecommand profile (docs/spec/ccsds-tc.md section 1). The
 * frame, coding and decoder choices are the bit layer's own configuration (ulk/ccsds.h);
 * the rest says how the channel stream is laid out (section 3). */
typedef struct {
    ulk_ccsds_tc frame;          /* SCID, VCID, service, segment header/MAP ID, FECF, randomizer,
                                    start_errors, correction */
    uint8_t first_sequence;      /* N(S) of the first Type-AD frame of an upload, 0..255 */
    uint32_t acquisition_octets; /* acquisition sequence before the first CLTU, octets */
    uint32_t idle_octets;        /* idle sequence between CLTUs and after the last, octets */
    ulk_sdls_sa security;        /* Space Data Link Security (ulk/sdls.h); .enabled 0 when off.
                                    When on, frame.sec_*_octets hold its layout. */
} ulk_tc_params;

/* The parameters of a link: the sub-bit profile of docs/spec/subbit.md section 1,
 * or (profile == ULK_PROFILE_CCSDS_TC) the CCSDS telecommand profile of
 * docs/spec/ccsds-tc.md. A ccsds-tc link uses bit_rate (R, the channel bit rate), line_code,
 * the subcarrier fields and tc; it has n_subbits 1 with zero {0} and one {1} (one channel
 * symbol per bit, R_s = R) and leaves idle, pilot, framing and word fields 0. */
typedef struct {
    ulk_profile profile;
    ulk_ratio bit_rate;        /* R_b, bit/s */
    int n_subbits;             /* n, 1..16 */
    uint8_t zero[ULK_MAX_SUBBITS]; /* Z, values 0/1, n used */
    uint8_t one[ULK_MAX_SUBBITS];  /* O */
    uint8_t idle[ULK_MAX_SUBBITS]; /* I */
    ulk_line_code line_code;
    ulk_ratio fsc;             /* f_sc, Hz */
    ulk_waveform waveform;
    double amplitude;          /* A, 0 < A <= 1 */
    int has_pilot;
    ulk_ratio fp;              /* f_p, Hz */
    double pilot_amplitude;    /* A_p */
    int preamble, gap, postamble; /* P, G, T in idle patterns */
    int vehicle_bits;          /* A_v */
    uint32_t vehicle_value;    /* v */
    int system_bits;           /* A_s */
    int opcode_bits;           /* O_b */
    int argument_bits;         /* D */
    ulk_check_kind check;
    int check_bits;            /* C */
    int word_bits;             /* W = A_v + A_s + O_b + D + C */
    ulk_tc_params tc;          /* ccsds-tc only (all 0 for the sub-bit profile) */
} ulk_link;

/* Number of check bits of a check kind (0, 1, 8, 16). */
int ulk_check_bits(ulk_check_kind k);
const char *ulk_check_name(ulk_check_kind k);   /* "none", "parity-even", ... */
const char *ulk_line_code_name(ulk_line_code c); /* "nrz-l", "nrz-m" */
const char *ulk_waveform_name(ulk_waveform w);   /* "sine", "square" */

/* R_s = n * R_b (for ccsds-tc, n = 1: R_s = R). */
ulk_ratio ulk_link_subbit_rate(const ulk_link *l);

#ifdef __cplusplus
}
#endif
#endif
