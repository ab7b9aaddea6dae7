/* examples/rx_example.c - decode a capture with the installed ulk library and print what the
 * receiver reports, event by event.
 *
 *     make -C examples                       (pkg-config --cflags --libs ulk)
 *     examples/rx_example DICT CAPTURE
 *
 * A real (one-channel) capture is read with the sample reader and pushed block by block into
 * the receiver, draining its events after every push, which is how a program that gets its
 * samples from elsewhere (a sound card, a socket) would use it. For any other capture (I/Q
 * of the composite carrier, raw files without metadata) ulk_rx_run_file does the reading.
 * Exit 0 when a command was accepted, 1 when none was, 2 on an error.
 */
#include <stdio.h>
#include <stdlib.h>

#include <ulk/dict.h>
#include <ulk/error.h>
#include <ulk/rx.h>
#include <ulk/sampleio.h>

static int print_event(const ulk_rx_event *ev, void *user)
{
    unsigned long *accepted = user;
    char line[4096];
    switch (ev->kind) {
    case ULK_RX_WORD:
    case ULK_RX_CLTU:
        if (ev->dec->status == ULK_WORD_ACCEPTED) {
            ulk_decoded_format(ev->dec, line, sizeof line);
            printf("%12.6f s  accepted  %s\n", ev->dw.start_s, line);
            ++*accepted;
        } else {
            printf("%12.6f s  rejected  (%s) %s\n", ev->dw.start_s, ulk_reject_name(ev->dec->reject), ev->dec->reason);
        }
        break;
    case ULK_RX_WARNING:
        fprintf(stderr, "warning: %s\n", ev->text);
        break;
    case ULK_RX_NOTICE:
        fprintf(stderr, "notice: %s\n", ev->text);
        break;
    case ULK_RX_ESTIMATES:
        if (ev->est->demod.signal_found)
            printf("estimates: E_b/N_0 %.1f dB, subcarrier %.3f Hz, clock error %+.1f ppm, %.3f s\n",
                   ev->est->demod.ebn0_db, ev->est->demod.subcarrier_hz, ev->est->demod.rate_error_ppm,
                   ev->est->duration_s);
        else
            printf("estimates: no signal found in %.3f s\n", ev->est->duration_s);
        break;
    case ULK_RX_END:
        printf("end: %llu units, %llu accepted, %llu rejected\n", (unsigned long long)ev->counts.n_units,
               (unsigned long long)ev->counts.n_accepted, (unsigned long long)ev->counts.n_rejected);
        break;
    }
    return 0;
}

/* The push interface: reader -> ulk_rx_push -> events. */
static int push_real(const ulk_dict *dict, const char *path, ulk_reader *r, unsigned long *accepted, ulk_diag *diag)
{
    ulk_rx_options opt = {0};
    opt.fs_hz = ulk_reader_info(r)->fs_hz;
    opt.name = path;
    ulk_rx *rx = NULL;
    int rc = ulk_rx_create(dict, &opt, &rx, diag);
    static float buf[16384];
    ulk_rx_event ev;
    while (rc >= 0) {
        long n = ulk_reader_read(r, buf, sizeof buf / sizeof buf[0]);
        if (n < 0) {
            rc = ulk_fail(diag, (int)n, "%s: %s", path, ulk_reader_error(r));
            break;
        }
        rc = n > 0 ? ulk_rx_push(rx, buf, (size_t)n) : ulk_rx_finish(rx);
        while (rc >= 0 && ulk_rx_next_event(rx, &ev) > 0) print_event(&ev, accepted);
        if (n == 0) break;
    }
    ulk_rx_destroy(rx);
    return rc;
}

int main(int argc, char **argv)
{
    if (argc != 3) {
        fprintf(stderr, "usage: %s DICT CAPTURE\n", argv[0]);
        return 2;
    }
    ulk_diag *diag = ulk_diag_create();
    ulk_dict *dict = NULL;
    ulk_reader *r = NULL;
    unsigned long accepted = 0;
    int rc = diag ? ulk_dict_load(argv[1], &dict, diag) : ULK_ENOMEM;
    if (rc >= 0 && ulk_reader_open(argv[2], NULL, 0, &r, diag) == 0 && ulk_reader_info(r)->channels == 1) {
        rc = push_real(dict, argv[2], r, &accepted, diag);
    } else if (rc >= 0) {
        ulk_diag_clear(diag); /* not a plain mono file: let the library read it */
        rc = ulk_rx_run_file(dict, argv[2], NULL, NULL, print_event, &accepted, diag);
    }
    if (rc < 0) ulk_diag_print(diag, stderr);
    ulk_reader_close(r);
    ulk_dict_destroy(dict);
    ulk_diag_destroy(diag);
    return rc < 0 ? 2 : accepted ? 0 : 1;
}
