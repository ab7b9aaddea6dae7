/* src/doc.c - YAML (libyaml events) and JSON (cJSON plus a position scanner) into one tree.
 *
 * YAML: the event API gives every node its start mark; the tree is built with an explicit
 * stack, so depth is bounded by ULK_DOC_MAX_DEPTH and never by the C stack. Aliases are
 * refused (a dictionary has no need for them and expansion is the billion-laughs attack).
 *
 * JSON: cJSON parses and reports where a syntax error is; it keeps no positions and turns
 * numbers into doubles. So after a successful parse a small scanner walks the same text in
 * document order and records, for every key and value, its offset (and for numbers the
 * exact digits); the cJSON tree is then walked in the same order and takes the records one
 * by one. Nesting is checked by a first pass before cJSON sees the text, so that a deeply
 * nested file is refused with its position instead of cJSON's own (much higher) limit.
 */
#include "doc.h"

#include <cjson/cJSON.h>
#include <ctype.h>
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>
#include <yaml.h>

#include "util.h"

/* ---------------------------------------------------------------- nodes */

static ulk_node *node_new(ulk_node_kind kind, int line, int col)
{
    ulk_node *n = ulk_calloc(1, sizeof *n);
    if (!n) return NULL;
    n->kind = kind;
    n->line = line;
    n->col = col;
    n->index = -1;
    return n;
}

static void node_free(ulk_node *n)
{
    if (!n) return;
    for (int i = 0; i < n->n; i++) {
        if (n->keys) node_free(n->keys[i]);
        node_free(n->items[i]);
    }
    ulk_free(n->keys);
    ulk_free(n->items);
    ulk_free(n->text);
    ulk_free(n->path);
    ulk_free(n);
}

void ulk_doc_destroy(ulk_doc *doc)
{
    if (!doc) return;
    node_free(doc->root);
    ulk_free(doc->file);
    ulk_free(doc);
}

static int scalar_set(ulk_node *n, const char *text, size_t len)
{
    n->text = ulk_strndup(text ? text : "", text ? len : 0);
    n->len = text ? len : 0;
    return n->text ? 0 : ULK_ENOMEM;
}

/* Appends child (and key for a map) to parent. Returns 0 or ULK_ENOMEM (child not owned). */
static int node_append(ulk_node *parent, ulk_node *key, ulk_node *child)
{
    if (parent->n == parent->cap) {
        int nc = parent->cap ? parent->cap * 2 : 4;
        ulk_node **ni = ulk_realloc(parent->items, (size_t)nc * sizeof *ni);
        if (!ni) return ULK_ENOMEM;
        parent->items = ni;
        if (parent->kind == ULK_NODE_MAP) {
            ulk_node **nk = ulk_realloc(parent->keys, (size_t)nc * sizeof *nk);
            if (!nk) return ULK_ENOMEM;
            parent->keys = nk;
        }
        parent->cap = nc;
    }
    child->parent = parent;
    if (parent->kind == ULK_NODE_MAP) {
        key->parent = parent;
        key->key = key->text;
        child->key = key->text;
        parent->keys[parent->n] = key;
    } else {
        child->index = parent->n;
    }
    parent->items[parent->n++] = child;
    return 0;
}

ulk_node *ulk_node_get(const ulk_node *map, const char *key)
{
    if (!map || map->kind != ULK_NODE_MAP) return NULL;
    for (int i = 0; i < map->n; i++)
        if (!strcmp(map->keys[i]->text, key)) return map->items[i];
    return NULL;
}

ulk_node *ulk_node_key_of(const ulk_node *v)
{
    const ulk_node *p = v ? v->parent : NULL;
    if (!p || p->kind != ULK_NODE_MAP) return NULL;
    for (int i = 0; i < p->n; i++)
        if (p->items[i] == v || p->keys[i] == v) return p->keys[i];
    return NULL;
}

/* Appends the path of n to buf (pos chars used). Recursion depth is bounded by the tree's. */
static size_t path_build(const ulk_node *n, char *buf, size_t cap, size_t pos)
{
    if (!n || !n->parent) return pos;
    pos = path_build(n->parent, buf, cap, pos);
    if (n->parent->kind == ULK_NODE_SEQ) {
        int w = snprintf(buf && pos < cap ? buf + pos : NULL, buf && pos < cap ? cap - pos : 0, "[%d]", n->index);
        return pos + (size_t)(w > 0 ? w : 0);
    }
    const char *k = n->key ? n->key : "?";
    size_t kl = strlen(k);
    if (pos > 0) {
        if (pos + 1 < cap) buf[pos] = '.';
        pos++;
    }
    if (pos < cap) memcpy(buf + pos, k, pos + kl < cap ? kl : cap - pos);
    return pos + kl;
}

const char *ulk_node_path(ulk_node *n)
{
    if (!n) return "";
    if (n->path) return n->path;
    /* A key node has the path of the entry it names. */
    size_t need = path_build(n, NULL, 0, 0);
    char *p = ulk_malloc(need + 1);
    if (!p) return "";
    path_build(n, p, need + 1, 0);
    p[need] = 0;
    n->path = p;
    return p;
}

ulk_loc ulk_node_loc(const ulk_doc *doc, ulk_node *n)
{
    ulk_loc l = {doc ? doc->file : NULL, n ? n->line : 0, n ? n->col : 0, ulk_node_path(n)};
    return l;
}

/* ---------------------------------------------------------------- scalar typing */

int ulk_parse_int_text(const char *t, int *neg, uint64_t *mag)
{
    const char *p = t;
    *neg = 0;
    *mag = 0;
    if (*p == '+' || *p == '-') { *neg = *p == '-'; p++; }
    int base = 10;
    if (p[0] == '0' && (p[1] == 'x' || p[1] == 'X')) { base = 16; p += 2; }
    else if (p[0] == '0' && (p[1] == 'o' || p[1] == 'O')) { base = 8; p += 2; }
    else if (p[0] == '0' && (p[1] == 'b' || p[1] == 'B')) { base = 2; p += 2; }
    if (!*p) return ULK_EPARSE;
    int over = 0;
    uint64_t v = 0;
    for (; *p; p++) {
        int d;
        if (*p >= '0' && *p <= '9') d = *p - '0';
        else if (*p >= 'a' && *p <= 'f') d = *p - 'a' + 10;
        else if (*p >= 'A' && *p <= 'F') d = *p - 'A' + 10;
        else return ULK_EPARSE;
        if (d >= base) return ULK_EPARSE;
        if (v > (UINT64_MAX - (uint64_t)d) / (uint64_t)base) over = 1;
        else v = v * (uint64_t)base + (uint64_t)d;
    }
    if (over) return ULK_ELIMIT;
    *mag = v;
    return 0;
}

/* [-+]?(\.[0-9]+|[0-9]+(\.[0-9]*)?)([eE][-+]?[0-9]+)?  (YAML 1.2 core float) */
static int is_float_text(const char *p)
{
    if (*p == '+' || *p == '-') p++;
    int digits = 0;
    while (isdigit((unsigned char)*p)) { p++; digits++; }
    if (*p == '.') {
        p++;
        int fd = 0;
        while (isdigit((unsigned char)*p)) { p++; fd++; }
        if (!digits && !fd) return 0;
    } else if (!digits) return 0;
    if (*p == 'e' || *p == 'E') {
        p++;
        if (*p == '+' || *p == '-') p++;
        if (!isdigit((unsigned char)*p)) return 0;
        while (isdigit((unsigned char)*p)) p++;
    }
    return *p == 0;
}

ulk_scalar_type ulk_scalar_resolve(const ulk_node *n)
{
    if (!n || n->kind != ULK_NODE_SCALAR || n->quoted) return ULK_SC_STRING;
    const char *t = n->text;
    if (!*t || !strcmp(t, "~") || !strcmp(t, "null") || !strcmp(t, "Null") || !strcmp(t, "NULL"))
        return ULK_SC_NULL;
    if (!strcmp(t, "true") || !strcmp(t, "True") || !strcmp(t, "TRUE") || !strcmp(t, "false") ||
        !strcmp(t, "False") || !strcmp(t, "FALSE"))
        return ULK_SC_BOOL;
    int neg;
    uint64_t mag;
    int rc = ulk_parse_int_text(t, &neg, &mag);
    if (rc == 0 || rc == ULK_ELIMIT) return ULK_SC_INT;
    if (is_float_text(t)) return ULK_SC_FLOAT;
    const char *p = t;
    if (*p == '+' || *p == '-') p++;
    if (!strcmp(p, ".inf") || !strcmp(p, ".Inf") || !strcmp(p, ".INF") || !strcmp(t, ".nan") ||
        !strcmp(t, ".NaN") || !strcmp(t, ".NAN"))
        return ULK_SC_NAN_INF;
    return ULK_SC_STRING;
}

const char *ulk_node_type_name(const ulk_node *n)
{
    if (!n) return "nothing";
    if (n->kind == ULK_NODE_MAP) return "a mapping";
    if (n->kind == ULK_NODE_SEQ) return "a list";
    switch (ulk_scalar_resolve(n)) {
    case ULK_SC_NULL: return "null";
    case ULK_SC_BOOL: return "a boolean";
    case ULK_SC_INT: return "an integer";
    case ULK_SC_FLOAT: return "a number";
    case ULK_SC_NAN_INF: return "a NaN or infinity";
    default: return "a string";
    }
}

/* ---------------------------------------------------------------- duplicate keys */

typedef struct {
    const char *k;
    int i;
} keyref;

static int keyref_cmp(const void *a, const void *b)
{
    const keyref *x = a, *y = b;
    int c = strcmp(x->k, y->k);
    return c ? c : x->i - y->i;
}

/* Reports every repeated key of map (as an error at the repeat). Sorting keeps it
 * O(n log n) for large enum maps. Returns 0, ULK_EPARSE or ULK_ENOMEM. */
static int check_dup_keys(const ulk_doc *doc, ulk_node *map, ulk_diag *diag)
{
    if (map->n < 2) return 0;
    keyref *v = ulk_malloc((size_t)map->n * sizeof *v);
    if (!v) return ULK_ENOMEM;
    for (int i = 0; i < map->n; i++) { v[i].k = map->keys[i]->text; v[i].i = i; }
    qsort(v, (size_t)map->n, sizeof *v, keyref_cmp);
    int rc = 0;
    for (int i = 1; i < map->n; i++) {
        if (strcmp(v[i].k, v[i - 1].k)) continue;
        ulk_node *first = map->keys[v[i - 1].i], *again = map->keys[v[i].i];
        /* v[i-1] is the earliest of a run only for the first repeat; report at each repeat. */
        int j = i - 1;
        while (j > 0 && !strcmp(v[j - 1].k, v[i].k)) j--;
        first = map->keys[v[j].i];
        ulk_loc l = ulk_node_loc(doc, again);
        rc = ulk_diag_add(diag, ULK_SEV_ERROR, &l, "duplicate key '%s' (first at line %d, column %d)",
                          again->text, first->line, first->col);
    }
    ulk_free(v);
    return rc;
}

/* Duplicate keys of every mapping of a finished tree (JSON: the tree is built bottom-up, so
 * paths are only complete at the end). Reported, not fatal. Returns 0 or ULK_ENOMEM. */
static int dup_keys_tree(const ulk_doc *doc, ulk_node *n, ulk_diag *diag)
{
    if (n->kind == ULK_NODE_SCALAR) return 0;
    if (n->kind == ULK_NODE_MAP && check_dup_keys(doc, n, diag) == ULK_ENOMEM) return ULK_ENOMEM;
    for (int i = 0; i < n->n; i++)
        if (dup_keys_tree(doc, n->items[i], diag)) return ULK_ENOMEM;
    return 0;
}

/* ---------------------------------------------------------------- positions */

/* Line and column (1-based; columns count UTF-8 characters) of byte offset off. */
static void offset_to_linecol(const char *text, size_t len, size_t off, int *line, int *col)
{
    int l = 1, c = 1;
    if (off > len) off = len;
    for (size_t i = 0; i < off; i++) {
        unsigned char ch = (unsigned char)text[i];
        if (ch == '\n') { l++; c = 1; }
        else if ((ch & 0xC0) != 0x80) c++;
    }
    *line = l;
    *col = c;
}

static int err_at(const ulk_doc *doc, ulk_diag *diag, int code, int line, int col, const char *fmt, ...)
    __attribute__((format(printf, 6, 7)));
static int err_at(const ulk_doc *doc, ulk_diag *diag, int code, int line, int col, const char *fmt, ...)
{
    ulk_loc l = {doc->file, line, col, NULL};
    va_list ap;
    va_start(ap, fmt);
    ulk_diag_vadd(diag, ULK_SEV_ERROR, &l, fmt, ap);
    va_end(ap);
    return code;
}

/* ---------------------------------------------------------------- YAML */

typedef struct {
    ulk_node *node;
    ulk_node *pending_key; /* map: key read, value not yet */
} yframe;

static int yaml_attach(ulk_doc *doc, yframe *stack, int depth, ulk_node *n, ulk_diag *diag)
{
    if (depth == 0) {
        doc->root = n;
        return 0;
    }
    yframe *f = &stack[depth - 1];
    if (f->node->kind == ULK_NODE_SEQ) {
        int rc = node_append(f->node, NULL, n);
        if (rc) node_free(n);
        return rc;
    }
    if (!f->pending_key) {
        if (n->kind != ULK_NODE_SCALAR) {
            int rc = err_at(doc, diag, ULK_EPARSE, n->line, n->col,
                            "a mapping key must be a plain or quoted text, not %s", ulk_node_type_name(n));
            node_free(n);
            return rc;
        }
        f->pending_key = n;
        return 0;
    }
    ulk_node *k = f->pending_key;
    f->pending_key = NULL;
    int rc = node_append(f->node, k, n);
    if (rc) { node_free(k); node_free(n); }
    return rc;
}

static const char *yaml_tag_ok(const yaml_char_t *tag, int *is_str)
{
    *is_str = 0;
    if (!tag) return NULL;
    const char *t = (const char *)tag;
    if (!strcmp(t, "tag:yaml.org,2002:str")) { *is_str = 1; return NULL; }
    if (!strcmp(t, "tag:yaml.org,2002:map") || !strcmp(t, "tag:yaml.org,2002:seq")) return NULL;
    return t;
}

static int parse_yaml(ulk_doc *doc, const char *text, size_t len, ulk_diag *diag)
{
    yaml_parser_t p;
    if (!yaml_parser_initialize(&p)) return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", doc->file);
    yaml_parser_set_input_string(&p, (const unsigned char *)text, len);
    yframe stack[ULK_DOC_MAX_DEPTH + 1];
    int depth = 0, rc = 0, docs = 0, done = 0;
    memset(stack, 0, sizeof stack);
    while (!done && rc == 0) {
        yaml_event_t ev;
        if (!yaml_parser_parse(&p, &ev)) {
            int line, col;
            if (p.error == YAML_READER_ERROR) {
                offset_to_linecol(text, len, p.problem_offset, &line, &col);
                rc = err_at(doc, diag, ULK_EPARSE, line, col, "not readable as YAML text: %s",
                            p.problem ? p.problem : "bad byte");
            } else if (p.error == YAML_MEMORY_ERROR) {
                rc = ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", doc->file);
            } else {
                line = (int)p.problem_mark.line + 1;
                col = (int)p.problem_mark.column + 1;
                char ctx[160] = "";
                if (p.context)
                    snprintf(ctx, sizeof ctx, " %s (started at line %d, column %d)", p.context,
                             (int)p.context_mark.line + 1, (int)p.context_mark.column + 1);
                rc = err_at(doc, diag, ULK_EPARSE, line, col, "YAML syntax error: %s%s",
                            p.problem ? p.problem : "malformed", ctx);
            }
            break;
        }
        int line = (int)ev.start_mark.line + 1, col = (int)ev.start_mark.column + 1;
        int is_str = 0;
        const char *badtag = NULL;
        switch (ev.type) {
        case YAML_STREAM_END_EVENT: done = 1; break;
        case YAML_DOCUMENT_START_EVENT:
            if (++docs > 1)
                rc = err_at(doc, diag, ULK_EPARSE, line, col,
                            "a dictionary file holds one YAML document; a second one starts here");
            break;
        case YAML_ALIAS_EVENT:
            rc = err_at(doc, diag, ULK_EPARSE, line, col,
                        "YAML aliases (*%s) are not accepted in a dictionary; write the value out",
                        ev.data.alias.anchor ? (const char *)ev.data.alias.anchor : "");
            break;
        case YAML_SCALAR_EVENT: {
            badtag = yaml_tag_ok(ev.data.scalar.tag, &is_str);
            if (badtag && !ev.data.scalar.plain_implicit && !ev.data.scalar.quoted_implicit) {
                rc = err_at(doc, diag, ULK_EPARSE, line, col,
                            "YAML tag '%s' is not accepted (only !!str)", badtag);
                break;
            }
            ulk_node *n = node_new(ULK_NODE_SCALAR, line, col);
            if (!n || scalar_set(n, (const char *)ev.data.scalar.value, ev.data.scalar.length)) {
                node_free(n);
                rc = ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", doc->file);
                break;
            }
            n->quoted = is_str || ev.data.scalar.style != YAML_PLAIN_SCALAR_STYLE;
            rc = yaml_attach(doc, stack, depth, n, diag);
            break;
        }
        case YAML_SEQUENCE_START_EVENT:
        case YAML_MAPPING_START_EVENT: {
            int is_map = ev.type == YAML_MAPPING_START_EVENT;
            badtag = yaml_tag_ok(is_map ? ev.data.mapping_start.tag : ev.data.sequence_start.tag, &is_str);
            if (badtag && !(is_map ? ev.data.mapping_start.implicit : ev.data.sequence_start.implicit)) {
                rc = err_at(doc, diag, ULK_EPARSE, line, col, "YAML tag '%s' is not accepted", badtag);
                break;
            }
            if (depth >= ULK_DOC_MAX_DEPTH) {
                rc = err_at(doc, diag, ULK_ELIMIT, line, col, "nesting deeper than %d levels",
                            ULK_DOC_MAX_DEPTH);
                break;
            }
            ulk_node *n = node_new(is_map ? ULK_NODE_MAP : ULK_NODE_SEQ, line, col);
            if (!n) { rc = ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", doc->file); break; }
            /* Attach first so that the tree owns the node even if parsing stops later. */
            rc = yaml_attach(doc, stack, depth, n, diag);
            if (rc) break;
            stack[depth].node = n;
            stack[depth].pending_key = NULL;
            depth++;
            break;
        }
        case YAML_SEQUENCE_END_EVENT:
        case YAML_MAPPING_END_EVENT:
            if (depth > 0) {
                depth--;
                if (stack[depth].node->kind == ULK_NODE_MAP) {
                    /* Reported, not fatal: the caller sees the error count. */
                    if (check_dup_keys(doc, stack[depth].node, diag) == ULK_ENOMEM)
                        rc = ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", doc->file);
                }
            }
            break;
        default: break;
        }
        yaml_event_delete(&ev);
    }
    /* A key whose value never came (only after an error) is still owned by its frame. */
    for (int i = 0; i < depth; i++) node_free(stack[i].pending_key);
    yaml_parser_delete(&p);
    if (rc == 0 && !doc->root)
        rc = err_at(doc, diag, ULK_EPARSE, 1, 1, "the file is empty: expected a dictionary mapping");
    return rc;
}

/* ---------------------------------------------------------------- JSON */

typedef struct {
    size_t off;      /* first byte of the key or value */
    size_t end;      /* one past its last byte (numbers and literals) */
    int line, col;
} jpos;

typedef struct {
    const char *t;
    size_t len, i;
    jpos *v;
    size_t n, cap, next;
} jscan;

static void js_ws(jscan *s)
{
    while (s->i < s->len && (s->t[s->i] == ' ' || s->t[s->i] == '\t' || s->t[s->i] == '\n' || s->t[s->i] == '\r'))
        s->i++;
}

static int js_rec(jscan *s, size_t off, size_t end)
{
    if (s->n == s->cap) {
        size_t nc = s->cap ? s->cap * 2 : 64;
        jpos *nv = ulk_realloc(s->v, nc * sizeof *nv);
        if (!nv) return ULK_ENOMEM;
        s->v = nv;
        s->cap = nc;
    }
    s->v[s->n].off = off;
    s->v[s->n].end = end;
    s->n++;
    return 0;
}

static void js_skip_string(jscan *s)
{
    s->i++; /* opening quote */
    while (s->i < s->len && s->t[s->i] != '"') s->i += s->t[s->i] == '\\' ? 2 : 1;
    s->i++;
}

/* Records every value (and key) of text that cJSON has already accepted, in document order.
 * Depth was checked beforehand, so the recursion is bounded. */
static int js_value(jscan *s)
{
    js_ws(s);
    size_t start = s->i;
    if (s->i >= s->len) return ULK_EPARSE;
    char c = s->t[s->i];
    int rc;
    if (c == '{' || c == '[') {
        if ((rc = js_rec(s, start, start + 1))) return rc;
        char close = c == '{' ? '}' : ']';
        s->i++;
        js_ws(s);
        if (s->i < s->len && s->t[s->i] == close) { s->i++; return 0; }
        for (;;) {
            js_ws(s);
            if (c == '{') {
                if ((rc = js_rec(s, s->i, s->i))) return rc;
                js_skip_string(s);
                js_ws(s);
                s->i++; /* ':' */
            }
            if ((rc = js_value(s))) return rc;
            js_ws(s);
            if (s->i >= s->len) return ULK_EPARSE;
            if (s->t[s->i++] == close) return 0;
        }
    }
    if (c == '"') {
        js_skip_string(s);
        return js_rec(s, start, s->i);
    }
    while (s->i < s->len && (isalnum((unsigned char)s->t[s->i]) || s->t[s->i] == '-' || s->t[s->i] == '+' ||
                             s->t[s->i] == '.'))
        s->i++;
    return js_rec(s, start, s->i);
}

/* First pass: the deepest nesting, counted outside strings, and the first NUL byte. Reports
 * the position where the limit is crossed. Returns 0 or ULK_ELIMIT. */
static int json_depth_check(ulk_doc *doc, const char *t, size_t len, size_t *first_nul, ulk_diag *diag)
{
    int depth = 0, in_str = 0;
    *first_nul = (size_t)-1;
    for (size_t i = 0; i < len; i++) {
        char c = t[i];
        /* JSON has no raw NUL anywhere, but cJSON skips one as white space: remember it. */
        if (c == 0 && *first_nul == (size_t)-1) *first_nul = i;
        if (in_str) {
            if (c == '\\') i++;
            else if (c == '"') in_str = 0;
            continue;
        }
        if (c == '"') in_str = 1;
        else if (c == '{' || c == '[') {
            if (++depth > ULK_DOC_MAX_DEPTH) {
                int line, col;
                offset_to_linecol(t, len, i, &line, &col);
                return err_at(doc, diag, ULK_ELIMIT, line, col, "nesting deeper than %d levels",
                              ULK_DOC_MAX_DEPTH);
            }
        } else if (c == '}' || c == ']') depth--;
    }
    return 0;
}

static const jpos *js_take(jscan *s)
{
    static const jpos none = {0, 0, 0, 0};
    return s->next < s->n ? &s->v[s->next++] : &none;
}

/* Builds a node for cJSON item j, taking positions from s in document order. */
static int json_build(ulk_doc *doc, jscan *s, const cJSON *j, ulk_node **out, ulk_diag *diag)
{
    const jpos *pos = js_take(s);
    ulk_node *n = NULL;
    int rc = 0;
    *out = NULL;
    if (cJSON_IsObject(j) || cJSON_IsArray(j)) {
        int is_map = cJSON_IsObject(j);
        n = node_new(is_map ? ULK_NODE_MAP : ULK_NODE_SEQ, pos->line, pos->col);
        if (!n) return ULK_ENOMEM;
        for (const cJSON *c = j->child; c; c = c->next) {
            ulk_node *k = NULL, *v = NULL;
            if (is_map) {
                const jpos *kp = js_take(s);
                k = node_new(ULK_NODE_SCALAR, kp->line, kp->col);
                if (!k || scalar_set(k, c->string, c->string ? strlen(c->string) : 0)) {
                    node_free(k);
                    node_free(n);
                    return ULK_ENOMEM;
                }
                k->quoted = 1;
            }
            if ((rc = json_build(doc, s, c, &v, diag)) || (rc = node_append(n, k, v))) {
                node_free(k);
                node_free(v);
                node_free(n);
                return rc;
            }
        }
        *out = n;
        return 0;
    }
    n = node_new(ULK_NODE_SCALAR, pos->line, pos->col);
    if (!n) return ULK_ENOMEM;
    if (cJSON_IsString(j)) {
        rc = scalar_set(n, j->valuestring, strlen(j->valuestring));
        n->quoted = 1;
    } else if (cJSON_IsNull(j)) {
        rc = scalar_set(n, "null", 4);
    } else if (cJSON_IsBool(j)) {
        rc = cJSON_IsTrue(j) ? scalar_set(n, "true", 4) : scalar_set(n, "false", 5);
    } else {
        /* The number's own digits, never the double cJSON made of them. */
        rc = scalar_set(n, s->t + pos->off, pos->end - pos->off);
    }
    if (rc) { node_free(n); return rc; }
    *out = n;
    return 0;
}

static int parse_json(ulk_doc *doc, const char *text, size_t len, ulk_diag *diag)
{
    size_t skip = 0;
    if (len >= 3 && (unsigned char)text[0] == 0xEF && (unsigned char)text[1] == 0xBB &&
        (unsigned char)text[2] == 0xBF)
        skip = 3; /* UTF-8 byte order mark */
    size_t k = skip;
    while (k < len && isspace((unsigned char)text[k])) k++;
    if (k == len) return err_at(doc, diag, ULK_EPARSE, 1, 1, "the file is empty: expected a JSON object");
    size_t nul;
    int rc = json_depth_check(doc, text, len, &nul, diag);
    if (rc) return rc;
    /* cJSON wants the terminating NUL inside the length it is given; the caller's buffer need
     * not have one, so parse a terminated copy. An embedded NUL is then a syntax error. */
    char *copy = ulk_malloc(len + 1);
    if (!copy) return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", doc->file);
    memcpy(copy, text, len);
    copy[len] = 0;
    text = copy;
    const char *end = NULL;
    cJSON *j = cJSON_ParseWithLengthOpts(text + skip, len - skip + 1, &end, 1);
    if (!j || nul != (size_t)-1) {
        size_t off = !j && end && end >= text + skip ? (size_t)(end - text) : len;
        if (nul < off) off = nul; /* the NUL came first */
        if (off > len) off = len;
        cJSON_Delete(j);
        int line, col;
        offset_to_linecol(text, len, off, &line, &col);
        unsigned char ch = off < len ? (unsigned char)text[off] : 0;
        if (off >= len) rc = err_at(doc, diag, ULK_EPARSE, line, col, "JSON syntax error: unexpected end of file");
        else if (ch >= 0x20 && ch < 0x7F)
            rc = err_at(doc, diag, ULK_EPARSE, line, col, "JSON syntax error at '%c'", ch);
        else
            rc = err_at(doc, diag, ULK_EPARSE, line, col, "JSON syntax error at byte 0x%02X", ch);
        ulk_free(copy);
        return rc;
    }
    jscan s = {text, len, skip, NULL, 0, 0, 0};
    rc = js_value(&s);
    if (rc == 0) {
        /* Offsets grow in document order: one pass turns them into lines and columns. */
        int line = 1, col = 1;
        size_t at = 0;
        for (size_t i = 0; i < s.n; i++) {
            for (; at < s.v[i].off && at < len; at++) {
                unsigned char ch = (unsigned char)text[at];
                if (ch == '\n') { line++; col = 1; }
                else if ((ch & 0xC0) != 0x80) col++;
            }
            s.v[i].line = line;
            s.v[i].col = col;
        }
        rc = json_build(doc, &s, j, &doc->root, diag);
        if (rc == 0) rc = dup_keys_tree(doc, doc->root, diag);
    } else if (rc == ULK_EPARSE) {
        rc = err_at(doc, diag, ULK_EPARSE, 1, 1, "JSON text could not be scanned");
    }
    if (rc == ULK_ENOMEM) ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", doc->file);
    ulk_free(s.v);
    ulk_free(copy);
    cJSON_Delete(j);
    return rc;
}

/* ---------------------------------------------------------------- entry */

int ulk_doc_parse(const char *file, const char *text, size_t len, int is_json, ulk_doc **out,
                  ulk_diag *diag)
{
    *out = NULL;
    if (!text) return ULK_EINVAL;
    if (!file) file = "<memory>";
    if (len > ULK_DOC_MAX_BYTES)
        return ulk_fail(diag, ULK_ELIMIT, "%s: file is larger than the limit of %zu bytes (16 MiB)", file,
                        ULK_DOC_MAX_BYTES);
    ulk_doc *doc = ulk_calloc(1, sizeof *doc);
    if (!doc || !(doc->file = ulk_strdup(file))) {
        ulk_free(doc);
        return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", file);
    }
    doc->is_json = is_json;
    size_t before = ulk_diag_errors(diag);
    int rc = is_json ? parse_json(doc, text, len, diag) : parse_yaml(doc, text, len, diag);
    if (rc == 0 && ulk_diag_errors(diag) > before) rc = ULK_EPARSE; /* duplicate keys */
    if (rc == ULK_ENOMEM && ulk_diag_errors(diag) == before) ulk_fail(diag, rc, "%s: out of memory", file);
    if (rc) {
        ulk_doc_destroy(doc);
        return rc;
    }
    *out = doc;
    return 0;
}

static int key_in_list(const char *s, const char *const *list)
{
    for (int i = 0; list && list[i]; i++)
        if (!strcmp(s, list[i])) return 1;
    return 0;
}

void ulk_node_check_keys(ulk_node *map, const char *what, const char *const *allowed,
                         const char *const *required, ulk_node_report_fn report, void *ctx)
{
    char msg[1024];
    size_t na = 0;
    while (allowed[na]) na++;
    for (int i = 0; i < map->n; i++) {
        const char *k = map->keys[i]->text;
        if (key_in_list(k, allowed)) continue;
        const char *sug = ulk_suggest(k, allowed, na);
        if (sug) {
            snprintf(msg, sizeof msg, "unknown key '%s' in %s (did you mean '%s'?)", k, what, sug);
        } else {
            char list[400] = "";
            size_t used = 0;
            for (size_t j = 0; j < na && used + 40 < sizeof list; j++)
                used += (size_t)snprintf(list + used, sizeof list - used, "%s%s", j ? ", " : "", allowed[j]);
            snprintf(msg, sizeof msg, "unknown key '%s' in %s (expected one of: %s)", k, what, list);
        }
        report(ctx, map->keys[i], msg);
    }
    for (int i = 0; required && required[i]; i++)
        if (!ulk_node_get(map, required[i])) {
            snprintf(msg, sizeof msg, "%s has no '%s' (required)", what, required[i]);
            report(ctx, map, msg);
        }
}
