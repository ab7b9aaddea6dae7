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
void ulk_subbit_upload_write_link(const ulk_link *l, struct ulk_jbuf *b);
void ulk_subbit_upload_write_unit(const ulk_link *l, const ulk_upload_cmd *c, struct ulk_jbuf *b);
void ulk_tc_upload_write_link(const ulk_link *l, struct ulk_jbuf *b);
void ulk_tc_upload_write_unit(const ulk_link *l, const ulk_upload_cmd *c, struct ulk_jbuf *b);
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

#endif
