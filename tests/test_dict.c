/* tests/test_dict.c - dictionary loading (YAML and JSON), the model, validation findings with
 * their file:line:col, limits, hostile input, and the canonical hash.
 *
 * The broken dictionaries are rows: each takes the small valid dictionary below (YAML or
 * JSON), replaces literal text, and names the finding expected (severity, a fragment of the
 * message, line and column). Each row is its own cmocka test, named from the row.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "doc.h"
#include "ulk/dict.h"
#include "ulk/error.h"
#include "util.h"

/* A dictionary of our own: every rule satisfied, no warning. Line numbers matter to the rows.
 * R_b = 62.5, n = 4, R_s = 250, f_sc = 500 (k = 2), pilot 125 = R_s / 2, A + A_p = 1 exactly,
 * Z and O complements (distance 4 = n), idle 0101 (complement 1010 differs from all three),
 * system addresses 0 and 3 (distance 2), W = 5 + 3 + 5 + 24 + 1 = 38, arguments 8+2+1 = 11. */
static const char BASE_YAML[] =
    "dictionary: {name: test-min, version: \"0.1\"}\n"                       /* 1 */
    "link:\n"                                                                 /* 2 */
    "  profile: subbit\n"                                                     /* 3 */
    "  bit_rate: 62.5\n"                                                      /* 4 */
    "  subbits: {zero: \"0011\", one: \"1100\", idle: \"0101\"}\n"            /* 5 */
    "  line_code: nrz-m\n"                                                    /* 6 */
    "  subcarrier: {frequency: 500, waveform: square, amplitude: 0.75}\n"     /* 7 */
    "  pilot: {frequency: 125, amplitude: 0.25}\n"                            /* 8 */
    "  framing: {preamble: 20, gap: 4, postamble: 2}\n"                       /* 9 */
    "  word:\n"                                                               /* 10 */
    "    vehicle_address: {bits: 5, value: 0b10110}\n"                        /* 11 */
    "    system_address_bits: 3\n"                                            /* 12 */
    "    opcode_bits: 5\n"                                                    /* 13 */
    "    argument_bits: 24\n"                                                 /* 14 */
    "    check: parity-odd\n"                                                 /* 15 */
    "systems:\n"                                                              /* 16 */
    "  - {name: NAV, address: 0}\n"                                           /* 17 */
    "  - {name: AUX, address: 3}\n"                                           /* 18 */
    "commands:\n"                                                             /* 19 */
    "  - mnemonic: NAV_GO\n"                                                  /* 20 */
    "    system: NAV\n"                                                       /* 21 */
    "    opcode: 010\n"                                                       /* 22 */
    "    critical: true\n"                                                    /* 23 */
    "    arguments:\n"                                                        /* 24 */
    "      - {name: speed, type: unsigned, bits: 8, calibration: {scale: 0.5, offset: -10}, range: [-10, 100], units: m, default: 20}\n" /* 25 */
    "      - {name: mode, type: enum, bits: 2, values: {IDLE: 0, RUN: 3}, default: RUN}\n" /* 26 */
    "      - {name: flag, type: boolean, default: on}\n"                      /* 27 */
    "  - mnemonic: AUX_PING\n"                                                /* 28 */
    "    system: AUX\n"                                                       /* 29 */
    "    opcode: 0x1F\n"                                                      /* 30 */
    "    description: \"ping\"\n";                                            /* 31 */

/* The same dictionary in JSON (opcode 0x1F as a string: JSON has no hex literal). */
static const char BASE_JSON[] =
    "{\n"                                                                     /* 1 */
    "  \"dictionary\": {\"name\": \"test-min\", \"version\": \"0.1\"},\n"     /* 2 */
    "  \"link\": {\n"                                                         /* 3 */
    "    \"profile\": \"subbit\",\n"                                          /* 4 */
    "    \"bit_rate\": 62.5,\n"                                               /* 5 */
    "    \"subbits\": {\"zero\": \"0011\", \"one\": \"1100\", \"idle\": \"0101\"},\n" /* 6 */
    "    \"line_code\": \"nrz-m\",\n"                                         /* 7 */
    "    \"subcarrier\": {\"frequency\": 500, \"waveform\": \"square\", \"amplitude\": 0.75},\n" /* 8 */
    "    \"pilot\": {\"frequency\": 125, \"amplitude\": 0.25},\n"             /* 9 */
    "    \"framing\": {\"preamble\": 20, \"gap\": 4, \"postamble\": 2},\n"    /* 10 */
    "    \"word\": {\n"                                                       /* 11 */
    "      \"vehicle_address\": {\"bits\": 5, \"value\": 22},\n"              /* 12 */
    "      \"system_address_bits\": 3,\n"                                     /* 13 */
    "      \"opcode_bits\": 5,\n"                                             /* 14 */
    "      \"argument_bits\": 24,\n"                                          /* 15 */
    "      \"check\": \"parity-odd\"\n"                                       /* 16 */
    "    }\n"                                                                 /* 17 */
    "  },\n"                                                                  /* 18 */
    "  \"systems\": [{\"name\": \"NAV\", \"address\": 0}, {\"name\": \"AUX\", \"address\": 3}],\n" /* 19 */
    "  \"commands\": [\n"                                                     /* 20 */
    "    {\"mnemonic\": \"NAV_GO\", \"system\": \"NAV\", \"opcode\": 10, \"critical\": true,\n" /* 21 */
    "     \"arguments\": [\n"                                                 /* 22 */
    "       {\"name\": \"speed\", \"type\": \"unsigned\", \"bits\": 8, \"calibration\": {\"scale\": 0.5, \"offset\": -10}, \"range\": [-10, 100], \"units\": \"m\", \"default\": 20},\n" /* 23 */
    "       {\"name\": \"mode\", \"type\": \"enum\", \"bits\": 2, \"values\": {\"IDLE\": 0, \"RUN\": 3}, \"default\": \"RUN\"},\n" /* 24 */
    "       {\"name\": \"flag\", \"type\": \"boolean\", \"default\": \"on\"}]},\n" /* 25 */
    "    {\"mnemonic\": \"AUX_PING\", \"system\": \"AUX\", \"opcode\": \"0x1F\", \"description\": \"ping\"}\n" /* 26 */
    "  ]\n"                                                                   /* 27 */
    "}\n";                                                                    /* 28 */

#include "dict_rows.h"

static const row rows[] = {
    /* ---- keys, types, YAML 1.2 core schema */
    {"unknown_key_did_you_mean", 0, "bit_rate: 62.5", "bitrate: 62.5", 0, 0, E,
     "unknown key 'bitrate' in link (did you mean 'bit_rate'?)", 4, 3, 0},
    {"missing_required_key", 0, "  framing: {preamble: 20, gap: 4, postamble: 2}\n", "", 0, 0, E,
     "link has no 'framing' (required)", 3, 3, 0},
    {"unquoted_pattern_hint", 0, "zero: \"0011\"", "zero: 0011", 0, 0, E,
     "must be a quoted string: unquoted, YAML reads it as an integer; write zero: \"0011\"", 5, 19, 0},
    {"octal_looking_is_decimal", 0, "opcode: 0x1F", "opcode: 037", 0, 0, E,
     "opcode 37 does not fit in opcode_bits = 5", 30, 13, 0},
    {"on_is_a_string", 0, "critical: true", "critical: on", 0, 0, E,
     "'critical' must be true or false, not a string 'on'", 23, 15, 0},
    {"wrong_type_list", 0, "systems:\n  - {name: NAV, address: 0}\n  - {name: AUX, address: 3}\n",
     "systems: {name: NAV, address: 0}\n\n\n", 0, 0, E, "systems must be a list, not a mapping", 16, 10, 0},
    {"version_number_not_string", 0, "version: \"0.1\"", "version: 0.1", 0, 0, E,
     "'version' must be a string, not a number (quote it: \"0.1\")", 1, 39, 0},
    {"unknown_type_did_you_mean", 0, "type: unsigned", "type: unsinged", 0, 0, E,
     "unknown argument type 'unsinged' (did you mean 'unsigned'?", 25, 29, 0},
    {"duplicate_key", 0, "  bit_rate: 62.5\n", "  bit_rate: 62.5\n  bit_rate: 125\n", 0, 0, E,
     "duplicate key 'bit_rate' (first at line 4, column 3)", 5, 3, 0},
    {"nan_refused", 0, "amplitude: 0.75", "amplitude: .nan", 0, 0, E, "NaN and infinity are not accepted", 7, 61, 0},
    {"integer_beyond_64_bits", 0, "opcode: 0x1F", "opcode: 99999999999999999999", 0, 0, E,
     "integer 99999999999999999999 does not fit in 64 bits", 30, 13, 0},
    {"alias_refused", 0, "  - {name: AUX, address: 3}\n", "  - &s {name: AUX, address: 3}\n  - *s\n", 0, 0, E,
     "YAML aliases (*s) are not accepted", 19, 5, 0},
    {"yaml_syntax_error", 0, "idle: \"0101\"}", "idle: \"0101\"", 0, 0, E, "YAML syntax error: did not find expected ',' or '}' while parsing a flow mapping (started at line 5, column 12)", 6, 3, 0},
    {"mnemonic_not_a_name", 0, "mnemonic: AUX_PING", "mnemonic: AUX PING", 0, 0, E,
     "mnemonic 'AUX PING' is not a valid name", 28, 15, 0},
    /* ---- link profile rules (docs/spec/subbit.md section 1) */
    {"patterns_equal", 0, "one: \"1100\"", "one: \"0011\"", 0, 0, E, "patterns 'zero' and 'one' are equal", 5, 32, 0},
    {"pattern_lengths_differ", 0, "idle: \"0101\"", "idle: \"010\"", 0, 0, E,
     "pattern 'idle' has 3 sub-bits but 'zero' has 4", 5, 46, 0},
    {"pattern_not_binary", 0, "idle: \"0101\"", "idle: \"01x1\"", 0, 0, E,
     "must be 1 to 16 characters 0 or 1", 5, 46, 0},
    {"idle_equals_zero", 0, "idle: \"0101\"", "idle: \"0011\"", 0, 0, E, "idle pattern equals 'zero'", 5, 46, 0},
    {"idle_complement_equals_zero", 0, "{zero: \"0011\", one: \"1100\", idle: \"0101\"}",
     "{zero: \"0011\", one: \"1110\", idle: \"1100\"}", 0, 0, E,
     "complement of the idle pattern (\"0011\") equals 'zero'", 5, 46, 0},
    {"hamming_distance_warning_db", 0, "one: \"1100\"", "one: \"1110\"", 0, 0, W,
     "Hamming distance between 'zero' (\"0011\") and 'one' (\"1110\") is 3, below n = 4: sensitivity loss 1.25 dB", 5,
     32, 1},
    {"subcarrier_not_whole_multiple", 0, "frequency: 500", "frequency: 600", 0, 0, E,
     "subcarrier frequency 600 Hz is not a whole multiple of the sub-bit rate R_s = n * R_b = 250 Hz (f_sc / R_s = 2.4)", 7,
     27, 0},
    {"subcarrier_below_2rs_warning", 0, "frequency: 500", "frequency: 250", 0, 0, W,
     "subcarrier frequency 250 Hz is below 2 * R_s", 7, 27, 1},
    {"pilot_not_related", 0, "frequency: 125", "frequency: 100", 0, 0, E,
     "pilot frequency 100 Hz must be a whole multiple or a whole fraction of R_s = 250 Hz", 8, 22, 0},
    {"amplitudes_exceed_full_scale", 0, "amplitude: 0.25", "amplitude: 0.2500001", 0, 0, E,
     "exceeds full scale 1 (A + A_p <= 1)", 8, 38, 0},
    {"preamble_short_warning", 0, "preamble: 20", "preamble: 15", 0, 0, W, "(P < 16)", 9, 23, 1},
    {"vehicle_value_too_wide", 0, "0b10110", "0b110110", 0, 0, E, "vehicle address 54 does not fit in 5 bits", 11, 39, 0},
    {"argument_bits_over_64", 0, "argument_bits: 24", "argument_bits: 65", 0, 0, E, "argument_bits must be 0..64", 14, 20,
     0},
    {"packed_arguments_exceed_D", 0, "argument_bits: 24", "argument_bits: 8", 0, 0, E,
     "arguments take 11 bits, more than argument_bits D = 8", 25, 7, 0},
    /* ---- systems and commands */
    {"system_address_too_wide", 0, "{name: AUX, address: 3}", "{name: AUX, address: 8}", 0, 0, E,
     "system address 8 does not fit in system_address_bits = 3", 18, 26, 0},
    {"system_address_duplicate", 0, "{name: AUX, address: 3}", "{name: AUX, address: 0}", 0, 0, E,
     "duplicate system address 0: 'NAV' has it too", 18, 26, 0},
    {"system_name_duplicate", 0, "{name: AUX, address: 3}", "{name: NAV, address: 3}", "system: AUX", "system: NAV", E,
     "duplicate system name 'NAV'", 18, 12, 0},
    {"system_addresses_one_bit_apart", 0, "{name: AUX, address: 3}", "{name: AUX, address: 2}", 0, 0, W,
     "system addresses of 'NAV' (0x0) and 'AUX' (0x2) differ in one bit", 18, 26, 1},
    {"unknown_system_did_you_mean", 0, "system: AUX", "system: AUXX", 0, 0, E,
     "command names unknown system 'AUXX' (did you mean 'AUX'?)", 29, 13, 0},
    {"duplicate_mnemonic", 0, "mnemonic: AUX_PING", "mnemonic: NAV_GO", 0, 0, E,
     "duplicate mnemonic 'NAV_GO' (first at line 20)", 28, 15, 0},
    {"duplicate_opcode_in_system", 0, "system: AUX", "system: NAV", "opcode: 0x1F", "opcode: 0xA", E,
     "duplicate opcode 10 in system 'NAV': 'NAV_GO' (line 20) has it too", 30, 13, 0},
    {"reserved_mnemonic", 0, "mnemonic: AUX_PING", "mnemonic: wait", 0, 0, E, "reserved word of command lists", 28, 15, 0},
    /* ---- arguments */
    {"argument_width_65", 0, "bits: 8", "bits: 65", 0, 0, E, "argument width (bits) must be 1..64, not 65", 25, 45, 0},
    {"argument_bits_missing", 0, "type: unsigned, bits: 8, ", "type: unsigned, ", 0, 0, E,
     "an unsigned argument needs 'bits'", 25, 9, 0},
    {"float32_bits_not_32", 0, "{name: flag, type: boolean, default: on}", "{name: flag, type: float32, bits: 16}", 0, 0, E,
     "a float32 argument has 32 bits, not 16", 27, 43, 0},
    {"boolean_bits_not_1", 0, "{name: flag, type: boolean, default: on}", "{name: flag, type: boolean, bits: 2}", 0, 0, E,
     "a boolean argument has 1 bit, not 2", 27, 43, 0},
    {"enum_code_too_wide", 0, "RUN: 3", "RUN: 4", 0, 0, E, "enum code 4 of 'RUN' does not fit in 2 bits", 26, 66, 0},
    {"enum_code_repeated", 0, "RUN: 3", "RUN: 0", 0, 0, E, "enum code 0 of 'RUN' is already used by 'IDLE'", 26, 66, 0},
    {"default_out_of_range", 0, "default: 20", "default: 101", 0, 0, E,
     "default is not a valid value: value 101 is outside the range", 25, 126, 0},
    {"default_unknown_label", 0, "default: RUN", "default: RUNN", 0, 0, E, "no label 'RUNN'", 26, 79, 0},
    {"range_not_representable", 0, "range: [-10, 100]", "range: [-10, 200]", 0, 0, E,
     "range [-10, 200] cannot be represented: 8-bit calibrated raw range gives [-10, 117.5]", 25, 95, 0},
    {"range_beyond_raw_width", 0, "calibration: {scale: 0.5, offset: -10}, range: [-10, 100]", "range: [0, 256]", 0, 0, E,
     "range [0, 256] cannot be represented: 8-bit unsigned raw gives [0, 255]", 25, 55, 0},
    {"polynomial_not_monotonic", 0, "{scale: 0.5, offset: -10}", "{polynomial: [0, 1, -0.01]}", 0, 0, E,
     "calibration is not monotonic over the raw range [0, 255]: it turns near raw 51", 25, 61, 0},
    {"polynomial_wide_field_turns", 0, "bits: 8, calibration: {scale: 0.5, offset: -10}, range: [-10, 100]",
     "bits: 20, calibration: {polynomial: [0, 1, -0.000002]}", 0, 0, E,
     "calibration is not monotonic over the raw range [0, 1048575]: it turns near raw 2500", 25, 62, 0},
    {"calibration_scale_zero", 0, "{scale: 0.5, offset: -10}", "{scale: 0, offset: -10}", 0, 0, E,
     "calibration scale is 0", 25, 61, 0},
    {"calibration_on_enum", 0, "type: enum, bits: 2,", "type: enum, bits: 2, calibration: {scale: 2},", 0, 0, E,
     "calibration does not apply to enum arguments", 26, 56, 0},
    {"range_min_above_max", 0, "range: [-10, 100]", "range: [100, -10]", 0, 0, E, "has MIN above MAX", 25, 95, 0},
    {"tolerance_negative", 0, "range: [-10, 100]", "range: [-10, 100], tolerance: -0.5", 0, 0, E,
     "tolerance must be >= 0", 25, 118, 0},
    {"tolerance_on_enum", 0, "type: enum, bits: 2,", "type: enum, bits: 2, tolerance: 1,", 0, 0, E,
     "tolerance does not apply to enum arguments", 26, 54, 0},
    {"tolerance_accepted", 0, "range: [-10, 100]", "range: [-10, 100], tolerance: 0.25", 0, 0, W, "(none)", 0, 0, 2},
    /* ---- JSON */
    {"json_syntax_error_position", 1, "\"bit_rate\": 62.5,", "\"bit_rate\": 62.5", 0, 0, E, "JSON syntax error", 6, 5, 0},
    {"json_unknown_key_did_you_mean", 1, "\"postamble\"", "\"postamle\"", 0, 0, E,
     "unknown key 'postamle' in link.framing (did you mean 'postamble'?)", 10, 43, 0},
    {"json_pattern_as_number", 1, "\"zero\": \"0011\"", "\"zero\": 11", 0, 0, E,
     "must be a quoted string: unquoted, JSON reads it as an integer", 6, 25, 0},
    {"json_wrong_type", 1, "\"critical\": true", "\"critical\": \"yes\"", 0, 0, E,
     "'critical' must be true or false, not a string 'yes'", 21, 71, 0},
    {"json_duplicate_mnemonic", 1, "\"AUX_PING\"", "\"NAV_GO\"", 0, 0, E, "duplicate mnemonic 'NAV_GO'", 26, 18, 0},
    {"json_duplicate_key", 1, "\"gap\": 4,", "\"gap\": 4, \"gap\": 5,", 0, 0, E, "duplicate key 'gap'", 10, 43, 0},
    {"json_integer_beyond_64_bits", 1, "\"opcode\": 10", "\"opcode\": 18446744073709551616", 0, 0, E,
     "integer 18446744073709551616 does not fit in 64 bits", 21, 55, 0},
    {"json_float_for_integer", 1, "\"opcode_bits\": 5", "\"opcode_bits\": 5.0", 0, 0, E,
     "'opcode_bits' must be an integer, not a number (5.0)", 14, 22, 0},
    {"json_number_overflow", 1, "\"amplitude\": 0.75", "\"amplitude\": 1e999", 0, 0, E, "beyond the range of a double", 8,
     73, 0},
    {"json_missing_required", 1, "\"system\": \"AUX\", ", "", 0, 0, E, "a command has no 'system' (required)", 26, 5, 0},
};

static void run_row(void **state) { dict_row_run(*state, BASE_YAML, BASE_JSON, -1); }

/* ---------------------------------------------------------------- the valid dictionary */

static void check_model(const ulk_dict *d)
{
    const ulk_link *L = &d->link;
    assert_string_equal(d->name, "test-min");
    assert_string_equal(d->version, "0.1");
    assert_int_equal(L->profile, ULK_PROFILE_SUBBIT);
    assert_int_equal(L->bit_rate.num, 125);
    assert_int_equal(L->bit_rate.den, 2);
    assert_int_equal(L->n_subbits, 4);
    const uint8_t z[4] = {0, 0, 1, 1}, o[4] = {1, 1, 0, 0}, i[4] = {0, 1, 0, 1};
    assert_memory_equal(L->zero, z, 4);
    assert_memory_equal(L->one, o, 4);
    assert_memory_equal(L->idle, i, 4);
    assert_int_equal(L->line_code, ULK_LINE_NRZM);
    assert_int_equal(L->fsc.num, 500);
    assert_int_equal(L->fsc.den, 1);
    assert_int_equal(L->waveform, ULK_WAVE_SQUARE);
    assert_true(L->amplitude == 0.75);
    assert_true(L->has_pilot);
    assert_int_equal(L->fp.num, 125);
    assert_true(L->pilot_amplitude == 0.25);
    assert_int_equal(L->preamble, 20);
    assert_int_equal(L->gap, 4);
    assert_int_equal(L->postamble, 2);
    assert_int_equal(L->vehicle_bits, 5);
    assert_int_equal(L->vehicle_value, 22); /* 0b10110 */
    assert_int_equal(L->system_bits, 3);
    assert_int_equal(L->opcode_bits, 5);
    assert_int_equal(L->argument_bits, 24);
    assert_int_equal(L->check, ULK_CHECK_PARITY_ODD);
    assert_int_equal(L->check_bits, 1);
    assert_int_equal(L->word_bits, 38);
    assert_int_equal(d->n_systems, 2);
    assert_string_equal(d->systems[1].name, "AUX");
    assert_int_equal(d->systems[1].address, 3);
    assert_int_equal(d->n_commands, 2);
    const ulk_command *go = ulk_dict_find_command(d, "NAV_GO");
    assert_non_null(go);
    assert_int_equal(go->opcode, 10); /* "010" is ten under YAML 1.2 */
    assert_true(go->critical);
    assert_int_equal(go->system_index, 0);
    assert_int_equal(go->n_args, 3);
    assert_int_equal(go->packed_bits, 11);
    const ulk_arg *sp = &go->args[0];
    assert_string_equal(sp->name, "speed");
    assert_int_equal(sp->type, ULK_ARG_UNSIGNED);
    assert_int_equal(sp->bits, 8);
    assert_int_equal(sp->cal, ULK_CAL_LINEAR);
    assert_true(sp->cal_scale == 0.5 && sp->cal_offset == -10.0);
    assert_true(sp->has_range && sp->range_min == -10.0 && sp->range_max == 100.0);
    assert_string_equal(sp->units, "m");
    assert_true(sp->has_default);
    assert_int_equal(sp->default_raw, 60); /* (20 - -10) / 0.5 */
    const ulk_arg *mo = ulk_command_find_arg(go, "mode");
    assert_non_null(mo);
    assert_int_equal(mo->n_values, 2);
    assert_int_equal(mo->default_raw, 3);
    assert_int_equal(go->args[2].type, ULK_ARG_BOOLEAN);
    assert_int_equal(go->args[2].bits, 1);
    assert_int_equal(go->args[2].default_raw, 1); /* "on" */
    const ulk_command *ping = ulk_dict_find_opcode(d, 3, 31);
    assert_non_null(ping);
    assert_string_equal(ping->mnemonic, "AUX_PING");
    assert_string_equal(ping->description, "ping");
    assert_false(ping->critical);
    assert_int_equal(ping->n_args, 0);
    assert_null(ulk_dict_find_command(d, "nav_go"));
    assert_null(ulk_dict_find_opcode(d, 0, 31));
    assert_int_equal(ulk_dict_find_system_addr(d, 3), 1);
    assert_int_equal(ulk_dict_find_system(d, "NAV"), 0);
    assert_int_equal(strlen(d->sha256), 64);
}

static void test_minimal_yaml_model(void **st)
{
    (void)st;
    ulk_dict *d = load_ok("min.yaml", BASE_YAML, 0);
    check_model(d);
    /* Locations survive the load: the model points back at its lines. */
    const ulk_command *go = ulk_dict_find_command(d, "NAV_GO");
    assert_string_equal(go->loc.file, "min.yaml");
    assert_int_equal(go->args[1].loc.line, 26);
    assert_string_equal(go->args[1].loc.path, "commands[0].arguments[1]");
    assert_int_equal(go->args[1].values[1].loc.line, 26);
    ulk_dict_destroy(d);
}

static void test_minimal_json_model_same_hash(void **st)
{
    (void)st;
    ulk_dict *y = load_ok("min.yaml", BASE_YAML, 0);
    ulk_dict *j = load_ok("min.json", BASE_JSON, 1);
    check_model(j);
    assert_string_equal(y->sha256, j->sha256);
    char *cy, *cj;
    assert_int_equal(ulk_dict_canonical(y, &cy, NULL), 0);
    assert_int_equal(ulk_dict_canonical(j, &cj, NULL), 0);
    assert_string_equal(cy, cj);
    free(cy);
    free(cj);
    ulk_dict_destroy(y);
    ulk_dict_destroy(j);
}

/* The hash follows the content: any change to the model changes it, layout does not. */
static void test_hash_tracks_content(void **st)
{
    (void)st;
    ulk_dict *a = load_ok("a.yaml", BASE_YAML, 0);
    char *t = replace(strdup(BASE_YAML), "default: 20}", "default: 20.2}"); /* same raw 60 */
    t = replace(t, "opcode: 0x1F\n", "opcode: 31   # the same, in decimal\n");
    t = replace(t, "  line_code: nrz-m\n", "  # a comment\n  line_code: \"nrz-m\"\n");
    ulk_dict *b = load_ok("b.yaml", t, 0);
    assert_string_equal(a->sha256, b->sha256);
    free(t);
    t = replace(strdup(BASE_YAML), "description: \"ping\"", "description: \"pong\"");
    ulk_dict *c = load_ok("c.yaml", t, 0);
    assert_string_not_equal(a->sha256, c->sha256);
    free(t);
    ulk_dict_destroy(a);
    ulk_dict_destroy(b);
    ulk_dict_destroy(c);
}

/* The canonical form as docs/dictionary.md describes it (exact rates as strings, defaults
 * as raw values). Its SHA-256 is checked independently with Python's hashlib in
 * tests/py/test_dict_canonical.py. */
static void test_canonical_form(void **st)
{
    (void)st;
    ulk_dict *d = load_ok("min.yaml", BASE_YAML, 0);
    char *canon;
    size_t len;
    assert_int_equal(ulk_dict_canonical(d, &canon, &len), 0);
    assert_int_equal(strlen(canon), len);
    assert_true(canon[0] == '{' && canon[len - 1] == '}');
    assert_non_null(strstr(canon, "\"bit_rate\":\"62.5\""));
    assert_non_null(strstr(canon, "\"default\":60"));
    free(canon);
    ulk_dict_destroy(d);
}

/* Integers beyond 2^53 keep every digit (JSON numbers are never read through a double). */
static void test_json_big_integers_exact(void **st)
{
    (void)st;
    char *t = replace(strdup(BASE_JSON), "\"argument_bits\": 24", "\"argument_bits\": 64");
    t = replace(t, "{\"name\": \"flag\", \"type\": \"boolean\", \"default\": \"on\"}",
                "{\"name\": \"big\", \"type\": \"enum\", \"bits\": 53, \"values\": {\"A\": 9007199254740991, \"B\": 9007199254740990}, \"default\": \"A\"}");
    ulk_dict *d = load_ok("big.json", t, 1);
    const ulk_arg *a = ulk_command_find_arg(ulk_dict_find_command(d, "NAV_GO"), "big");
    assert_non_null(a);
    assert_int_equal(a->values[0].code, 9007199254740991LL);
    assert_int_equal(a->values[1].code, 9007199254740990LL);
    ulk_dict_destroy(d);
    free(t);
    /* 2^64 - 1 fits a 64-bit code; 2^64 does not. */
    t = replace(strdup(BASE_JSON), "\"argument_bits\": 24", "\"argument_bits\": 64");
    t = replace(t, "{\"name\": \"flag\", \"type\": \"boolean\", \"default\": \"on\"}",
                "{\"name\": \"big\", \"type\": \"enum\", \"bits\": 53, \"values\": {\"A\": 9007199254740993, \"B\": 9007199254740992}}");
    ulk_diag *dg = ulk_diag_create();
    ulk_dict *e = NULL;
    assert_int_equal(ulk_dict_load_mem("big2.json", t, strlen(t), 1, &e, dg), ULK_EPARSE);
    /* Both codes are over 53 bits: two errors, not one "already used" from rounding. */
    assert_int_equal(ulk_diag_errors(dg), 2);
    assert_non_null(strstr(ulk_diag_get(dg, 0)->msg, "9007199254740993 of 'A' does not fit in 53 bits"));
    ulk_diag_destroy(dg);
    free(t);
}

/* A polynomial over a field too wide to try every raw (2^20 raws: sampled) that is
 * monotonic loads, and its default converts through it. */
static void test_wide_polynomial_loads(void **st)
{
    (void)st;
    char *t = replace(strdup(BASE_YAML), "bits: 8, calibration: {scale: 0.5, offset: -10}, range: [-10, 100]",
                      "bits: 20, calibration: {polynomial: [0, 1, 0.000002]}, range: [0, 100]");
    ulk_dict *d = load_ok("wide.yaml", t, 0);
    const ulk_arg *a = &ulk_dict_find_command(d, "NAV_GO")->args[0];
    assert_int_equal(a->cal, ULK_CAL_POLY);
    assert_int_equal(a->n_poly, 3);
    /* f(20) = 20.0008 is nearest to 20 (f(19) = 19.000722). */
    assert_int_equal(a->default_raw, 20);
    ulk_dict_destroy(d);
    free(t);
}

/* All findings are listed, not only the first. */
static void test_all_findings_listed(void **st)
{
    (void)st;
    char *t = replace(strdup(BASE_YAML), "bits: 8,", "bits: 0,");
    t = replace(t, "RUN: 3", "RUN: 9");
    t = replace(t, "system: AUX", "system: AXU");
    ulk_diag *dg = ulk_diag_create();
    ulk_dict *d = NULL;
    assert_int_equal(ulk_dict_load_mem("many.yaml", t, strlen(t), 0, &d, dg), ULK_EPARSE);
    assert_int_equal(ulk_diag_errors(dg), 3);
    assert_int_equal(ulk_diag_first_error(dg)->line, 25);
    ulk_diag_destroy(dg);
    free(t);
}

/* ---------------------------------------------------------------- files and hostile input */

static char tmpdir[256];

static int setup_tmp(void **st)
{
    (void)st;
    snprintf(tmpdir, sizeof tmpdir, "/tmp/ulk_test_dict.XXXXXX");
    return mkdtemp(tmpdir) ? 0 : -1;
}

static int teardown_tmp(void **st)
{
    (void)st;
    char cmd[300];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", tmpdir);
    return system(cmd) == 0 ? 0 : -1;
}

static const char *write_tmp(const char *name, const char *data, size_t len)
{
    static char path[512];
    snprintf(path, sizeof path, "%s/%s", tmpdir, name);
    FILE *f = fopen(path, "wb");
    assert_non_null(f);
    assert_int_equal(fwrite(data, 1, len, f), len);
    fclose(f);
    return path;
}

static void expect_refusal(const char *path, int want_rc, const char *fragment, int line, int col)
{
    ulk_diag *dg = ulk_diag_create();
    ulk_dict *d = (ulk_dict *)1;
    int rc = ulk_dict_load(path, &d, dg);
    assert_null(d);
    const ulk_finding *f = ulk_diag_first_error(dg);
    assert_non_null(f);
    char buf[1200];
    ulk_finding_format(f, buf, sizeof buf);
    if (rc != want_rc || !strstr(buf, fragment) || f->line != line || f->col != col)
        fail_msg("%s: status %d (want %d), '%s' (want '%s' at %d:%d)", path, rc, want_rc, buf, fragment, line, col);
    ulk_diag_destroy(dg);
}

static void test_missing_file(void **st)
{
    (void)st;
    char path[600];
    snprintf(path, sizeof path, "%s/no-such.yaml", tmpdir);
    expect_refusal(path, ULK_EIO, "no-such.yaml: cannot open: No such file or directory", 0, 0);
}

static void test_empty_files(void **st)
{
    (void)st;
    expect_refusal(write_tmp("empty.yaml", "", 0), ULK_EPARSE, "empty.yaml:1:1: error: the file is empty", 1, 1);
    expect_refusal(write_tmp("comments.yaml", "# nothing here\n\n", 16), ULK_EPARSE, "the file is empty", 1, 1);
    expect_refusal(write_tmp("empty.json", " \n", 2), ULK_EPARSE, "empty.json:1:1: error: the file is empty", 1, 1);
    expect_refusal(write_tmp("null.yaml", "~\n", 2), ULK_EPARSE, "must be a mapping, not null", 1, 1);
    expect_refusal(write_tmp("list.json", "[1, 2]", 6), ULK_EPARSE, "must be a mapping, not a list", 1, 1);
}

static void test_binary_garbage(void **st)
{
    (void)st;
    /* Bytes of no text encoding, including a NUL: refused with a position, no crash. */
    static const char junk[] = "\x7f" "ELF\x02\x01\x01\x00\x00\xff\xfe\x80\x81\xc3\x28 garbage";
    expect_refusal(write_tmp("junk.yaml", junk, sizeof junk - 1), ULK_EPARSE, "not readable as YAML text", 1, 1);
    expect_refusal(write_tmp("junk.json", junk, sizeof junk - 1), ULK_EPARSE, "JSON syntax error at byte 0x7F", 1, 1);
    static const char utf8bad[] = "dictionary: {name: \"a\xc3\x28\"}\n";
    expect_refusal(write_tmp("utf8.yaml", utf8bad, sizeof utf8bad - 1), ULK_EPARSE, "invalid trailing UTF-8 octet", 1, 23);
    /* A NUL inside otherwise valid JSON must not end the text silently. */
    static const char nul[] = "{\"dictionary\": {}}\0{\"x\": 1}";
    expect_refusal(write_tmp("nul.json", nul, sizeof nul - 1), ULK_EPARSE, "JSON syntax error at byte 0x00", 1, 19);
}

static void test_deep_nesting(void **st)
{
    (void)st;
    char buf[400];
    int n = 100;
    for (int i = 0; i < n; i++) buf[i] = '[';
    for (int i = 0; i < n; i++) buf[n + i] = ']';
    buf[2 * n] = '\n';
    /* The 65th bracket is one too many: column 65. */
    expect_refusal(write_tmp("deep.yaml", buf, (size_t)(2 * n + 1)), ULK_ELIMIT, "nesting deeper than 64 levels", 1, 65);
    expect_refusal(write_tmp("deep.json", buf, (size_t)(2 * n + 1)), ULK_ELIMIT, "nesting deeper than 64 levels", 1, 65);
    /* 64 levels exactly is within the limit (and then fails only as a non-mapping). */
    n = 64;
    for (int i = 0; i < n; i++) buf[i] = '[';
    for (int i = 0; i < n; i++) buf[n + i] = ']';
    expect_refusal(write_tmp("deep64.json", buf, (size_t)(2 * n)), ULK_EPARSE, "must be a mapping, not a list", 1, 1);
    /* Deep block nesting in YAML. */
    char *y = malloc(20000);
    size_t k = 0;
    for (int i = 0; i < 70; i++) {
        for (int s = 0; s < i; s++) y[k++] = ' ';
        k += (size_t)sprintf(y + k, "k%d:\n", i);
    }
    expect_refusal(write_tmp("deepblock.yaml", y, k), ULK_ELIMIT, "nesting deeper than 64 levels", 65, 65);
    free(y);
}

static void test_billion_laughs(void **st)
{
    (void)st;
    static const char lol[] = "a: &a [x, x, x, x, x, x, x, x, x]\n"
                              "b: &b [*a, *a, *a, *a, *a, *a, *a, *a, *a]\n"
                              "c: &c [*b, *b, *b, *b, *b, *b, *b, *b, *b]\n";
    expect_refusal(write_tmp("lol.yaml", lol, sizeof lol - 1), ULK_EPARSE, "YAML aliases (*a) are not accepted", 2, 8);
}

/* A 10 MB dictionary of 70 000 commands loads, and every command can be found. */
static void test_ten_megabytes(void **st)
{
    (void)st;
    size_t cap = 12u << 20, k = 0;
    char *t = malloc(cap);
    const char *head = strstr(BASE_YAML, "commands:\n");
    k = (size_t)(head - BASE_YAML);
    memcpy(t, BASE_YAML, k);
    char *tmp = replace(strndup(t, k), "opcode_bits: 5", "opcode_bits: 16");
    tmp = replace(tmp, "argument_bits: 24", "argument_bits: 32");
    k = strlen(tmp);
    memcpy(t, tmp, k);
    free(tmp);
    k += (size_t)sprintf(t + k, "commands:\n");
    int n = 0;
    while (k < (10u << 20)) {
        k += (size_t)sprintf(t + k,
                             "  - mnemonic: C%06d\n    system: %s\n    opcode: %d\n    description: \"generated command %d\"\n"
                             "    arguments: [{name: x, type: unsigned, bits: 8, range: [0, 200], default: 7}]\n",
                             n, n < 65536 ? "NAV" : "AUX", n % 65536, n);
        n++;
    }
    const char *path = write_tmp("big.yaml", t, k);
    ulk_diag *dg = ulk_diag_create();
    ulk_dict *d = NULL;
    int rc = ulk_dict_load(path, &d, dg);
    if (rc) ulk_diag_print(dg, stderr);
    assert_int_equal(rc, 0);
    assert_int_equal(d->n_commands, n);
    char m[16];
    for (int i = 0; i < n; i += 997) {
        snprintf(m, sizeof m, "C%06d", i);
        const ulk_command *c = ulk_dict_find_command(d, m);
        assert_non_null(c);
        assert_ptr_equal(ulk_dict_find_opcode(d, i < 65536 ? 0 : 3, (uint32_t)(i % 65536)), c);
    }
    ulk_dict_destroy(d);
    ulk_diag_destroy(dg);
    /* Over 16 MiB: refused by size before parsing. */
    t = realloc(t, (17u << 20));
    while (k < (16u << 20) + 10) t[k++] = '#';
    const char *p2 = write_tmp("huge.yaml", t, k);
    expect_refusal(p2, ULK_ELIMIT, "larger than the limit of 16777216 bytes", 0, 0);
    free(t);
}

/* Every allocation failure ends in a clean ULK_ENOMEM (and no leak under ASan). */
static void test_allocation_failures(void **st)
{
    (void)st;
    int n;
    for (n = 1; n < 100000; n++) {
        ulk_diag *dg = ulk_diag_create();
        assert_non_null(dg);
        ulk_alloc_fail_at(n);
        ulk_dict *d = NULL;
        int rc = ulk_dict_load_mem("min.yaml", BASE_YAML, sizeof BASE_YAML - 1, 0, &d, dg);
        ulk_alloc_fail_at(0);
        if (rc == 0) {
            assert_non_null(d);
            ulk_dict_destroy(d);
            ulk_diag_destroy(dg);
            break;
        }
        if (rc != ULK_ENOMEM) {
            ulk_diag_print(dg, stderr);
            fail_msg("allocation %d: status %d, want ULK_ENOMEM", n, rc);
        }
        assert_null(d);
        ulk_diag_destroy(dg);
    }
    assert_true(n > 50 && n < 100000);
}

/* ---------------------------------------------------------------- the demo dictionaries */

static void test_demo_yaml_json_same_model(void **st)
{
    (void)st;
    const char *y = ULK_SOURCE_DIR "/dictionaries/demo-subbit.yaml";
    const char *j = ULK_SOURCE_DIR "/dictionaries/demo-subbit.json";
    /* the demo files are part of the repository: missing is a failure, never a skip */
    if (access(y, R_OK) || access(j, R_OK)) fail_msg("demo dictionaries %s / %s cannot be read", y, j);
    ulk_diag *dg = ulk_diag_create();
    ulk_dict *dy = NULL, *dj = NULL;
    assert_int_equal(ulk_dict_load(y, &dy, dg), 0);
    assert_int_equal(ulk_dict_load(j, &dj, dg), 0);
    assert_int_equal(ulk_diag_errors(dg), 0);
    assert_string_equal(dy->sha256, dj->sha256);
    char *cy, *cj;
    assert_int_equal(ulk_dict_canonical(dy, &cy, NULL), 0);
    assert_int_equal(ulk_dict_canonical(dj, &cj, NULL), 0);
    assert_string_equal(cy, cj);
    /* Field by field where the canonical form does not reach (model-only fields). */
    assert_int_equal(dy->n_commands, dj->n_commands);
    for (int i = 0; i < dy->n_commands; i++) {
        const ulk_command *a = &dy->commands[i], *b = &dj->commands[i];
        assert_int_equal(a->system_index, b->system_index);
        assert_int_equal(a->packed_bits, b->packed_bits);
        for (int k = 0; k < a->n_args; k++) {
            assert_int_equal(a->args[k].has_default, b->args[k].has_default);
            assert_true(a->args[k].default_eng == b->args[k].default_eng ||
                        (isnan(a->args[k].default_eng) && isnan(b->args[k].default_eng)));
        }
    }
    assert_memory_equal(&dy->link, &dj->link, sizeof dy->link);
    free(cy);
    free(cj);
    ulk_dict_destroy(dy);
    ulk_dict_destroy(dj);
    ulk_diag_destroy(dg);
}

int main(void)
{
    size_t nrows = sizeof rows / sizeof rows[0];
    struct CMUnitTest *t = calloc(nrows, sizeof *t);
    for (size_t i = 0; i < nrows; i++) {
        t[i].name = rows[i].name;
        t[i].test_func = run_row;
        t[i].initial_state = (void *)&rows[i];
    }
    int fails = _cmocka_run_group_tests("broken_dictionaries", t, nrows, NULL, NULL);
    free(t);
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_minimal_yaml_model),
        cmocka_unit_test(test_minimal_json_model_same_hash),
        cmocka_unit_test(test_hash_tracks_content),
        cmocka_unit_test(test_canonical_form),
        cmocka_unit_test(test_json_big_integers_exact),
        cmocka_unit_test(test_wide_polynomial_loads),
        cmocka_unit_test(test_all_findings_listed),
        cmocka_unit_test(test_missing_file),
        cmocka_unit_test(test_empty_files),
        cmocka_unit_test(test_binary_garbage),
        cmocka_unit_test(test_deep_nesting),
        cmocka_unit_test(test_billion_laughs),
        cmocka_unit_test(test_ten_megabytes),
        cmocka_unit_test(test_allocation_failures),
        cmocka_unit_test(test_demo_yaml_json_same_model),
    };
    fails += cmocka_run_group_tests_name("dictionary", tests, setup_tmp, teardown_tmp);
    return fails ? 1 : 0;
}
