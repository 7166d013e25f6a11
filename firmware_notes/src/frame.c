/*
 * Frame assembly and decoding for the clock/data bridge (portable C, no
 * hardware).  The layouts are FROM MEMORY and must be confirmed on the
 * user's own device with a logic analyser; logger/frames.py implements the
 * same layouts for raw-frame lines, and both are checked against
 * firmware_notes/vectors/frames.tsv.
 */
#include "frame.h"

#include <string.h>

static const char *const NAMES[FRAME_VARIANTS] = {"rel24x2", "sign24", "bcd13"};
static const uint8_t BITS[FRAME_VARIANTS] = {48, 24, 52};

void framer_reset(framer *f)
{
    memset(f, 0, sizeof *f);
}

uint8_t framer_take(framer *f, uint8_t out[FRAME_MAX_BYTES])
{
    uint8_t n = f->nbits;
    memcpy(out, f->buf, FRAME_MAX_BYTES);
    framer_reset(f);
    return n;
}

uint8_t frame_bits(frame_variant v)
{
    return v < FRAME_VARIANTS ? BITS[v] : 0;
}

const char *frame_variant_name(frame_variant v)
{
    return v < FRAME_VARIANTS ? NAMES[v] : "?";
}

int frame_variant_from_name(const char *name)
{
    for (int i = 0; i < FRAME_VARIANTS; i++)
        if (strcmp(name, NAMES[i]) == 0)
            return i;
    return -1;
}

/* `width` bits starting at transmission bit `first`, first-sent bit lowest. */
static uint32_t field(const uint8_t *bytes, uint8_t first, uint8_t width)
{
    uint32_t v = 0;
    for (uint8_t k = 0; k < width; k++) {
        uint8_t i = (uint8_t)(first + k);
        if (bytes[i >> 3] & (1u << (i & 7u)))
            v |= (uint32_t)1 << k;
    }
    return v;
}

/* A 24-bit two's-complement word whose top four bits must all equal its
 * sign (our plausibility check: real travel is far below 2^20 counts). */
static frame_status word24(const uint8_t *bytes, uint8_t first, int32_t *out)
{
    uint32_t w = field(bytes, first, 24);
    uint32_t top = w >> 20;
    if (top != 0 && top != 0xF)
        return FRAME_ERR_SIGN;
    *out = (int32_t)(top ? (w | 0xFF000000UL) : w);
    return FRAME_OK;
}

/* counts of 1/20480 in -> 0.00001 in, rounded half away from zero:
 * 100000 / 20480 = 625 / 128 exactly. */
static int32_t rel24_to_e5(int32_t counts)
{
    uint32_t mag = (uint32_t)(counts < 0 ? -counts : counts);
    int32_t e5 = (int32_t)((mag * 625UL + 64UL) / 128UL);
    return counts < 0 ? -e5 : e5;
}

static frame_status decode_rel24x2(const uint8_t *b, frame_reading *out)
{
    int32_t absolute, relative;
    frame_status s = word24(b, 0, &absolute);
    if (s == FRAME_OK)
        s = word24(b, 24, &relative);
    if (s != FRAME_OK)
        return s;
    out->mantissa = rel24_to_e5(relative);
    out->decimals = 5;
    out->unit = FRAME_UNIT_IN;
    return FRAME_OK;
}

static frame_status decode_sign24(const uint8_t *b, frame_reading *out)
{
    int32_t mag = (int32_t)field(b, 0, 20);
    if (field(b, 21, 2) != 0)
        return FRAME_ERR_FLAGS;
    if (field(b, 23, 1)) { /* inch: counts of 0.0005 in */
        out->mantissa = mag * 5;
        out->decimals = 4;
        out->unit = FRAME_UNIT_IN;
    } else { /* mm: counts of 0.01 mm */
        out->mantissa = mag;
        out->decimals = 2;
        out->unit = FRAME_UNIT_MM;
    }
    if (field(b, 20, 1))
        out->mantissa = -out->mantissa;
    return FRAME_OK;
}

static frame_status decode_bcd13(const uint8_t *b, frame_reading *out)
{
    for (uint8_t k = 0; k < 4; k++)
        if (field(b, (uint8_t)(4 * k), 4) != 0xF)
            return FRAME_ERR_HEADER;
    uint32_t sign = field(b, 16, 4);
    if (sign != 0 && sign != 8)
        return FRAME_ERR_SIGN;
    int32_t m = 0;
    for (uint8_t k = 0; k < 6; k++) {
        uint32_t d = field(b, (uint8_t)(20 + 4 * k), 4);
        if (d > 9)
            return FRAME_ERR_DIGIT;
        m = m * 10 + (int32_t)d;
    }
    uint32_t dec = field(b, 44, 4);
    if (dec > 5)
        return FRAME_ERR_DECIMALS;
    uint32_t unit = field(b, 48, 4);
    if (unit > 1)
        return FRAME_ERR_FLAGS;
    out->mantissa = sign ? -m : m;
    out->decimals = (uint8_t)dec;
    out->unit = (uint8_t)unit;
    return FRAME_OK;
}

frame_status frame_decode(frame_variant v, const uint8_t *bytes, uint8_t nbits,
                          frame_reading *out)
{
    if (v >= FRAME_VARIANTS || nbits != BITS[v])
        return FRAME_ERR_LENGTH;
    switch (v) {
    case FRAME_REL24X2:
        return decode_rel24x2(bytes, out);
    case FRAME_SIGN24:
        return decode_sign24(bytes, out);
    default:
        return decode_bcd13(bytes, out);
    }
}

const char *frame_status_text(frame_status s)
{
    switch (s) {
    case FRAME_OK: return "ok";
    case FRAME_ERR_LENGTH: return "length";
    case FRAME_ERR_SIGN: return "sign";
    case FRAME_ERR_FLAGS: return "flags";
    case FRAME_ERR_HEADER: return "header";
    case FRAME_ERR_DIGIT: return "digit";
    default: return "decimals";
    }
}

uint8_t frame_format_reading(const frame_reading *r, char *buf)
{
    char digits[12];
    uint8_t n = 0, len = 0;
    uint32_t mag = (uint32_t)(r->mantissa < 0 ? -r->mantissa : r->mantissa);
    do { /* least significant digit first */
        digits[n++] = (char)('0' + mag % 10u);
        mag /= 10u;
    } while (mag || n <= r->decimals);
    buf[len++] = r->mantissa < 0 ? '-' : '+';
    while (n) {
        if (n == r->decimals)
            buf[len++] = '.';
        buf[len++] = digits[--n];
    }
    buf[len++] = ' ';
    buf[len++] = r->unit == FRAME_UNIT_IN ? 'i' : 'm';
    buf[len++] = r->unit == FRAME_UNIT_IN ? 'n' : 'm';
    buf[len] = '\0';
    return len;
}

uint8_t frame_format_raw(frame_variant v, const uint8_t *bytes, uint8_t nbits, char *buf)
{
    static const char HEX[] = "0123456789ABCDEF";
    const char *name = frame_variant_name(v);
    uint8_t len = 0;
    buf[len++] = 'F';
    buf[len++] = ':';
    while (*name)
        buf[len++] = *name++;
    buf[len++] = ':';
    if (nbits >= 10)
        buf[len++] = (char)('0' + nbits / 10u);
    buf[len++] = (char)('0' + nbits % 10u);
    buf[len++] = ':';
    uint8_t nbytes = (uint8_t)((nbits > FRAME_MAX_BITS ? FRAME_MAX_BITS : nbits) + 7u) / 8u;
    for (uint8_t i = 0; i < nbytes; i++) {
        buf[len++] = HEX[bytes[i] >> 4];
        buf[len++] = HEX[bytes[i] & 0xF];
    }
    buf[len] = '\0';
    return len;
}
