/* include/ulk/limits.h - limits that the library enforces and that help texts and docs quote:
 * one source, so that what a command says it accepts is what it accepts. */
#ifndef ULK_LIMITS_H
#define ULK_LIMITS_H

/* ulk impair: largest clock error of the simulated signal, ppm (|--ppm| <= this) */
#define ULK_IMPAIR_MAX_PPM 10000
/* blind demodulator: default clock-error search range, +- ppm (ulk_demod_options.max_ppm = 0):
 * +-1000 ppm (sample clock and subcarrier of a real recording) with a 25 % margin */
#define ULK_DEMOD_DEFAULT_MAX_PPM 1250
/* complex captures: default coarse carrier-offset search range, +- Hz (decode --max-offset) */
#define ULK_CARRIER_DEFAULT_MAX_OFFSET_HZ 5000

/* The value of a limit as text, for help strings: ULK_STR(ULK_IMPAIR_MAX_PPM) is "10000". */
#define ULK_STR_(x) #x
#define ULK_STR(x) ULK_STR_(x)

#endif
