/* tests/dict_rows.h - the broken-dictionary table harness shared by test_dict.c and
 * test_dict_ccsds.c: a row edits a valid base dictionary (YAML or JSON) and names the
 * finding it must produce, with its line and column. Include after cmocka.h. */
#ifndef ULK_TEST_DICT_ROWS_H
#define ULK_TEST_DICT_ROWS_H

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "ulk/dict.h"
#include "ulk/error.h"

/* Replaces the first occurrence of find in *text (which it frees) by repl. */
static char *replace(char *text, const char *find, const char *repl)
{
    char *at = strstr(text, find);
    if (!at) fail_msg("row text '%s' is not in the base dictionary", find);
    size_t a = (size_t)(at - text), fl = strlen(find), rl = strlen(repl), tl = strlen(text);
    char *out = malloc(tl - fl + rl + 1);
    memcpy(out, text, a);
    memcpy(out + a, repl, rl);
    memcpy(out + a + rl, at + fl, tl - a - fl + 1);
    free(text);
    return out;
}

typedef struct {
    const char *name;
    int json;
    const char *find1, *repl1, *find2, *repl2;
    ulk_severity sev;
    const char *expect; /* fragment of the message */
    int line, col;
    int loads;          /* 1: only warnings, the dictionary still loads */
} row;

#define E ULK_SEV_ERROR
#define W ULK_SEV_WARNING

/* Runs one row: applies its edits to the base text, loads it, and checks the finding (or, for
 * loads == 2, that there is none), the status, and that every finding names its file.
 * want_profile >= 0: a row that loads must have that link profile. */
static void dict_row_run(const row *r, const char *base_yaml, const char *base_json, int want_profile)
{
    char *text = strdup(r->json ? base_json : base_yaml);
    text = replace(text, r->find1, r->repl1);
    if (r->find2) text = replace(text, r->find2, r->repl2);
    ulk_diag *dg = ulk_diag_create();
    ulk_dict *d = NULL;
    int rc = ulk_dict_load_mem(r->json ? "row.json" : "row.yaml", text, strlen(text), r->json, &d, dg);
    if (r->loads == 2) {
        /* A row that must load with no finding at all. */
        if (rc || ulk_diag_count(dg)) {
            ulk_diag_print(dg, stderr);
            fail_msg("row %s: status %d, %zu findings; want none", r->name, rc, ulk_diag_count(dg));
        }
    } else {
        int found = 0;
        for (size_t i = 0; i < ulk_diag_count(dg); i++) {
            const ulk_finding *f = ulk_diag_get(dg, i);
            if (f->sev == r->sev && f->line == r->line && f->col == r->col && strstr(f->msg, r->expect)) found = 1;
        }
        if (!found) {
            ulk_diag_print(dg, stderr);
            fail_msg("row %s: no %s '%s' at %d:%d", r->name, r->sev == E ? "error" : "warning", r->expect, r->line,
                     r->col);
        }
    }
    if (r->loads) {
        assert_int_equal(rc, 0);
        assert_non_null(d);
        assert_int_equal(ulk_diag_errors(dg), 0);
        if (want_profile >= 0) assert_int_equal((int)d->link.profile, want_profile);
    } else {
        assert_true(rc == ULK_EPARSE || rc == ULK_ELIMIT);
        assert_null(d);
    }
    /* Every finding of a row names the file; findings about the tree name their path. */
    for (size_t i = 0; i < ulk_diag_count(dg); i++) assert_non_null(ulk_diag_get(dg, i)->file);
    ulk_dict_destroy(d);
    ulk_diag_destroy(dg);
    free(text);
}

static ulk_dict *load_ok(const char *name, const char *text, int json)
{
    ulk_diag *dg = ulk_diag_create();
    ulk_dict *d = NULL;
    int rc = ulk_dict_load_mem(name, text, strlen(text), json, &d, dg);
    if (rc || ulk_diag_count(dg)) {
        ulk_diag_print(dg, stderr);
        fail_msg("%s: status %d, %zu findings", name, rc, ulk_diag_count(dg));
    }
    ulk_diag_destroy(dg);
    return d;
}

#endif
