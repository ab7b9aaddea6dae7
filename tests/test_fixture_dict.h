/* tests/test_fixture_dict.h - the small dictionary the compiler tests share.
 *
 * Link: R_b = 62.5 bit/s (an exact decimal that is not an integer), n = 4, P = 16, G = 4,
 * T = 2; word = vehicle 4 bits (0xA) + system 3 + opcode 5 + arguments 32 + parity-even
 * = 45 bits, 12 hex digits. Every argument type appears once: unsigned with units and range,
 * signed, boolean + enum with a default, float32, linear calibration (scale 0.25), a critical
 * command, a polynomial calibration 1 + 0.5 r + 0.25 r^2.
 */
#ifndef TEST_FIXTURE_DICT_H
#define TEST_FIXTURE_DICT_H

static const char FIXTURE_DICT_YAML[] =
    "dictionary: {name: fixture-list, version: \"1\"}\n"
    "link:\n"
    "  profile: subbit\n"
    "  bit_rate: 62.5\n"
    "  subbits: {zero: \"0011\", one: \"1100\", idle: \"0101\"}\n"
    "  subcarrier: {frequency: 500, waveform: sine, amplitude: 0.8}\n"
    "  framing: {preamble: 16, gap: 4, postamble: 2}\n"
    "  word:\n"
    "    vehicle_address: {bits: 4, value: 0xA}\n"
    "    system_address_bits: 3\n"
    "    opcode_bits: 5\n"
    "    argument_bits: 32\n"
    "    check: parity-even\n"
    "systems:\n"
    "  - {name: EPS, address: 5}\n"
    "  - {name: AUX, address: 3}\n"
    "commands:\n"
    "  - mnemonic: SET_LEVEL\n"
    "    system: EPS\n"
    "    opcode: 0x13\n"
    "    arguments:\n"
    "      - {name: level, type: unsigned, bits: 8, units: V, range: [0, 250], default: 100}\n"
    "  - mnemonic: TRIM\n"
    "    system: EPS\n"
    "    opcode: 0x01\n"
    "    arguments:\n"
    "      - {name: offset, type: signed, bits: 8}\n"
    "  - mnemonic: VALVE\n"
    "    system: AUX\n"
    "    opcode: 0x02\n"
    "    arguments:\n"
    "      - {name: open, type: boolean}\n"
    "      - {name: mode, type: enum, bits: 2, values: {HOLD: 0, SLOW: 1, FAST: 2}, default: SLOW}\n"
    "  - mnemonic: GAIN\n"
    "    system: AUX\n"
    "    opcode: 0x03\n"
    "    arguments:\n"
    "      - {name: k, type: float32}\n"
    "  - mnemonic: DELAY\n"
    "    system: AUX\n"
    "    opcode: 0x04\n"
    "    arguments:\n"
    "      - {name: t, type: unsigned, bits: 12, units: s, range: [0, 1000], calibration: {scale: 0.25, offset: 0}}\n"
    "  - mnemonic: FIRE\n"
    "    system: EPS\n"
    "    opcode: 0x05\n"
    "    critical: true\n"
    "    arguments:\n"
    "      - {name: pulses, type: unsigned, bits: 4}\n"
    "  - mnemonic: POLY\n"
    "    system: AUX\n"
    "    opcode: 0x06\n"
    "    arguments:\n"
    "      - {name: p, type: unsigned, bits: 6, calibration: {polynomial: [1, 0.5, 0.25]}}\n";

#endif
