/* tests/fuzz/fuzz_cmdlist.c - libFuzzer target: command-list parser and compiler.
 *
 * Any bytes are parsed as a command list and compiled against the demo dictionary
 * (dictionaries/demo-subbit.yaml, loaded once). Contracts checked: the parser always hands
 * over a list unless memory ran out; the compiler hands over an upload only when nobody found
 * an error; a compiled upload prints back as a list and expands into a sub-bit stream of the
 * length it announces. */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>

#include "ulk/cmdlist.h"
#include "ulk/subbit.h"
#include "ulk/upload.h"
#include "fuzz_common.h"

static FILE *devnull;

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const ulk_dict *dict = fuzz_demo_dict();
    if (!devnull && !(devnull = fopen("/dev/null", "w"))) abort();
    ulk_diag *diag = ulk_diag_create();
    if (!diag) return 0;
    ulk_cmdlist *l = NULL;
    int rc = ulk_cmdlist_parse("fuzz.cmd", (const char *)data, size, &l, diag);
    if (rc != 0 && rc != ULK_EPARSE) abort(); /* no ENOMEM without injection */
    if (!l) abort();
    ulk_upload *u = NULL;
    rc = ulk_compile(dict, l, &u, diag);
    if (rc == 0) {
        if (!u || ulk_diag_errors(diag) != 0) abort();
        if (ulk_upload_print_list(u, devnull) != 0) abort();
        (void)ulk_upload_duration_s(u);
        /* walk the stream only when short: a wait of a day is 86 million patterns */
        uint64_t n = ulk_upload_n_subbits(u);
        if (n < 200000) {
            ulk_stream *s = ulk_stream_create(u);
            if (s) {
                if (ulk_stream_length(s) != n) abort();
                uint8_t sb[4096];
                uint64_t got = 0;
                size_t k;
                while ((k = ulk_stream_read(s, sb, NULL, sizeof sb)) > 0) got += k;
                if (got != n) abort();
                ulk_stream_destroy(s);
            }
        }
    } else if (u) {
        abort();
    }
    ulk_upload_destroy(u);
    ulk_cmdlist_destroy(l);
    ulk_diag_destroy(diag);
    return 0;
}
