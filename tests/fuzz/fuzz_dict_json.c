/* tests/fuzz/fuzz_dict_json.c - libFuzzer target: the dictionary loader on JSON text.
 * The same checks as fuzz_dict_yaml.c (see there), with the JSON front end. */
#define FUZZ_IS_JSON 1
#include "fuzz_dict_yaml.c"
