/* The bridge board in simavr; see board.h. */
#include "board.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <avr_ioport.h>
#include <avr_uart.h>
#include <sim_avr.h>
#include <sim_elf.h>

static avr_t *avr;
static avr_irq_t *clock_pin, *data_pin, *uart_in;
static char out[8192];
static size_t nout;
static int req_level;
static unsigned req_rises;

/* simavr's messages to stderr (errors and warnings only), so that stdout
 * carries nothing but the harness's own output. */
static void quiet_logger(avr_t *a, const int level, const char *format, va_list ap)
{
    (void)a;
    if (level == LOG_ERROR || level == LOG_WARNING)
        vfprintf(stderr, format, ap);
}

static void on_uart(struct avr_irq_t *irq, uint32_t value, void *param)
{
    (void)irq, (void)param;
    if (nout < sizeof out)
        out[nout++] = (char)value;
}

static void on_req(struct avr_irq_t *irq, uint32_t value, void *param)
{
    (void)irq, (void)param;
    if (value && !req_level)
        req_rises++;
    req_level = value != 0;
}

int board_open(const char *elf_path)
{
    avr_global_logger_set(quiet_logger);
    elf_firmware_t fw;
    memset(&fw, 0, sizeof fw);
    if (elf_read_firmware(elf_path, &fw) != 0) {
        fprintf(stderr, "board: cannot read %s\n", elf_path);
        return 2;
    }
    strcpy(fw.mmcu, "atmega328p");
    fw.frequency = BOARD_F_HZ;
    avr = avr_make_mcu_by_name(fw.mmcu);
    if (!avr) {
        fprintf(stderr, "board: simavr has no atmega328p core\n");
        return 2;
    }
    avr_init(avr);
    avr_load_firmware(avr, &fw);
    avr->frequency = BOARD_F_HZ;
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
    board_run_us(2000); /* start-up */
    return 0;
}

void board_run_us(double us)
{
    avr_cycle_count_t end = avr->cycle + (avr_cycle_count_t)(us * (BOARD_F_HZ / 1e6));
    while (avr->cycle < end) {
        int state = avr_run(avr);
        if (state == cpu_Done || state == cpu_Crashed) {
            fprintf(stderr, "board: the simulated CPU stopped (state %d)\n", state);
            exit(1);
        }
    }
}

double board_time_s(void)
{
    return (double)avr->cycle / BOARD_F_HZ;
}

void board_send(char c)
{
    avr_raise_irq(uart_in, (uint8_t)c);
    board_run_us(300);
}

void board_clock(const char *bits, double half_us, board_wave wave)
{
    for (const char *b = bits; *b; b++) {
        int next = b[1] ? b[1] == '1' : 0;
        if (wave == WAVE_MID_HIGH) {
            avr_raise_irq(data_pin, *b == '1');
            board_run_us(half_us / 2);
            avr_raise_irq(clock_pin, 0);
            board_run_us(half_us);
            avr_raise_irq(clock_pin, 1);
            board_run_us(half_us / 2);
        } else {
            if (b == bits) /* the first bit is set up while the clock idles */
                avr_raise_irq(data_pin, *b == '1');
            board_run_us(half_us);
            avr_raise_irq(clock_pin, 0);
            board_run_us(half_us);
            avr_raise_irq(clock_pin, 1);
            avr_raise_irq(data_pin, next); /* same instant as the rising edge */
        }
    }
    avr_raise_irq(data_pin, 0);
}

size_t board_take(char *buf, size_t cap)
{
    size_t n = nout < cap - 1 ? nout : cap - 1;
    memcpy(buf, out, n);
    buf[n] = '\0';
    memmove(out, out + n, nout - n);
    nout -= n;
    return n;
}

int board_req_level(void)
{
    return req_level;
}

unsigned board_req_rises(void)
{
    return req_rises;
}
