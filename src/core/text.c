/* src/core/text.c - the growable text buffer and JSON string writer of text.h. */
#include "text.h"

#include <stdio.h>
#include <string.h>

#include "util.h"

static void grow(ulk_text *b, size_t add)
{
    if (b->oom || b->n + add + 1 <= b->cap) return;
    size_t nc = b->cap ? b->cap : 4096;
    while (nc < b->n + add + 1) nc *= 2;
    char *np = ulk_realloc(b->p, nc);
    if (!np) {
        b->oom = 1;
        return;
    }
    b->p = np;
    b->cap = nc;
}

void ulk_text_put(ulk_text *b, const char *s, size_t n)
{
    grow(b, n);
    if (b->oom) return;
    memcpy(b->p + b->n, s, n);
    b->n += n;
    b->p[b->n] = 0;
}

void ulk_text_puts(ulk_text *b, const char *s) { ulk_text_put(b, s, strlen(s)); }

void ulk_text_vprintf(ulk_text *b, const char *fmt, va_list ap0)
{
    char tmp[512];
    va_list ap;
    va_copy(ap, ap0);
    int k = vsnprintf(tmp, sizeof tmp, fmt, ap);
    va_end(ap);
    if (k < 0) return;
    if ((size_t)k < sizeof tmp) {
        ulk_text_put(b, tmp, (size_t)k);
        return;
    }
    grow(b, (size_t)k);
    if (b->oom) return;
    va_copy(ap, ap0);
    vsnprintf(b->p + b->n, (size_t)k + 1, fmt, ap);
    va_end(ap);
    b->n += (size_t)k;
}

void ulk_text_printf(ulk_text *b, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    ulk_text_vprintf(b, fmt, ap);
    va_end(ap);
}

void ulk_text_json_str(ulk_text *b, const char *s)
{
    if (!s) {
        ulk_text_put(b, "null", 4);
        return;
    }
    ulk_text_put(b, "\"", 1);
    const char *run = s;
    for (; *s; s++) {
        unsigned char c = (unsigned char)*s;
        if (c == '"' || c == '\\' || c < 0x20) {
            ulk_text_put(b, run, (size_t)(s - run));
            char e[8];
            if (c == '"' || c == '\\') snprintf(e, sizeof e, "\\%c", c);
            else snprintf(e, sizeof e, "\\u%04x", c);
            ulk_text_puts(b, e);
            run = s + 1;
        }
    }
    ulk_text_put(b, run, (size_t)(s - run));
    ulk_text_put(b, "\"", 1);
}

void ulk_text_hex(ulk_text *b, const uint8_t *p, size_t n)
{
    static const char hx[] = "0123456789ABCDEF";
    grow(b, 2 * n);
    if (b->oom) return;
    for (size_t i = 0; i < n; i++) {
        b->p[b->n++] = hx[p[i] >> 4];
        b->p[b->n++] = hx[p[i] & 15];
    }
    b->p[b->n] = 0;
}

void ulk_text_unput(ulk_text *b, size_t n)
{
    if (!b->oom && n <= b->n) {
        b->n -= n;
        if (b->p) b->p[b->n] = 0;
    }
}
