/* src/carrier_load.h - building the carrier model from a document tree (internal).
 *
 * Why internal: the tree type (src/doc.h) is not public. The dictionary loader hands its
 * `carrier:` node and its checked link here, so the carrier rules live in one place
 * (src/carrier_load.c) whichever file the section comes from.
 */
#ifndef ULK_CARRIER_LOAD_H
#define ULK_CARRIER_LOAD_H

#include "doc.h"
#include "ulk/carrier.h"

/* Builds the model from the `carrier` mapping node of doc. link gives the data channel (NULL:
 * no data channel; a mode that turns data on is then an error). allow_dictionary_key accepts
 * the standalone file's `dictionary:` key (its value is not read here). Every finding goes to
 * diag with file:line:col and tree path; warnings do not fail.
 * Returns 0 with *out (free with ulk_carrier_destroy); ULK_EPARSE when any error was found
 * (*out NULL); ULK_ENOMEM; ULK_EINVAL for NULL arguments. */
int ulk_carrier_from_tree(const ulk_doc *doc, ulk_node *carrier, const ulk_link *link,
                          int allow_dictionary_key, ulk_carrier **out, ulk_diag *diag);

struct ulk_dict;
/* Moves the dictionary's carrier section out of d (defined in src/dict.c): returns it (the
 * caller frees it with ulk_carrier_destroy) and leaves d without one; NULL when d is NULL or
 * has none. */
ulk_carrier *ulk_dict_take_carrier(struct ulk_dict *d);

#endif
