/* tests/fuzz/fuzz_common.h - helpers shared by the fuzz targets (not a parser of its own). */
#ifndef ULK_FUZZ_COMMON_H
#define ULK_FUZZ_COMMON_H

#include <stdio.h>
#include <stdlib.h>

#include "ulk/dict.h"
#include "ulk/error.h"

/* The demo dictionary, loaded once per process (a fixed dictionary lets the fuzzer spend its
 * time on the command list or the capture rather than on the dictionary). Aborts when it does
 * not load: a fuzz run against a broken demo would test nothing. Freed at exit so that
 * LeakSanitizer stays quiet. */
static ulk_dict *fuzz_demo_dict_;
static void fuzz_free_demo_(void) { ulk_dict_destroy(fuzz_demo_dict_); }
static const ulk_dict *fuzz_demo_dict(void)
{
    if (fuzz_demo_dict_) return fuzz_demo_dict_;
    ulk_diag *diag = ulk_diag_create();
    if (!diag || ulk_dict_load(ULK_SOURCE_DIR "/dictionaries/demo-subbit.yaml", &fuzz_demo_dict_, diag) != 0) {
        if (diag) ulk_diag_print(diag, stderr);
        fprintf(stderr, "fuzz: the demo dictionary does not load\n");
        abort();
    }
    ulk_diag_destroy(diag);
    atexit(fuzz_free_demo_);
    return fuzz_demo_dict_;
}

#endif
