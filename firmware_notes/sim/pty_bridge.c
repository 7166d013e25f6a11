/*
 * The bridge image in simavr as a serial device: what the firmware sends on
 * its UART goes to a pseudo-terminal, bytes written to the pseudo-terminal
 * go to the UART (host commands), and an indicator session is clocked into
 * the pins in real time from a schedule of frames.
 *
 * Usage: pty_bridge bridge.elf VARIANT schedule.tsv
 *
 * VARIANT (rel24x2, sign24, bcd13) is selected with its host command at
 * power-up.  Schedule rows are "t_s<TAB>bits" (session seconds, the frame's
 * bits in transmission order), in time order; '#' lines are comments.  A
 * bcd13 device answers each request pulse on PD4, 1 ms later, with the frame
 * of the latest row due; the other variants send each row's frame at its
 * time.  Data changes on the clock's rising edge (the device's own waveform)
 * at 50 kHz.
 *
 * The slave's path is the first line on stdout.  The session clock starts
 * when a client opens the slave, and "session over" follows on stdout when
 * the schedule's last row is due; its frame stays on the pins.  When the
 * client closes the slave, the program prints a summary on stderr and exits
 * 0 (2: bad arguments or schedule, 3: no client came within 60 s).
 *
 * Real time: the simulation sleeps whenever it is ahead of the wall clock.
 * When the machine is too busy for it to keep up, the session runs slower
 * rather than catching up in a burst (a hand never speeds up to make up for
 * lost time): every time it falls behind by more than 20 ms, the session
 * clock is set back by that much, and the summary says by how much in all.
 */
#define _GNU_SOURCE
#include "board.h"

#include <errno.h>
#include <poll.h>
#include <pty.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <termios.h>
#include <time.h>
#include <unistd.h>

#define HALF_US 10.0       /* clock half period: 50 kHz */
#define ANSWER_DELAY_S 0.001 /* a bcd13 device's reaction to the request line */
#define SLICE_US 500.0     /* simulated time between looks at the pty and the wall clock */
#define CLIENT_WAIT_S 60.0
#define BEHIND_S 0.02      /* falls behind by more than this: the session clock is set back */

typedef struct {
    double t_s;
    char bits[97];
} row;

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + ts.tv_nsec / 1e9;
}

static void sleep_s(double s)
{
    struct timespec ts = {(time_t)s, (long)((s - (double)(time_t)s) * 1e9)};
    nanosleep(&ts, NULL);
}

static row *load_schedule(const char *path, size_t *count)
{
    FILE *fp = fopen(path, "r");
    if (!fp) {
        perror(path);
        return NULL;
    }
    row *rows = NULL;
    size_t n = 0, cap = 0;
    char line[256];
    int lineno = 0;
    while (fgets(line, sizeof line, fp)) {
        lineno++;
        line[strcspn(line, "\r\n")] = '\0';
        if (line[0] == '#' || line[0] == '\0')
            continue;
        if (n == cap) {
            cap = cap ? 2 * cap : 1024;
            row *grown = realloc(rows, cap * sizeof *rows);
            if (!grown) {
                fprintf(stderr, "%s: out of memory\n", path);
                goto bad;
            }
            rows = grown;
        }
        char *tab = strchr(line, '\t'), *end;
        double t = strtod(line, &end);
        if (!tab || end != tab || !(t >= 0) || strlen(tab + 1) == 0 || strlen(tab + 1) > 96 ||
            strspn(tab + 1, "01") != strlen(tab + 1) || (n && t < rows[n - 1].t_s)) {
            fprintf(stderr, "%s:%d: expected \"t_s<TAB>bits\" (0/1, at most 96), times in order\n", path,
                    lineno);
            goto bad;
        }
        rows[n].t_s = t;
        strcpy(rows[n].bits, tab + 1);
        n++;
    }
    fclose(fp);
    if (n == 0) {
        fprintf(stderr, "%s: no schedule rows\n", path);
        free(rows);
        return NULL;
    }
    *count = n;
    return rows;
bad:
    fclose(fp);
    free(rows);
    return NULL;
}

/* Writes everything; returns 0, or -1 when the client has gone. */
static int write_all(int fd, const char *buf, size_t len)
{
    while (len) {
        ssize_t k = write(fd, buf, len);
        if (k < 0) {
            if (errno == EINTR)
                continue;
            return -1;
        }
        buf += k;
        len -= (size_t)k;
    }
    return 0;
}

int main(int argc, char **argv)
{
    if (argc != 4) {
        fprintf(stderr, "usage: %s bridge.elf rel24x2|sign24|bcd13 schedule.tsv\n", argv[0]);
        return 2;
    }
    static const char *const VARIANTS[] = {"rel24x2", "sign24", "bcd13"};
    int variant = -1;
    for (int i = 0; i < 3; i++)
        if (strcmp(argv[2], VARIANTS[i]) == 0)
            variant = i;
    if (variant < 0) {
        fprintf(stderr, "pty_bridge: unknown variant %s (rel24x2, sign24 or bcd13)\n", argv[2]);
        return 2;
    }
    size_t nrows;
    row *rows = load_schedule(argv[3], &nrows);
    if (!rows)
        return 2;
    if (board_open(argv[1]) != 0)
        return 2;
    board_send((char)('1' + variant)); /* the host command that selects it (README, "Modes") */
    char scratch[256];
    while (board_take(scratch, sizeof scratch))
        ;

    int master, slave;
    if (openpty(&master, &slave, NULL, NULL, NULL) != 0) {
        perror("pty_bridge: openpty");
        return 2;
    }
    struct termios raw;
    tcgetattr(slave, &raw);
    cfmakeraw(&raw); /* no CR/LF translation, no echo: bytes as the UART sent them */
    tcsetattr(slave, TCSANOW, &raw);
    printf("%s\n", ttyname(slave));
    fflush(stdout);
    close(slave); /* with no slave open the master reports a hang-up: that is how a client is seen */

    struct pollfd pfd = {master, POLLIN, 0};
    double waited = 0;
    for (;;) {
        poll(&pfd, 1, 0);
        if (!(pfd.revents & POLLHUP))
            break;
        if (waited >= CLIENT_WAIT_S) {
            fprintf(stderr, "pty_bridge: no client opened the pseudo-terminal within %.0f s\n", CLIENT_WAIT_S);
            return 3;
        }
        sleep_s(0.01);
        waited += 0.01;
    }

    const double sim0 = board_time_s();
    double t0 = now_s(), held_back = 0;
    int over = 0;
    size_t next = 0, due = 0; /* next row to send (streaming); rows due so far */
    unsigned seen_rises = board_req_rises(), frames = 0;
    double answer_at = -1;
    unsigned long bytes_out = 0;
    int ended = 0;
    for (unsigned slice = 0; !ended; slice++) {
        double ts = board_time_s() - sim0;
        while (due < nrows && rows[due].t_s <= ts)
            due++;
        if (due == nrows && !over) {
            over = 1;
            printf("session over\n");
            fflush(stdout);
        }
        if (variant == 2) { /* bcd13: answer the request line */
            if (board_req_rises() != seen_rises) {
                seen_rises = board_req_rises();
                answer_at = ts + ANSWER_DELAY_S;
            }
            if (answer_at >= 0 && ts >= answer_at) {
                answer_at = -1;
                if (board_req_level() && due) {
                    board_clock(rows[due - 1].bits, HALF_US, WAVE_ON_RISING);
                    frames++;
                }
            }
        } else {
            while (next < due) {
                board_clock(rows[next++].bits, HALF_US, WAVE_ON_RISING);
                frames++;
            }
        }
        board_run_us(SLICE_US);

        size_t k;
        while ((k = board_take(scratch, sizeof scratch)) > 0) {
            if (write_all(master, scratch, k) != 0) {
                ended = 1;
                break;
            }
            bytes_out += k;
        }

        if (slice % 20 == 0) { /* every 10 ms: host bytes, hang-up */
            pfd.revents = 0;
            poll(&pfd, 1, 0);
            if (pfd.revents & POLLIN) {
                char in[64];
                ssize_t got = read(master, in, sizeof in);
                for (ssize_t i = 0; i < got; i++)
                    board_send(in[i]);
            }
            if (pfd.revents & (POLLHUP | POLLERR))
                ended = 1;
        }

        double ahead = (board_time_s() - sim0) - (now_s() - t0);
        if (ahead > 0) {
            sleep_s(ahead);
        } else if (-ahead > BEHIND_S) {
            t0 -= ahead;
            held_back -= ahead;
        }
    }
    fprintf(stderr,
            "pty_bridge: %u %s frames clocked in over %.1f s, %lu bytes to the pty; "
            "too busy to keep up for %.1f s in all, by which the session ran longer\n",
            frames, VARIANTS[variant], board_time_s() - sim0, bytes_out, held_back);
    free(rows);
    return 0;
}
