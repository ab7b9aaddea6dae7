/* src/cli/cmd_plan.c - `ulk plan DICT`: the composite carrier's power division per mode
 * (residual carrier, each channel's useful power, intermodulation), margins against the link
 * budget, and on request the indices that maximise the smallest margin; optional plot.
 *
 * Exit: 0 success, 1 findings in the carrier section (or nothing to solve), 2 usage or I/O.
 */
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "cli.h"
#include "ulk/carrier.h"
#include "ulk/error.h"
#include "util.h"

static void usage(FILE *out)
{
    fprintf(out,
            "usage: ulk plan DICT [--mode NAME] [--solve] [--pt-n0 DBHZ] [--json]\n"
            "                [--plot FILE.svg|FILE.png [--sweep data|voice|ranging]]\n"
            "\n"
            "Reads the carrier section of DICT (a dictionary with a 'carrier:' key, or a standalone\n"
            "carrier file; docs/carrier.md) and prints, for every mode, how the total power P_T\n"
            "divides: residual carrier P_c/P_T, each channel's useful power P_k/P_T (and the pilot's),\n"
            "and the intermodulation, in dB and percent. With a budget (carrier.budget.pt_n0_dbhz or\n"
            "--pt-n0) it prints each need's margin: carrier loop SNR, data E_b/N_0, voice and ranging\n"
            "P/N_0, available minus required.\n"
            "\n"
            "options:\n"
            "  --mode NAME    only this mode\n"
            "  --solve        also find the indices (0.01 rad lattice within each channel's bounds)\n"
            "                 that maximise the smallest margin\n"
            "  --pt-n0 DBHZ   total received power to noise density, dB-Hz (overrides the file)\n"
            "  --json         one JSON document on stdout instead of the table\n"
            "  --plot FILE    line powers of every mode and margins against one index of the\n"
            "                 first (or --mode) mode, as SVG or PNG by the file's extension\n"
            "  --sweep CH     the channel whose index the margin plot varies (default: the\n"
            "                 mode's first channel)\n"
            "  -q, --quiet    no line saying where the plot went\n"
            "  -h, --help     this text\n"
            "\n"
            "exit status: 0 success, 1 errors in the carrier section or nothing to solve,\n"
            "2 usage or I/O error\n");
}

static double pct(double f) { return 100.0 * f; }
static double dbv(double f) { return f > 0 ? 10.0 * log10(f) : -HUGE_VAL; }

static void print_line(const char *name, double f, const char *avail_what, int has_margin, double avail,
                       const char *unit, double need, double margin)
{
    char fdb[32];
    if (f > 0) snprintf(fdb, sizeof fdb, "%8.2f dB", dbv(f));
    else snprintf(fdb, sizeof fdb, "%8s dB", "-inf");
    printf("    %-16s %s %8.3f %%", name, fdb, pct(f));
    if (has_margin) {
        char m[32];
        if (isfinite(margin)) snprintf(m, sizeof m, "%+.2f dB", margin);
        else snprintf(m, sizeof m, "-inf dB");
        printf("   %s %.2f %s, needs %.2f %s, margin %s", avail_what, avail, unit, need, unit, m);
    }
    printf("\n");
}

static void print_plan(const ulk_carrier *c, const ulk_carrier_mode *mo, const double *m, const ulk_carrier_plan *p,
                       const char *title)
{
    printf("  %s:", title);
    for (int ch = 0; ch < ULK_CH_N; ch++)
        if (mo->on[ch]) printf(" %s %.3f rad", ulk_channel_name((ulk_channel)ch), m[ch]);
    printf("\n");
    print_line("carrier", p->carrier, "loop SNR", p->has_loop_margin, p->loop_snr_db, "dB", c->loop_snr_req_db,
               p->loop_margin_db);
    for (int ch = 0; ch < ULK_CH_N; ch++) {
        if (!mo->on[ch]) continue;
        double need = ch == ULK_CH_DATA ? c->data_ebn0_req_db
                    : ch == ULK_CH_VOICE ? c->voice_pn0_req_dbhz : c->ranging_pn0_req_dbhz;
        print_line(ulk_channel_name((ulk_channel)ch), p->useful[ch], ch == ULK_CH_DATA ? "E_b/N_0" : "P/N_0",
                   p->has_margin[ch], p->avail[ch], ch == ULK_CH_DATA ? "dB" : "dB-Hz", need, p->margin_db[ch]);
    }
    if (mo->on[ULK_CH_DATA] && c->has_pilot) print_line("pilot", p->pilot, "", 0, 0, "", 0, 0);
    print_line("intermodulation", p->intermod, "", 0, 0, "", 0, 0);
    if (p->n_margins) {
        if (isfinite(p->min_margin_db)) printf("    smallest margin  %+.2f dB\n", p->min_margin_db);
        else printf("    smallest margin  -inf dB (a need gets no power)\n");
    }
}

/* JSON numbers must be finite: -inf (no power) is written as null. */
static void jnum(cJSON *o, const char *k, double v)
{
    if (isfinite(v)) cJSON_AddNumberToObject(o, k, v);
    else cJSON_AddNullToObject(o, k);
}

static cJSON *json_plan(const ulk_carrier *c, const ulk_carrier_mode *mo, const double *m, const ulk_carrier_plan *p)
{
    cJSON *o = cJSON_CreateObject();
    cJSON *ix = cJSON_AddObjectToObject(o, "indices_rad");
    cJSON *fr = cJSON_AddObjectToObject(o, "fractions");
    jnum(fr, "carrier", p->carrier);
    for (int ch = 0; ch < ULK_CH_N; ch++)
        if (mo->on[ch]) {
            jnum(ix, ulk_channel_name((ulk_channel)ch), m[ch]);
            jnum(fr, ulk_channel_name((ulk_channel)ch), p->useful[ch]);
        }
    if (mo->on[ULK_CH_DATA] && c->has_pilot) jnum(fr, "pilot", p->pilot);
    jnum(fr, "intermodulation", p->intermod);
    if (p->n_margins) {
        cJSON *mg = cJSON_AddObjectToObject(o, "margins_db");
        if (p->has_loop_margin) jnum(mg, "carrier_loop", p->loop_margin_db);
        for (int ch = 0; ch < ULK_CH_N; ch++)
            if (p->has_margin[ch]) jnum(mg, ulk_channel_name((ulk_channel)ch), p->margin_db[ch]);
        jnum(o, "min_margin_db", p->min_margin_db);
    }
    return o;
}

enum { O_QUIET = 'q', O_MODE = CLI_LONG, O_SOLVE, O_PTN0, O_JSON, O_PLOT, O_SWEEP };
static const struct option opts[] = {
    {"mode", required_argument, 0, O_MODE}, {"solve", no_argument, 0, O_SOLVE},
    {"pt-n0", required_argument, 0, O_PTN0}, {"json", no_argument, 0, O_JSON},
    {"plot", required_argument, 0, O_PLOT},  {"sweep", required_argument, 0, O_SWEEP},
    {"quiet", no_argument, 0, O_QUIET},      {"help", no_argument, 0, 'h'},
    {0, 0, 0, 0}};
static const cli_command command = {"plan", opts, usage};

typedef struct {
    const char *mode_name, *plot, *sweep;
    int solve, json, has_pt, quiet;
    double pt;
} args;

static int on_opt(int v, const char *arg, void *ctx)
{
    args *a = ctx;
    switch (v) {
    case O_MODE: a->mode_name = arg; break;
    case O_SOLVE: a->solve = 1; break;
    case O_JSON: a->json = 1; break;
    case O_PLOT: a->plot = arg; break;
    case O_SWEEP: a->sweep = arg; break;
    case O_QUIET: a->quiet = 1; break;
    case O_PTN0:
        a->has_pt = 1;
        return cli_number("plan", "--pt-n0", arg, &a->pt);
    default: break;
    }
    return 0;
}

/* One mode: the plan as written and, with solve, the solved one; to jmodes (JSON) or as text
 * when jmodes is NULL. Returns 0 or the exit status of a failed solve. */
static int plan_one(const ulk_carrier *c, const ulk_carrier_mode *mo, double pt, int solve, cJSON *jmodes)
{
    ulk_carrier_plan p;
    ulk_carrier_plan_indices(c, mo, mo->m_rad, pt, &p);
    cJSON *jm = NULL;
    if (jmodes) {
        jm = json_plan(c, mo, mo->m_rad, &p);
        cJSON_AddItemToObject(jm, "name", cJSON_CreateString(mo->name));
        cJSON_AddItemToArray(jmodes, jm);
    } else {
        printf("\nmode %s (%s:%d:%d)\n", mo->name, mo->loc.file ? mo->loc.file : "", mo->loc.line, mo->loc.col);
        print_plan(c, mo, mo->m_rad, &p, "as written");
    }
    if (!solve) return 0;
    double ms[ULK_CH_N];
    ulk_carrier_plan ps;
    int src = ulk_carrier_solve(c, mo, pt, ms, &ps);
    if (src == ULK_EINVAL) {
        fprintf(stderr, "ulk plan: mode %s: no need (loop, or a required E_b/N_0 or P/N_0 of a channel "
                        "that is on) to maximise\n", mo->name);
        return CLI_EXIT_REFUSED;
    }
    if (src) {
        fprintf(stderr, "ulk plan: mode %s: %s\n", mo->name, ulk_status_str(src));
        return src == ULK_ENOMEM ? CLI_EXIT_USAGE_IO : CLI_EXIT_REFUSED;
    }
    if (jm) cJSON_AddItemToObject(jm, "solved", json_plan(c, mo, ms, &ps));
    else print_plan(c, mo, ms, &ps, "solved (smallest margin maximised, 0.01 rad)");
    return 0;
}

/* The modes to plan: all, or the one named (with a did-you-mean). Returns 0 or the exit code. */
static int pick_modes(const ulk_carrier *c, const char *mode_name, const char *path, int *first, int *last)
{
    *first = 0;
    *last = c->n_modes - 1;
    if (!mode_name) return 0;
    int i = ulk_carrier_find_mode(c, mode_name);
    if (i < 0) {
        const char *names[64];
        size_t nn = 0;
        for (int k = 0; k < c->n_modes && nn < 64; k++) names[nn++] = c->modes[k].name;
        const char *sug = ulk_suggest(mode_name, names, nn);
        fprintf(stderr, "ulk plan: %s has no mode '%s'%s%s%s\n", path, mode_name, sug ? " (did you mean '" : "",
                sug ? sug : "", sug ? "'?)" : "");
        return CLI_EXIT_REFUSED;
    }
    *first = *last = i;
    return 0;
}

int cmd_plan(int argc, char **argv)
{
    args o = {.pt = NAN};
    int optind_, r = cli_parse(&command, argc, argv, on_opt, &o, &optind_);
    if (r >= 0) return r;
    const char *mode_name = o.mode_name, *plot = o.plot, *sweep = o.sweep;
    int solve = o.solve, json = o.json, has_pt = o.has_pt;
    double pt = o.pt;
    if (optind_ != argc - 1) {
        fprintf(stderr, "ulk plan: give exactly one dictionary or carrier file\n");
        usage(stderr);
        return CLI_EXIT_USAGE_IO;
    }
    const char *dict_path = cli_input("plan", argv[optind_]); /* "-": the carrier loader reads it twice */
    if (!dict_path) return CLI_EXIT_USAGE_IO;
    argv[optind_] = (char *)dict_path;
    if (plot) {
        const char *ins[] = {argv[optind_]}, *what[] = {"dictionary"};
        if ((r = cli_refuse_overwrite("plan", plot, ins, what, 1))) return r;
        if ((r = cli_check_picture("plan", plot))) return r;
    }
    int sweep_ch = -1;
    if (sweep) {
        for (int ch = 0; ch < ULK_CH_N; ch++)
            if (!strcmp(sweep, ulk_channel_name((ulk_channel)ch))) sweep_ch = ch;
        if (sweep_ch < 0) {
            fprintf(stderr, "ulk plan: --sweep wants data, voice or ranging, not '%s'\n", sweep);
            return CLI_EXIT_USAGE_IO;
        }
    }
    ulk_diag *diag = ulk_diag_create();
    if (!diag) { fprintf(stderr, "ulk plan: out of memory\n"); return 2; }
    ulk_carrier *c = NULL;
    int rc = ulk_carrier_load(argv[optind_], &c, diag);
    ulk_diag_print(diag, stderr);
    if (rc) {
        ulk_diag_destroy(diag);
        return cli_exit_for(rc);
    }
    ulk_diag_clear(diag);
    if (!has_pt && c->has_pt_n0) pt = c->pt_n0_dbhz;
    int first, last;
    if ((r = pick_modes(c, mode_name, argv[optind_], &first, &last))) {
        ulk_carrier_destroy(c);
        ulk_diag_destroy(diag);
        return r;
    }
    if (solve && isnan(pt)) {
        fprintf(stderr, "ulk plan: --solve needs a budget: carrier.budget.pt_n0_dbhz in the file or --pt-n0\n");
        ulk_carrier_destroy(c);
        ulk_diag_destroy(diag);
        return 1;
    }
    int status = 0;
    cJSON *root = NULL, *jmodes = NULL;
    if (json) {
        root = cJSON_CreateObject();
        cJSON_AddStringToObject(root, "file", argv[optind_]);
        jnum(root, "pt_n0_dbhz", pt);
        jmodes = cJSON_AddArrayToObject(root, "modes");
    } else {
        printf("%s: %d mode%s", argv[optind_], c->n_modes, c->n_modes == 1 ? "" : "s");
        if (!isnan(pt)) printf(", P_T/N_0 %.2f dB-Hz", pt);
        printf("\n");
    }
    for (int i = first; i <= last; i++) {
        int st = plan_one(c, &c->modes[i], pt, solve, jmodes);
        if (st > status) status = st;
    }
    if (json) {
        char *s = cJSON_Print(root);
        if (s) { fputs(s, stdout); fputc('\n', stdout); free(s); }
        else status = 2;
        cJSON_Delete(root);
    }
    if (plot && status == 0) {
        int pr = ulk_carrier_plot(c, first, sweep_ch, pt, plot, diag);
        if (pr) {
            ulk_diag_print(diag, stderr);
            status = 2;
        } else if (!json && !o.quiet) {
            printf("\nplot written to %s\n", plot);
        }
    }
    ulk_carrier_destroy(c);
    ulk_diag_destroy(diag);
    return status;
}
