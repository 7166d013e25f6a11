/*
 * The bridge board in simavr, for the harness programs: loads the AVR image,
 * drives the clock (PD2) and data (PD3) pins as an indicator would, feeds
 * command bytes into the UART, collects what the firmware sends, and watches
 * the request line (PD4).  Nothing here uses the firmware's own code.
 */
#ifndef BOARD_H
#define BOARD_H

#include <stddef.h>
#include <stdint.h>

#define BOARD_F_HZ 16000000u

/* How the data line moves against the clock (the clock idles high at the
 * pin, and the default image samples data on the falling edge). */
typedef enum {
    /* data changes halfway through the clock's high time: stable at both
     * edges, so this waveform cannot tell which edge the image samples */
    WAVE_MID_HIGH,
    /* data changes at the very instant of the rising edge, the edge that must
     * not be sampled, and holds until the next one: an image that samples on
     * the rising edge reads every bit one place late */
    WAVE_ON_RISING,
} board_wave;

/* Loads the image (an atmega328p at 16 MHz) and runs 2 ms of start-up.
 * Returns 0, or 2 after a message on stderr. */
int board_open(const char *elf_path);

/* Runs the simulated CPU for `us` microseconds; exits(1) if it stops. */
void board_run_us(double us);

/* Simulated time since start-up, in seconds. */
double board_time_s(void);

/* One byte from the host into the UART, then 300 us (a byte at 115200 baud
 * is 87 us). */
void board_send(char c);

/* Clocks out `bits` ('0'/'1', first sent first) with the given clock half
 * period; the data line ends low, the clock high (idle).  No idle gap. */
void board_clock(const char *bits, double half_us, board_wave wave);

/* Copies up to cap-1 bytes the firmware sent since the last take into buf,
 * NUL-terminates, forgets them, and returns how many were copied. */
size_t board_take(char *buf, size_t cap);

/* Request line (PD4): current level, and how many times it went high. */
int board_req_level(void);
unsigned board_req_rises(void);

#endif
