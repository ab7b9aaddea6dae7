/* src/profiles/profile.c - the registration of the link profiles behind ulk/profile.h.
 *
 * Adding a profile is a folder src/profiles/<name>/ with its table and one line in
 * ulk_profiles below (DEVELOPERS.md "How to add a link profile").
 */
#include <stdio.h>
#include <string.h>

#include "profiles.h"

static const ulk_profile_ops *const ulk_profiles[] = {
    &ulk_profile_subbit,
    &ulk_profile_ccsds_tc,
};

const ulk_profile_ops *ulk_profile_ops_for(ulk_profile id)
{
    for (size_t i = 0; i < sizeof ulk_profiles / sizeof ulk_profiles[0]; i++)
        if (ulk_profiles[i]->id == id) return ulk_profiles[i];
    return NULL;
}

const ulk_profile_ops *ulk_profile_ops_by_name(const char *name)
{
    for (size_t i = 0; name && i < sizeof ulk_profiles / sizeof ulk_profiles[0]; i++)
        if (!strcmp(ulk_profiles[i]->name, name)) return ulk_profiles[i];
    return NULL;
}

const ulk_profile_ops *ulk_profile_ops_at(size_t i)
{
    return i < sizeof ulk_profiles / sizeof ulk_profiles[0] ? ulk_profiles[i] : NULL;
}

const ulk_profile_ops *ulk_profile_of(const ulk_link *l) { return ulk_profile_ops_for(l->profile); }
