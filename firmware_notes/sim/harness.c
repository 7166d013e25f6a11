/*
 * Runs the bridge image (build/bridge.elf) in simavr, drives its clock and
 * data pins with every frame of the shared vectors, and checks what the
 * firmware sends on its UART: reading lines in streaming mode, raw-frame
 * lines after 'R', nothing until '?' after 'P', and request pulses on PD4
 * while the bcd13 variant is selected.
 *
 * Every vector is clocked with two waveforms (sim/board.h): data changing
 * halfway through the clock's high time, and data changing on the rising
 * edge, the edge the default image must not sample, so an image that samples
 * on the wrong edge fails.  Expected lines come from the vectors file only
 * (its expect and raw columns, worked by hand from the documented layouts);
 * nothing of the firmware's own code is linked in here.
 *
 * Usage: harness bridge.elf frames.tsv [clock-half-period-us]
 * Prints one summary line on stdout; a line per failed check on stderr.
 */
#include "board.h"
#include "vectors.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static int failures, checks;

/* The host command that selects a variant (README, "Modes"). */
static char variant_command(const char *name)
{
    static const char *const NAMES[] = {"rel24x2", "sign24", "bcd13"};
    for (int i = 0; i < 3; i++)
        if (strcmp(name, NAMES[i]) == 0)
            return (char)('1' + i);
    return 0;
}

static void discard_output(void)
{
    char scratch[64];
    while (board_take(scratch, sizeof scratch))
        ;
}

/* s between quotes, with CR, LF and other control bytes shown as C escapes. */
static void print_quoted(const char *s)
{
    fputc('"', stderr);
    for (; *s; s++) {
        if (*s == '\r')
            fputs("\\r", stderr);
        else if (*s == '\n')
            fputs("\\n", stderr);
        else if ((unsigned char)*s < 0x20 || (unsigned char)*s > 0x7e || *s == '"' || *s == '\\')
            fprintf(stderr, "\\x%02x", (unsigned char)*s);
        else
            fputc(*s, stderr);
    }
    fputc('"', stderr);
}

static void expect_out(const char *what, const char *want)
{
    char got[8192];
    board_take(got, sizeof got);
    checks++;
    if (strcmp(got, want) != 0) {
        fprintf(stderr, "FAIL %s: got ", what);
        print_quoted(got);
        fputs(", expected ", stderr);
        print_quoted(want);
        fputc('\n', stderr);
        failures++;
    }
}

static void select_variant(char command)
{
    board_send(command);
    discard_output();
}

/* One frame, then an idle gap long enough for it to be decoded and its line
 * sent (the default gap is 3 ms; a line is about 1 ms on the wire). */
static void drive(const char *bits, double half_us, board_wave wave)
{
    board_clock(bits, half_us, wave);
    board_run_us(10000);
}

static const vector *find(const vector *vec, int n, const char *name)
{
    for (int i = 0; i < n; i++)
        if (strcmp(vec[i].name, name) == 0)
            return &vec[i];
    fprintf(stderr, "harness: the vectors have no row %s\n", name);
    exit(2);
}

int main(int argc, char **argv)
{
    if (argc < 3) {
        fprintf(stderr, "usage: %s bridge.elf frames.tsv [clock-half-period-us]\n", argv[0]);
        return 2;
    }
    double half_us = argc > 3 ? atof(argv[3]) : 10.0;
    if (!(half_us > 0 && half_us < 1000)) {
        fprintf(stderr, "harness: clock half period must be a number of microseconds below 1000\n");
        return 2;
    }
    static vector vec[256];
    int n = vectors_load(argv[2], vec, 256);
    if (n <= 0)
        return 2;
    for (int i = 0; i < n; i++)
        if (!variant_command(vec[i].variant)) {
            fprintf(stderr, "harness: vector %s: unknown variant %s\n", vec[i].name, vec[i].variant);
            return 2;
        }
    if (board_open(argv[1]) != 0)
        return 2;

    /* 1. For each waveform: streaming reading lines (rejected frames send
     * nothing), then raw-frame lines for every frame, good or bad.  The
     * vectors run back to back, so every frame after a short, long or glitch
     * frame also checks idle-gap resynchronisation. */
    static const struct {
        board_wave wave;
        const char *name;
    } WAVES[] = {{WAVE_MID_HIGH, "data mid-high"}, {WAVE_ON_RISING, "data on the rising edge"}};
    char current = 0;
    for (int w = 0; w < 2; w++) {
        for (int raw = 0; raw < 2; raw++) {
            board_send(raw ? 'R' : 'T');
            for (int i = 0; i < n; i++) {
                char c = variant_command(vec[i].variant);
                if (c != current)
                    select_variant(current = c);
                drive(vec[i].bits, half_us, WAVES[w].wave);
                char want[64] = "";
                if (raw)
                    snprintf(want, sizeof want, "%s\r\n", vec[i].raw);
                else if (strncmp(vec[i].expect, "reject:", 7) != 0)
                    snprintf(want, sizeof want, "%s\r\n", vec[i].expect);
                char what[128];
                snprintf(what, sizeof what, "%s%s (%s)", raw ? "raw " : "", vec[i].name, WAVES[w].name);
                expect_out(what, want);
            }
        }
    }

    /* 2. Polled mode: silent until the host asks. */
    const vector *pos = find(vec, n, "sign24_pos_mm");
    char want[64];
    snprintf(want, sizeof want, "%s\r\n", pos->expect);
    board_send('T');
    select_variant(current = variant_command("sign24"));
    board_send('P');
    drive(pos->bits, half_us, WAVE_ON_RISING);
    expect_out("polled: nothing before '?'", "");
    board_send('?');
    board_run_us(3000); /* the answer takes about 1 ms on the wire */
    expect_out("polled: answer to '?'", want);
    board_send('S');

    /* 3. The bcd13 variant pulses the request line (about every 100 ms). */
    unsigned before = board_req_rises();
    board_run_us(300000);
    checks++;
    if (board_req_rises() != before) {
        fprintf(stderr, "FAIL request line pulsed %u times outside bcd13\n", board_req_rises() - before);
        failures++;
    }
    select_variant(current = variant_command("bcd13"));
    before = board_req_rises();
    board_run_us(350000);
    checks++;
    if (board_req_rises() - before < 2) {
        fprintf(stderr, "FAIL request line pulsed %u times in 350 ms of bcd13\n", board_req_rises() - before);
        failures++;
    }
    discard_output();

    printf("simavr harness: %d checks over %d vectors (clock half period %.1f us), %d failures\n",
           checks, n, half_us, failures);
    return failures ? 1 : 0;
}
