/*
 * Clock/data bridge for an ATmega328P-class board at 16 MHz: reads the
 * two-wire synchronous port of a low-cost indicator or caliper (through a
 * level-shifting input stage, see ../README.md) and sends one text line per
 * reading on the UART, which a USB-serial chip turns into a serial port.
 *
 * Pins (ATmega328P):  PD2/INT0 clock in, PD3 data in, PD4 request out
 * (drives a transistor that pulls the request line of "bcd13" devices low),
 * PD0/PD1 UART.
 *
 * Capture: INT0 fires on the active clock edge and samples the data pin into
 * the portable framer (frame.c); every edge re-arms a Timer1 compare
 * BRIDGE_GAP_US later, and when no edge arrives for that long the frame is
 * complete (idle-gap resynchronisation: a glitch or a half frame is dropped
 * at the next gap, so the bridge never stays out of step).
 *
 * Host commands, one byte each (anything else is ignored):
 *   '?' send the latest reading (or raw frame) now      'P' polled: send only on '?'
 *   'S' streaming: send every frame (default)           'R' raw-frame lines
 *   'T' reading lines (default)                          '1' '2' '3' variant
 *       rel24x2 / sign24 / bcd13
 * Compile-time defaults: BRIDGE_VARIANT, BRIDGE_RAW, BRIDGE_POLLED, BRIDGE_BAUD,
 * BRIDGE_GAP_US, BRIDGE_EDGE_RISING, BRIDGE_INVERT_DATA, BRIDGE_REQ_PERIOD_MS.
 */
#include "frame.h"

#include <avr/interrupt.h>
#include <avr/io.h>
#include <string.h>

#ifndef F_CPU
#define F_CPU 16000000UL
#endif
#ifndef BRIDGE_BAUD
#define BRIDGE_BAUD 115200UL
#endif
#ifndef BRIDGE_VARIANT
#define BRIDGE_VARIANT FRAME_SIGN24
#endif
#ifndef BRIDGE_RAW
#define BRIDGE_RAW 0
#endif
#ifndef BRIDGE_POLLED
#define BRIDGE_POLLED 0
#endif
#ifndef BRIDGE_GAP_US /* longer than any gap inside a frame, shorter than between frames */
#define BRIDGE_GAP_US 3000UL
#endif
#ifndef BRIDGE_EDGE_RISING /* 0: sample data on the falling clock edge seen at PD2 */
#define BRIDGE_EDGE_RISING 0
#endif
#ifndef BRIDGE_INVERT_DATA /* 1: the input stage inverts the data line */
#define BRIDGE_INVERT_DATA 0
#endif
#ifndef BRIDGE_REQ_PERIOD_MS /* how often a bcd13 device is asked for a frame */
#define BRIDGE_REQ_PERIOD_MS 100u
#endif
#define REQ_HOLD_MS 60u /* release the request line if no frame came by then */

#define CLOCK_BIT PD2
#define DATA_BIT PD3
#define REQ_BIT PD4
#define GAP_TICKS ((uint16_t)(BRIDGE_GAP_US * (F_CPU / 64000UL) / 1000UL))
#if BRIDGE_GAP_US < 100 || BRIDGE_GAP_US > 250000
#error "BRIDGE_GAP_US must lie between 100 us and 250 ms (Timer1 at clk/64)"
#endif

/* Shared with the interrupts. */
static framer g_framer;
static volatile uint8_t g_frame[FRAME_MAX_BYTES];
static volatile uint8_t g_frame_bits;
static volatile uint8_t g_frame_ready;
static volatile uint16_t g_ms;

ISR(INT0_vect)
{
    uint8_t data = (uint8_t)((PIND >> DATA_BIT) & 1u);
    framer_bit(&g_framer, (uint8_t)(data ^ BRIDGE_INVERT_DATA));
    OCR1A = (uint16_t)(TCNT1 + GAP_TICKS);
    TIFR1 = _BV(OCF1A);
    TIMSK1 = _BV(OCIE1A);
}

ISR(TIMER1_COMPA_vect) /* idle gap: the frame is complete */
{
    TIMSK1 = 0;
    uint8_t buf[FRAME_MAX_BYTES];
    uint8_t n = framer_take(&g_framer, buf);
    if (!g_frame_ready) { /* else the main loop is behind: drop this one */
        for (uint8_t i = 0; i < FRAME_MAX_BYTES; i++)
            g_frame[i] = buf[i];
        g_frame_bits = n;
        g_frame_ready = 1;
    }
}

ISR(TIMER0_COMPA_vect) /* 1 ms tick */
{
    g_ms++;
}

static void uart_init(void)
{
    uint16_t ubrr = (uint16_t)((F_CPU + 4UL * BRIDGE_BAUD) / (8UL * BRIDGE_BAUD) - 1UL);
    UBRR0H = (uint8_t)(ubrr >> 8);
    UBRR0L = (uint8_t)ubrr;
    UCSR0A = _BV(U2X0);
    UCSR0B = _BV(RXEN0) | _BV(TXEN0);
    UCSR0C = _BV(UCSZ01) | _BV(UCSZ00); /* 8N1 */
}

static void uart_line(const char *s, uint8_t len)
{
    for (uint8_t i = 0; i < len + 2u; i++) {
        char c = i < len ? s[i] : (i == len ? '\r' : '\n');
        while (!(UCSR0A & _BV(UDRE0)))
            ;
        UDR0 = (uint8_t)c;
    }
}

static uint16_t millis(void)
{
    cli();
    uint16_t t = g_ms;
    sei();
    return t;
}

/* Bridge state owned by the main loop. */
static struct {
    frame_variant variant;
    uint8_t raw, polled;
    uint8_t have_reading, have_raw;
    frame_reading reading;
    uint8_t raw_bytes[FRAME_MAX_BYTES];
    uint8_t raw_bits;
    uint8_t requesting;
    uint16_t req_at;
} s;

static void send_latest(void)
{
    char line[FRAME_LINE_MAX];
    if (s.raw && s.have_raw)
        uart_line(line, frame_format_raw(s.variant, s.raw_bytes, s.raw_bits, line));
    else if (!s.raw && s.have_reading)
        uart_line(line, frame_format_reading(&s.reading, line));
}

static void on_frame(const uint8_t *bytes, uint8_t nbits)
{
    memcpy(s.raw_bytes, bytes, FRAME_MAX_BYTES);
    s.raw_bits = nbits;
    s.have_raw = 1;
    frame_reading r;
    uint8_t good = frame_decode(s.variant, bytes, nbits, &r) == FRAME_OK;
    if (good) {
        s.reading = r;
        s.have_reading = 1;
    }
    if (!s.polled && (s.raw || good))
        send_latest();
}

static void on_command(uint8_t c)
{
    switch (c) {
    case '?': send_latest(); break;
    case 'P': s.polled = 1; break;
    case 'S': s.polled = 0; break;
    case 'R': s.raw = 1; break;
    case 'T': s.raw = 0; break;
    case '1': case '2': case '3':
        s.variant = (frame_variant)(c - '1');
        s.have_reading = s.have_raw = 0;
        break;
    default: break;
    }
}

/* bcd13 devices send only when asked: hold the request line (PD4 high turns
 * on the transistor that pulls it low) until a frame arrives or time runs out. */
static void request_tick(uint16_t now)
{
    if (s.variant != FRAME_BCD13) {
        PORTD &= (uint8_t)~_BV(REQ_BIT);
        s.requesting = 0;
        return;
    }
    if (!s.requesting && (uint16_t)(now - s.req_at) >= BRIDGE_REQ_PERIOD_MS) {
        PORTD |= _BV(REQ_BIT);
        s.requesting = 1;
        s.req_at = now;
    } else if (s.requesting && (uint16_t)(now - s.req_at) >= REQ_HOLD_MS) {
        PORTD &= (uint8_t)~_BV(REQ_BIT);
        s.requesting = 0;
    }
}

int main(void)
{
    s.variant = BRIDGE_VARIANT;
    s.raw = BRIDGE_RAW;
    s.polled = BRIDGE_POLLED;
    framer_reset(&g_framer);

    DDRD = _BV(REQ_BIT);                  /* PD2, PD3 inputs, no pull-ups: */
    PORTD = 0;                            /* the input stage drives them   */
    uart_init();
    TCCR1A = 0;
    TCCR1B = _BV(CS11) | _BV(CS10);       /* Timer1 free-running, clk/64: 4 us */
    TCCR0A = _BV(WGM01);                  /* Timer0 CTC, 1 kHz */
    TCCR0B = _BV(CS01) | _BV(CS00);       /* clk/64 */
    OCR0A = (uint8_t)(F_CPU / 64UL / 1000UL - 1UL);
    TIMSK0 = _BV(OCIE0A);
    EICRA = BRIDGE_EDGE_RISING ? (_BV(ISC01) | _BV(ISC00)) : _BV(ISC01);
    EIFR = _BV(INTF0);
    EIMSK = _BV(INT0);
    sei();

    for (;;) {
        if (g_frame_ready) {
            uint8_t bytes[FRAME_MAX_BYTES];
            cli();
            for (uint8_t i = 0; i < FRAME_MAX_BYTES; i++)
                bytes[i] = g_frame[i];
            uint8_t n = g_frame_bits;
            g_frame_ready = 0;
            sei();
            if (s.requesting) { /* the asked-for frame came: release the line */
                PORTD &= (uint8_t)~_BV(REQ_BIT);
                s.requesting = 0;
            }
            on_frame(bytes, n);
        }
        if (UCSR0A & _BV(RXC0))
            on_command(UDR0);
        request_tick(millis());
    }
}
