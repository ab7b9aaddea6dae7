/* tests/fuzz/fuzz_dict_yaml.c - libFuzzer target: the dictionary loader on YAML text.
 *
 * Any bytes go to ulk_dict_load_mem() as YAML. The contract under test: a dictionary or a
 * clean error with at least one finding, never a crash, a leak or a hang. When a dictionary
 * loads, its canonical form and lookups are exercised too (they walk the whole model). */
#include <stdint.h>
#include <stdlib.h>

#include "ulk/dict.h"
#include "ulk/error.h"

#ifndef FUZZ_IS_JSON
#define FUZZ_IS_JSON 0
#endif

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    ulk_diag *diag = ulk_diag_create();
    if (!diag) return 0;
    ulk_dict *d = NULL;
    int rc = ulk_dict_load_mem("fuzz", (const char *)data, size, FUZZ_IS_JSON, &d, diag);
    if (rc == 0) {
        if (!d) abort(); /* success must hand over a dictionary */
        char *canon = NULL;
        size_t len = 0;
        if (ulk_dict_canonical(d, &canon, &len) == 0) free(canon);
        for (int i = 0; i < d->n_commands; i++) {
            const ulk_command *c = &d->commands[i];
            if (ulk_dict_find_command(d, c->mnemonic) == NULL) abort();
            if (c->system_index >= 0 && c->system_index < d->n_systems)
                (void)ulk_dict_find_opcode(d, d->systems[c->system_index].address, c->opcode);
            for (int k = 0; k < c->n_args; k++) {
                char buf[128];
                ulk_arg_format(&c->args[k], c->args[k].default_raw, buf, sizeof buf);
            }
        }
    } else {
        if (d) abort();                             /* failure must not hand over anything */
        if (ulk_diag_errors(diag) == 0) abort();    /* and must say why */
    }
    ulk_dict_destroy(d);
    ulk_diag_destroy(diag);
    return 0;
}
