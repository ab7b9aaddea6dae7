/* src/profiles/profiles.h - the tables of the registered link profiles (internal): each
 * profile's folder defines one, src/profiles/profile.c lists them. */
#ifndef ULK_PROFILES_H
#define ULK_PROFILES_H

#include <stdio.h>

#include <cjson/cJSON.h>

#include "ulk/profile.h"
#include "ulk/upload.h"

extern const ulk_profile_ops ulk_profile_subbit;   /* src/profiles/subbit/ */
extern const ulk_profile_ops ulk_profile_ccsds_tc; /* src/profiles/ccsds/ */

/* the inspection texts (ulk_profile_ops.inspect_text / inspect_json) */
int ulk_subbit_inspect_text(FILE *out, const char *path, const ulk_upload *u);
int ulk_subbit_inspect_json(FILE *out, const ulk_upload *u);
int ulk_tc_inspect_text(FILE *out, const char *path, const ulk_upload *u);
int ulk_tc_inspect_json(FILE *out, const ulk_upload *u);
/* `ulk validate`'s summaries (ulk_profile_ops.summary_text / summary_json) */
void ulk_subbit_summary_text(const ulk_dict *d, FILE *out);
cJSON *ulk_subbit_summary_json(const ulk_dict *d);
void ulk_tc_summary_text(const ulk_dict *d, FILE *out);
cJSON *ulk_tc_summary_json(const ulk_dict *d);
/* the upload file's parts (ulk_profile_ops.upload_write_link / upload_write_unit) */
void ulk_subbit_upload_write_link(const ulk_link *l, struct ulk_text *b);
void ulk_subbit_upload_write_unit(const ulk_link *l, const ulk_upload_cmd *c, struct ulk_text *b);
void ulk_tc_upload_write_link(const ulk_link *l, struct ulk_text *b);
void ulk_tc_upload_write_unit(const ulk_link *l, const ulk_upload_cmd *c, struct ulk_text *b);
/* the receivers (ulk_profile_ops.rx_create ... rx_destroy; the profiles' *_rx.c) */
int ulk_subbit_rx_create(const ulk_dict *d, double fs_hz, const struct ulk_rx_sink *sink, void **state, ulk_diag *diag);
int ulk_subbit_rx_push(void *state, const float *x, size_t n);
int ulk_subbit_rx_finish(void *state);
void ulk_subbit_rx_destroy(void *state);
int ulk_tc_rx_create(const ulk_dict *d, double fs_hz, const struct ulk_rx_sink *sink, void **state, ulk_diag *diag);
int ulk_tc_rx_push(void *state, const float *x, size_t n);
int ulk_tc_rx_finish(void *state);
int ulk_tc_rx_commit(void *state);
void ulk_tc_rx_destroy(void *state);

/* compile's authenticated commanding (ulk_profile_ops.secure_describe ... secure_end; tc_secure.c) */
int ulk_tc_secure_describe(const ulk_link *l, char *buf, size_t n);
int ulk_tc_secure_begin(const ulk_link *l, const char *keys_path, const char *state_path, const char *who, FILE *msg,
                        void **session, ulk_diag *diag);
int ulk_tc_secure_upload(void *session, ulk_upload *u, const char *out_path, ulk_diag *diag);
int ulk_tc_secure_commit(void *session, ulk_diag *diag);
int ulk_tc_secure_summary(void *session, FILE *out);
void ulk_tc_secure_abandoned(void *session);
void ulk_tc_secure_end(void *session);

/* the upload reader (ulk_profile_ops.upload_read_link ... unit_pack; *_upload.c) */
extern const char *const ulk_subbit_upload_link_members[8];
extern const char *const ulk_subbit_upload_cmd_members[10];
int ulk_subbit_upload_read_link(struct ulk_rd *r, const struct cJSON *lj, ulk_link *l);
uint64_t ulk_subbit_upload_max_address(const ulk_link *l);
uint64_t ulk_subbit_upload_max_opcode(const ulk_link *l);
int ulk_subbit_upload_read_unit(struct ulk_rd *r, const struct cJSON *cj, const char *path, const ulk_link *l, ulk_upload_cmd *c);
int ulk_subbit_upload_check_arg(struct ulk_rd *r, const char *ap, const ulk_link *l, const ulk_upload_cmd *c, int pos,
                           const ulk_upload_arg *a);
int ulk_subbit_upload_check_unit(struct ulk_rd *r, const char *path, const ulk_link *l, const ulk_upload_cmd *c, int n_arg_bits);
int ulk_subbit_upload_counts_create(const ulk_link *l, void **st);
int ulk_subbit_upload_counts_check(void *st, struct ulk_rd *r, const char *path, const ulk_link *l, const ulk_upload_cmd *c,
                              size_t idx);
void ulk_subbit_upload_counts_destroy(void *st);
size_t ulk_subbit_unit_stride(const ulk_link *l);
void ulk_subbit_unit_pack(const ulk_link *l, const ulk_upload_cmd *c, uint8_t *dst);
extern const char *const ulk_tc_upload_link_members[5];
extern const char *const ulk_tc_upload_cmd_members[13];
int ulk_tc_upload_read_link(struct ulk_rd *r, const struct cJSON *lj, ulk_link *l);
uint64_t ulk_tc_upload_max_address(const ulk_link *l);
uint64_t ulk_tc_upload_max_opcode(const ulk_link *l);
int ulk_tc_upload_read_unit(struct ulk_rd *r, const struct cJSON *cj, const char *path, const ulk_link *l, ulk_upload_cmd *c);
int ulk_tc_upload_check_arg(struct ulk_rd *r, const char *ap, const ulk_link *l, const ulk_upload_cmd *c, int pos,
                           const ulk_upload_arg *a);
int ulk_tc_upload_check_unit(struct ulk_rd *r, const char *path, const ulk_link *l, const ulk_upload_cmd *c, int n_arg_bits);
int ulk_tc_upload_counts_create(const ulk_link *l, void **st);
int ulk_tc_upload_counts_check(void *st, struct ulk_rd *r, const char *path, const ulk_link *l, const ulk_upload_cmd *c,
                              size_t idx);
void ulk_tc_upload_counts_destroy(void *st);
size_t ulk_tc_unit_stride(const ulk_link *l);
void ulk_tc_unit_pack(const ulk_link *l, const ulk_upload_cmd *c, uint8_t *dst);
/* ccsds-tc: a record's frame and CLTU against what its fields make (tc_profile.c) */
int ulk_tc_unit_check(const ulk_link *l, const ulk_upload_cmd *c, char *err, size_t errlen);
/* the dictionary section (ulk_profile_ops.link_parse ... info_bit_rate; subbit_dict.c, tc_dict.c) */
void ulk_subbit_link_parse(struct ulk_dict_build *c, struct ulk_node *ln);
int ulk_subbit_system_address(struct ulk_dict_build *c, struct ulk_node *an, uint32_t *out);
int ulk_subbit_opcode_fits(struct ulk_dict_build *c, struct ulk_node *n, int64_t v);
void ulk_subbit_command_check(struct ulk_dict_build *c, const ulk_command *k, struct ulk_node *args);
void ulk_subbit_link_canonical(struct ulk_text *b, const ulk_link *l);
ulk_ratio ulk_subbit_info_bit_rate(const ulk_link *l);
void ulk_tc_link_parse(struct ulk_dict_build *c, struct ulk_node *ln);
int ulk_tc_system_address(struct ulk_dict_build *c, struct ulk_node *an, uint32_t *out);
int ulk_tc_opcode_fits(struct ulk_dict_build *c, struct ulk_node *n, int64_t v);
void ulk_tc_command_check(struct ulk_dict_build *c, const ulk_command *k, struct ulk_node *args);
void ulk_tc_link_canonical(struct ulk_text *b, const ulk_link *l);
ulk_ratio ulk_tc_info_bit_rate(const ulk_link *l);

#endif
