/*
 * Portable frame assembly and decoding for two-wire (clock + data) indicator
 * ports.  No hardware access here: the AVR main feeds bits from its clock
 * interrupt and calls framer_take() from its idle-gap timer; the host test
 * program feeds the same functions from the shared test vectors.
 *
 * Bits are stored in transmission order: bit i of a frame is bit (i % 8) of
 * byte i / 8.  All frame layouts are FROM MEMORY: confirm yours with a logic
 * analyser (firmware_notes/README.md says how).
 */
#ifndef FRAME_H
#define FRAME_H

#include <stdint.h>

#define FRAME_MAX_BITS 64u
#define FRAME_MAX_BYTES (FRAME_MAX_BITS / 8u)
/* Reported as the bit count of a frame that ran past FRAME_MAX_BITS. */
#define FRAME_TOO_LONG (FRAME_MAX_BITS + 1u)

typedef enum {
    FRAME_REL24X2 = 0, /* 24-bit two-packet relative/absolute frame, 48 bits */
    FRAME_SIGN24 = 1,  /* 24-bit sign-and-unit frame, 24 bits */
    FRAME_BCD13 = 2,   /* 13-nibble BCD frame with request line, 52 bits */
    FRAME_VARIANTS = 3
} frame_variant;

typedef enum { FRAME_UNIT_MM = 0, FRAME_UNIT_IN = 1 } frame_unit;

typedef enum {
    FRAME_OK = 0,
    FRAME_ERR_LENGTH,  /* wrong number of bits (short, long, or two frames run together) */
    FRAME_ERR_SIGN,    /* sign-extension bits or sign nibble inconsistent */
    FRAME_ERR_FLAGS,   /* reserved bits set, or unknown unit code */
    FRAME_ERR_HEADER,  /* BCD header nibbles are not all 0xF */
    FRAME_ERR_DIGIT,   /* BCD digit above 9 */
    FRAME_ERR_DECIMALS /* BCD decimal-places nibble out of range */
} frame_status;

/* A decoded reading: value = mantissa / 10^decimals, in `unit`. */
typedef struct {
    int32_t mantissa;
    uint8_t decimals;
    uint8_t unit; /* frame_unit */
} frame_reading;

/* Collects bits between idle gaps. */
typedef struct {
    uint8_t buf[FRAME_MAX_BYTES];
    uint8_t nbits; /* FRAME_TOO_LONG once more than FRAME_MAX_BITS arrived */
} framer;

void framer_reset(framer *f);

/* One data bit sampled on the active clock edge (cheap: called from an ISR). */
static inline void framer_bit(framer *f, uint8_t bit)
{
    uint8_t n = f->nbits;
    if (n < FRAME_MAX_BITS) {
        if (bit)
            f->buf[n >> 3] |= (uint8_t)(1u << (n & 7u));
        f->nbits = (uint8_t)(n + 1u);
    } else {
        f->nbits = FRAME_TOO_LONG;
    }
}

/* Idle gap seen: copy the frame out, reset for the next one, return its bit
 * count (0: nothing was captured since the last gap). */
uint8_t framer_take(framer *f, uint8_t out[FRAME_MAX_BYTES]);

uint8_t frame_bits(frame_variant v);
const char *frame_variant_name(frame_variant v);
/* Variant for a name such as "sign24"; -1 if unknown. */
int frame_variant_from_name(const char *name);

frame_status frame_decode(frame_variant v, const uint8_t *bytes, uint8_t nbits,
                          frame_reading *out);
const char *frame_status_text(frame_status s);

/* "+12.345 mm" / "-0.50050 in" (no line ending); returns the length.
 * buf must hold at least FRAME_LINE_MAX bytes; the result is NUL-terminated. */
#define FRAME_LINE_MAX 40u
uint8_t frame_format_reading(const frame_reading *r, char *buf);

/* Raw-frame line "F:sign24:24:E80300" (no line ending): the frame's bytes in
 * transmission order as upper-case hex.  Cannot parse as a reading line,
 * because it starts with a letter.  Returns the length. */
uint8_t frame_format_raw(frame_variant v, const uint8_t *bytes, uint8_t nbits, char *buf);

#endif
