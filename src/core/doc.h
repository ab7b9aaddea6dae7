/* src/doc.h - one in-memory document tree for YAML and JSON input (internal).
 *
 * Why: the dictionary rules are written once, against this tree, whichever format the file
 * is in. Every node keeps where it was written (line and column, 1-based) and can name its
 * place in the tree ("commands[12].arguments[0].bits"), so every finding points at the text
 * to fix. Scalars keep their text exactly as written (a JSON number keeps its digits, so an
 * integer beyond 2^53 is not rounded) and whether they were quoted, because YAML 1.2 core
 * schema typing depends on it: `"0101"` is a string, `0101` the integer 101.
 *
 * Limits (each refused with a message naming the place): nesting deeper than
 * ULK_DOC_MAX_DEPTH, YAML aliases (refused outright, so no alias expansion attack can
 * succeed), more than one YAML document, tags other than !!str, complex mapping keys,
 * duplicate keys within a mapping.
 *
 * Usage:
 *     ulk_doc *doc;
 *     if (ulk_doc_parse("d.yaml", text, len, 0, &doc, diag) == 0) {
 *         ulk_node *link = ulk_node_get(doc->root, "link");
 *         ...
 *         ulk_doc_destroy(doc);
 *     }
 */
#ifndef ULK_DOC_H
#define ULK_DOC_H

#include <stddef.h>
#include <stdint.h>

#include "ulk/error.h"

#define ULK_DOC_MAX_DEPTH 64
#define ULK_DOC_MAX_BYTES ((size_t)16 << 20) /* 16 MiB */

typedef enum { ULK_NODE_SCALAR = 0, ULK_NODE_MAP, ULK_NODE_SEQ } ulk_node_kind;

typedef struct ulk_node ulk_node;
struct ulk_node {
    ulk_node_kind kind;
    int line, col;       /* 1-based position of the node's first character */
    int quoted;          /* scalar: 1 when written as a string (YAML quoted or block, !!str; JSON string) */
    char *text;          /* scalar: its text, NUL-terminated (may hold NULs from JSON \u0000) */
    size_t len;          /* scalar: bytes of text */
    ulk_node *parent;    /* NULL for the root */
    const char *key;     /* text of the key under which this node sits in its parent map */
    int index;           /* index in the parent sequence, -1 otherwise */
    ulk_node **keys;     /* map: key scalars (their parent is the map) */
    ulk_node **items;    /* map: values, seq: items */
    int n, cap;          /* entries in keys/items */
    char *path;          /* cached by ulk_node_path() */
};

typedef struct {
    char *file;          /* name used in locations */
    int is_json;
    ulk_node *root;      /* never NULL after a successful parse */
} ulk_doc;

/* Parses text (len bytes, need not be NUL-terminated) as JSON (is_json) or YAML into a tree.
 * Returns 0 with *out set; ULK_EPARSE (syntax, empty file, refused construct; findings in
 * diag with file:line:col), ULK_ELIMIT (too large, too deep), ULK_ENOMEM. *out is NULL on
 * failure. The caller frees *out with ulk_doc_destroy(). */
int ulk_doc_parse(const char *file, const char *text, size_t len, int is_json, ulk_doc **out,
                  ulk_diag *diag);
/* Frees doc and all nodes; NULL does nothing. */
void ulk_doc_destroy(ulk_doc *doc);

/* The node's tree path ("" for the root, "link.bit_rate", "commands[3].arguments[0]");
 * a key node has its value's path. Owned by the node; "" when out of memory. */
const char *ulk_node_path(ulk_node *n);
/* A location for n within doc; pointers stay valid while doc lives. */
ulk_loc ulk_node_loc(const ulk_doc *doc, ulk_node *n);
/* The value under key in map (NULL when absent or map is not a map). */
ulk_node *ulk_node_get(const ulk_node *map, const char *key);
/* The key node of the entry whose value is v (NULL when v is not a map value). */
ulk_node *ulk_node_key_of(const ulk_node *v);

/* YAML 1.2 core schema type of a scalar (quoted scalars are always strings). JSON scalars
 * resolve the same way (their literals are a subset). 0b binary integers are accepted too. */
typedef enum {
    ULK_SC_STRING = 0,
    ULK_SC_NULL,
    ULK_SC_BOOL,
    ULK_SC_INT,
    ULK_SC_FLOAT,
    ULK_SC_NAN_INF       /* .nan / .inf: resolved so that it can be refused by name */
} ulk_scalar_type;
ulk_scalar_type ulk_scalar_resolve(const ulk_node *n);
/* "a mapping", "a list", "an integer", "a string", ... for messages. */
const char *ulk_node_type_name(const ulk_node *n);

/* Reads an integer literal (decimal, 0x hex, 0o octal, 0b binary, optional sign):
 * *neg and *mag (magnitude). Returns 0, ULK_EPARSE when text is not an integer literal,
 * ULK_ELIMIT when the magnitude exceeds 2^64 - 1. */
int ulk_parse_int_text(const char *text, int *neg, uint64_t *mag);

/* Reports, through report(ctx, node, message), every key of map that is not in allowed (with a
 * did-you-mean, or the list of keys expected) and every key of required that map lacks.
 * allowed and required are NULL-terminated; required may be NULL. */
typedef void (*ulk_node_report_fn)(void *ctx, ulk_node *n, const char *msg);
void ulk_node_check_keys(ulk_node *map, const char *what, const char *const *allowed,
                         const char *const *required, ulk_node_report_fn report, void *ctx);

#endif
