/* src/error.c - the diagnostics object: findings with their locations. */
#include <stdarg.h>
#include <stdio.h>
#include <string.h>

#include "ulk/error.h"
#include "util.h"

struct ulk_diag {
    ulk_finding *v;
    size_t n, cap;
    size_t n_err, n_warn;
    size_t lost; /* findings whose text could not be stored */
};

const char *ulk_status_str(int s)
{
    switch (s) {
    case ULK_OK: return "ok";
    case ULK_EINVAL: return "invalid argument";
    case ULK_ENOMEM: return "out of memory";
    case ULK_EIO: return "input/output error";
    case ULK_EPARSE: return "invalid input";
    case ULK_ELIMIT: return "limit exceeded";
    case ULK_EFORMAT: return "unrecognised file format";
    case ULK_EINTEGRITY: return "integrity check failed";
    case ULK_EMISMATCH: return "mismatch";
    default: return "unknown error";
    }
}

ulk_diag *ulk_diag_create(void) { return ulk_calloc(1, sizeof(ulk_diag)); }

static void finding_free(ulk_finding *f)
{
    ulk_free(f->file);
    ulk_free(f->path);
    ulk_free(f->msg);
}

void ulk_diag_clear(ulk_diag *d)
{
    if (!d) return;
    for (size_t i = 0; i < d->n; i++) finding_free(&d->v[i]);
    d->n = d->n_err = d->n_warn = d->lost = 0;
}

void ulk_diag_destroy(ulk_diag *d)
{
    if (!d) return;
    ulk_diag_clear(d);
    ulk_free(d->v);
    ulk_free(d);
}

int ulk_diag_vadd(ulk_diag *d, ulk_severity sev, const ulk_loc *loc, const char *fmt, va_list ap)
{
    int rc = sev == ULK_SEV_ERROR ? ULK_EPARSE : ULK_OK;
    if (!d) return rc;
    if (sev == ULK_SEV_ERROR) d->n_err++;
    else if (sev == ULK_SEV_WARNING) d->n_warn++;
    if (d->n == d->cap) {
        size_t nc = d->cap ? d->cap * 2 : 16;
        ulk_finding *nv = ulk_realloc(d->v, nc * sizeof *nv);
        if (!nv) { d->lost++; return rc; }
        d->v = nv;
        d->cap = nc;
    }
    char buf[1024];
    vsnprintf(buf, sizeof buf, fmt, ap);
    ulk_finding f = {0};
    f.sev = sev;
    f.msg = ulk_strdup(buf);
    if (loc) {
        f.file = loc->file ? ulk_strdup(loc->file) : NULL;
        f.line = loc->line;
        f.col = loc->col;
        f.path = loc->path && *loc->path ? ulk_strdup(loc->path) : NULL;
    }
    if (!f.msg) { finding_free(&f); d->lost++; return rc; }
    d->v[d->n++] = f;
    return rc;
}

int ulk_diag_add(ulk_diag *d, ulk_severity sev, const ulk_loc *loc, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    int rc = ulk_diag_vadd(d, sev, loc, fmt, ap);
    va_end(ap);
    return rc;
}

int ulk_fail(ulk_diag *d, int code, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    ulk_diag_vadd(d, ULK_SEV_ERROR, NULL, fmt, ap);
    va_end(ap);
    return code;
}

size_t ulk_diag_count(const ulk_diag *d) { return d ? d->n : 0; }
size_t ulk_diag_errors(const ulk_diag *d) { return d ? d->n_err : 0; }
size_t ulk_diag_warnings(const ulk_diag *d) { return d ? d->n_warn : 0; }
const ulk_finding *ulk_diag_get(const ulk_diag *d, size_t i) { return d && i < d->n ? &d->v[i] : NULL; }

const ulk_finding *ulk_diag_first_error(const ulk_diag *d)
{
    if (!d) return NULL;
    for (size_t i = 0; i < d->n; i++)
        if (d->v[i].sev == ULK_SEV_ERROR) return &d->v[i];
    return NULL;
}

void ulk_finding_format(const ulk_finding *f, char *buf, size_t len)
{
    static const char *sevname[] = {"error", "warning", "note"};
    char where[600] = "";
    if (f->file && f->line > 0 && f->col > 0)
        snprintf(where, sizeof where, "%s:%d:%d: ", f->file, f->line, f->col);
    else if (f->file && f->line > 0)
        snprintf(where, sizeof where, "%s:%d: ", f->file, f->line);
    else if (f->file)
        snprintf(where, sizeof where, "%s: ", f->file);
    snprintf(buf, len, "%s%s: %s%s%s%s", where, sevname[f->sev], f->msg, f->path ? " [" : "",
             f->path ? f->path : "", f->path ? "]" : "");
}

void ulk_diag_print(const ulk_diag *d, FILE *out)
{
    if (!d) return;
    char buf[2048];
    for (size_t i = 0; i < d->n; i++) {
        ulk_finding_format(&d->v[i], buf, sizeof buf);
        fprintf(out, "%s\n", buf);
    }
    if (d->lost) fprintf(out, "error: %zu further findings lost (out of memory)\n", d->lost);
}

/* Stable insertion order within one place; findings without a line sort after those with. */
void ulk_diag_sort(ulk_diag *d)
{
    if (!d) return;
    for (size_t i = 1; i < d->n; i++) {
        ulk_finding f = d->v[i];
        size_t j = i;
        while (j > 0) {
            const ulk_finding *p = &d->v[j - 1];
            const char *fa = p->file ? p->file : "", *fb = f.file ? f.file : "";
            int c = strcmp(fa, fb);
            long la = p->line > 0 ? p->line : 0x7fffffffL, lb = f.line > 0 ? f.line : 0x7fffffffL;
            if (c < 0 || (c == 0 && (la < lb || (la == lb && p->col <= f.col)))) break;
            d->v[j] = d->v[j - 1];
            j--;
        }
        d->v[j] = f;
    }
}
