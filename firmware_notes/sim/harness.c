/*
 * Runs the bridge image (build/bridge.elf) in simavr, drives its clock and
 * data pins with every frame of the shared vectors, and checks what the
 * firmware sends on its UART: reading lines in streaming mode, raw-frame
 * lines after 'R', nothing until '?' after 'P', and request pulses on PD4
 * while the bcd13 variant is selected.  Expected raw lines are made with the
 * portable frame.c compiled for the host (the same formatter the firmware
 * runs), expected reading lines come from the vectors file.
 *
 * Usage: harness bridge.elf frames.tsv [clock-half-period-us]
 */
#include "frame.h"
#include "vectors.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <avr_ioport.h>
#include <avr_uart.h>
#include <sim_avr.h>
#include <sim_elf.h>

#define F_HZ 16000000u

static avr_t *avr;
static avr_irq_t *clock_pin, *data_pin, *uart_in;
static char out[4096];
static size_t nout;
static int req_pulses, failures, checks;

static void on_uart(struct avr_irq_t *irq, uint32_t value, void *param)
{
    (void)irq, (void)param;
    if (nout < sizeof out - 1)
        out[nout++] = (char)value;
}

static void on_req(struct avr_irq_t *irq, uint32_t value, void *param)
{
    (void)irq, (void)param;
    if (value)
        req_pulses++;
}

static void run_us(double us)
{
    avr_cycle_count_t end = avr->cycle + (avr_cycle_count_t)(us * (F_HZ / 1e6));
    while (avr->cycle < end) {
        int state = avr_run(avr);
        if (state == cpu_Done || state == cpu_Crashed) {
            fprintf(stderr, "harness: the simulated CPU stopped (state %d)\n", state);
            exit(1);
        }
    }
}

static void send(char c)
{
    avr_raise_irq(uart_in, (uint8_t)c);
    run_us(300); /* one byte at 115200 baud is 87 us */
}

/* Clock idles high at the pin; data changes while the clock is high and is
 * sampled on the falling edge (the firmware's default), then an idle gap
 * long enough for the frame to be decoded and its line sent. */
static void drive(const char *bits, double half_us)
{
    for (const char *b = bits; *b; b++) {
        avr_raise_irq(data_pin, *b == '1');
        run_us(half_us / 2);
        avr_raise_irq(clock_pin, 0);
        run_us(half_us);
        avr_raise_irq(clock_pin, 1);
        run_us(half_us / 2);
    }
    avr_raise_irq(data_pin, 0);
    run_us(10000);
}

static void expect_out(const char *what, const char *want)
{
    checks++;
    out[nout] = '\0';
    if (strcmp(out, want) != 0) {
        fprintf(stderr, "FAIL %s: got \"%s\", expected \"%s\" (line endings CR LF)\n", what, out, want);
        failures++;
    }
    nout = 0;
}

static void select_variant(int v)
{
    send((char)('1' + v));
    nout = 0;
}

int main(int argc, char **argv)
{
    if (argc < 3) {
        fprintf(stderr, "usage: %s bridge.elf frames.tsv [clock-half-period-us]\n", argv[0]);
        return 2;
    }
    double half_us = argc > 3 ? atof(argv[3]) : 10.0;
    static vector vec[256];
    int n = vectors_load(argv[2], vec, 256);
    if (n <= 0)
        return 2;

    elf_firmware_t fw;
    memset(&fw, 0, sizeof fw);
    if (elf_read_firmware(argv[1], &fw) != 0) {
        fprintf(stderr, "harness: cannot read %s\n", argv[1]);
        return 2;
    }
    strcpy(fw.mmcu, "atmega328p");
    fw.frequency = F_HZ;
    avr = avr_make_mcu_by_name(fw.mmcu);
    if (!avr) {
        fprintf(stderr, "harness: simavr has no atmega328p core\n");
        return 2;
    }
    avr_init(avr);
    avr_load_firmware(avr, &fw);
    avr->frequency = F_HZ;
    avr->log = 0;

    uint32_t flags = 0; /* no console echo, no real-time sleeping in polls */
    avr_ioctl(avr, AVR_IOCTL_UART_GET_FLAGS('0'), &flags);
    flags &= ~(uint32_t)(AVR_UART_FLAG_STDIO | AVR_UART_FLAG_POLL_SLEEP);
    avr_ioctl(avr, AVR_IOCTL_UART_SET_FLAGS('0'), &flags);
    avr_irq_register_notify(avr_io_getirq(avr, AVR_IOCTL_UART_GETIRQ('0'), UART_IRQ_OUTPUT), on_uart, NULL);
    uart_in = avr_io_getirq(avr, AVR_IOCTL_UART_GETIRQ('0'), UART_IRQ_INPUT);
    clock_pin = avr_io_getirq(avr, AVR_IOCTL_IOPORT_GETIRQ('D'), 2);
    data_pin = avr_io_getirq(avr, AVR_IOCTL_IOPORT_GETIRQ('D'), 3);
    avr_irq_register_notify(avr_io_getirq(avr, AVR_IOCTL_IOPORT_GETIRQ('D'), 4), on_req, NULL);

    avr_raise_irq(clock_pin, 1);
    avr_raise_irq(data_pin, 0);
    run_us(2000); /* start-up */

    /* 1. Streaming reading lines; rejected frames send nothing.  The vectors
     * run back to back, so every frame after a short, long or glitch frame
     * also checks idle-gap resynchronisation. */
    int current = -1;
    for (int i = 0; i < n; i++) {
        int v = frame_variant_from_name(vec[i].variant);
        if (v != current)
            select_variant(current = v);
        drive(vec[i].bits, half_us);
        char want[64] = "";
        if (strncmp(vec[i].expect, "reject:", 7) != 0)
            snprintf(want, sizeof want, "%s\r\n", vec[i].expect);
        expect_out(vec[i].name, want);
    }

    /* 2. Raw-frame mode forwards every frame, good or bad. */
    send('R');
    for (int i = 0; i < n; i++) {
        int v = frame_variant_from_name(vec[i].variant);
        if (v != current)
            select_variant(current = v);
        drive(vec[i].bits, half_us);
        uint8_t nbits = vec[i].nbits > FRAME_MAX_BITS ? FRAME_TOO_LONG : (uint8_t)vec[i].nbits;
        char want[64];
        uint8_t len = frame_format_raw((frame_variant)v, vec[i].packed, nbits, want);
        strcpy(want + len, "\r\n");
        char what[80];
        snprintf(what, sizeof what, "raw %s", vec[i].name);
        expect_out(what, want);
    }

    /* 3. Polled mode: silent until the host asks. */
    send('T');
    select_variant(current = FRAME_SIGN24);
    send('P');
    drive("010010110010000000000000", half_us); /* sign24 +12.34 mm, from the vectors */
    expect_out("polled: nothing before '?'", "");
    send('?');
    run_us(3000); /* the answer takes about 1 ms on the wire */
    expect_out("polled: answer to '?'", "+12.34 mm\r\n");
    send('S');

    /* 4. The bcd13 variant pulses the request line (about every 100 ms). */
    req_pulses = 0;
    run_us(300000);
    checks++;
    if (req_pulses != 0) {
        fprintf(stderr, "FAIL request line pulsed %d times outside bcd13\n", req_pulses);
        failures++;
    }
    select_variant(current = FRAME_BCD13);
    run_us(350000);
    checks++;
    if (req_pulses < 2) {
        fprintf(stderr, "FAIL request line pulsed %d times in 350 ms of bcd13\n", req_pulses);
        failures++;
    }
    nout = 0;

    printf("simavr harness: %d checks over %d vectors (clock half period %.1f us), %d failures\n",
           checks, n, half_us, failures);
    return failures ? 1 : 0;
}
