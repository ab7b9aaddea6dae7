/* src/profiles/profiles.h - the tables of the registered link profiles (internal): each
 * profile's folder defines one, src/profiles/profile.c lists them. */
#ifndef ULK_PROFILES_H
#define ULK_PROFILES_H

#include "ulk/profile.h"

extern const ulk_profile_ops ulk_profile_subbit;   /* src/profiles/subbit/ */
extern const ulk_profile_ops ulk_profile_ccsds_tc; /* src/profiles/ccsds/ */

#endif
