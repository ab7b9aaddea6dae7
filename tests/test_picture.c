/* tests/test_picture.c - the picture surface's rules (src/picture.h): format by extension,
 * 1-2-5 ticks and their labels. The palette is checked against numpy in
 * tests/py/test_picture.py. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <math.h>
#include <stdio.h>
#include <string.h>

#include "picture.h"

static const struct {
    const char *path;
    ulk_pic_kind kind;
} kind_rows[] = {
    {"a.png", ULK_PIC_PNG}, {"dir/a.SVG", ULK_PIC_SVG}, {"a.Png", ULK_PIC_PNG}, {"a.txt", ULK_PIC_NONE},
    {"a.svgz", ULK_PIC_NONE}, {".png", ULK_PIC_NONE}, {"png", ULK_PIC_NONE}, {"-", ULK_PIC_NONE},
};

static void test_kind(void **st)
{
    (void)st;
    for (size_t i = 0; i < sizeof kind_rows / sizeof kind_rows[0]; i++) {
        if (ulk_picture_kind(kind_rows[i].path) != kind_rows[i].kind) fail_msg("kind of '%s'", kind_rows[i].path);
    }
    ulk_diag *d = ulk_diag_create();
    assert_int_equal(ulk_picture_check("x.txt", d), ULK_EINVAL);
    char buf[256];
    ulk_finding_format(ulk_diag_get(d, 0), buf, sizeof buf);
    if (!strstr(buf, "x.txt") || !strstr(buf, ".png or .svg")) fail_msg("refusal names the file and the formats: %s", buf);
    ulk_diag_destroy(d);
}

/* Rows: range, most ticks, expected step and first and last tick (common practice: the
 * 1-2-5 series of chart axes). */
static const struct {
    double lo, hi;
    int max_n;
    double step, first, last;
    int n;
} tick_rows[] = {
    {0, 1, 10, 0.2, 0, 1, 6},          /* 0.1 would give 11 ticks, one too many */
    {0, 1, 11, 0.1, 0, 1, 11},
    {-40, 0, 9, 5, -40, 0, 9},
    {-90, 0, 10, 10, -90, 0, 10},
    {0.2, 1.5, 8, 0.2, 0.2, 1.4, 7},
    {-200, 199.95, 12, 50, -200, 150, 8},
    {0, 11.554, 10, 2, 0, 10, 6},
    {-2.5, 2.5, 6, 1, -2, 2, 5},
    {0, 1.2, 4, 0.5, 0, 1, 3},
    {3, 7, 10, 0.5, 3, 7, 9},
};

static void test_ticks(void **st)
{
    (void)st;
    for (size_t i = 0; i < sizeof tick_rows / sizeof tick_rows[0]; i++) {
        double t[64], step;
        int n = ulk_pic_ticks(tick_rows[i].lo, tick_rows[i].hi, tick_rows[i].max_n, t, 64, &step);
        double want_step = tick_rows[i].step;
        if (fabs(step - want_step) > 1e-12 * want_step) fail_msg("row %zu: step %g, expected %g", i, step, want_step);
        if (n > tick_rows[i].max_n) fail_msg("row %zu: %d ticks, at most %d", i, n, tick_rows[i].max_n);
        if (n != tick_rows[i].n) fail_msg("row %zu: %d ticks, expected %d", i, n, tick_rows[i].n);
        if ((fabs(t[0] - tick_rows[i].first) > 1e-9 || fabs(t[n - 1] - tick_rows[i].last) > 1e-9))
            fail_msg("row %zu: ticks %g..%g, expected %g..%g", i, t[0], t[n - 1], tick_rows[i].first, tick_rows[i].last);
        /* every step is 1, 2 or 5 times a power of ten */
        double m = step / pow(10, floor(log10(step) + 1e-12));
        if (fabs(m - 1) > 1e-9 && fabs(m - 2) > 1e-9 && fabs(m - 5) > 1e-9) fail_msg("row %zu: step %g is not 1-2-5", i, step);
    }
}

static void test_tick_labels(void **st)
{
    (void)st;
    static const struct { double v, step; const char *want; } rows[] = {
        {0.25, 0.05, "0.25"}, {10, 5, "10"}, {-2.5, 0.5, "-2.5"}, {1e-17, 0.1, "0.0"}, {150, 50, "150"}, {0.2, 0.2, "0.2"},
    };
    for (size_t i = 0; i < sizeof rows / sizeof rows[0]; i++) {
        char b[32];
        ulk_pic_tick_label(rows[i].v, rows[i].step, b, sizeof b);
        if (strcmp(b, rows[i].want)) fail_msg("label of %g (step %g): '%s', expected '%s'", rows[i].v, rows[i].step, b, rows[i].want);
    }
}

static void test_palette_distinct(void **st)
{
    (void)st;
    double c[ULK_PIC_N_SERIES][3];
    for (int k = 0; k < ULK_PIC_N_SERIES; k++) {
        ulk_pic_rgb(k, c[k]);
        for (int j = 0; j < 3; j++)
            if (!(c[k][j] >= 0 && c[k][j] <= 1)) fail_msg("colour %d component %d = %g outside [0, 1]", k, j, c[k][j]);
    }
    double w[3];
    ulk_pic_rgb(ULK_PIC_N_SERIES + 1, w);
    assert_memory_equal(w, c[1], sizeof w); /* the palette cycles */
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_kind),
        cmocka_unit_test(test_ticks),
        cmocka_unit_test(test_tick_labels),
        cmocka_unit_test(test_palette_distinct),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
