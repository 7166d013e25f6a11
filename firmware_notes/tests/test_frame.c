/*
 * Host test for the portable framer and decoder (firmware_notes/src/frame.c)
 * over the shared vectors in firmware_notes/vectors/frames.tsv.
 *
 * For every vector it feeds the bits one by one into the framer, takes the
 * frame at an idle gap, checks the packed bytes against the vector's hex,
 * decodes both the framer's output and the hex, and compares the result with
 * the expected reading line or reject reason, and the raw-frame line with the
 * vector's raw column.  It prints one line per vector,
 *     name TAB result TAB raw-frame-line
 * (result is the reading line or "reject:<reason>") so tests/formats/test_frames.py
 * can check that the Python decoder agrees on every vector.  Exit status 1
 * on any mismatch.
 */
#include "frame.h"
#include "vectors.h"

#include <stdio.h>
#include <string.h>

static int failures;

static void fail(const char *name, const char *what)
{
    fprintf(stderr, "FAIL %s: %s\n", name, what);
    failures++;
}

static void result_text(frame_status s, const frame_reading *r, char *out)
{
    if (s == FRAME_OK)
        frame_format_reading(r, out);
    else
        sprintf(out, "reject:%s", frame_status_text(s));
}

static void run_vector(const vector *vec)
{
    const char *name = vec->name;
    int v = frame_variant_from_name(vec->variant);
    if (v < 0) {
        fail(name, "unknown variant");
        return;
    }
    const char *bits = vec->bits;
    size_t nb = vec->nbits;
    const uint8_t *packed = vec->packed;
    framer f;
    framer_reset(&f);
    for (size_t i = 0; i < nb; i++)
        framer_bit(&f, bits[i] == '1');
    uint8_t frame[FRAME_MAX_BYTES];
    uint8_t got_bits = framer_take(&f, frame);
    uint8_t want_bits = nb > FRAME_MAX_BITS ? FRAME_TOO_LONG : (uint8_t)nb;
    if (got_bits != want_bits)
        fail(name, "framer bit count");
    size_t cmp = (nb > FRAME_MAX_BITS ? FRAME_MAX_BITS : nb + 7) / 8;
    if (memcmp(frame, packed, cmp) != 0)
        fail(name, "framer bytes differ from the hex column");
    static const uint8_t zeros[FRAME_MAX_BYTES];
    if (f.nbits != 0 || memcmp(f.buf, zeros, FRAME_MAX_BYTES) != 0)
        fail(name, "framer not reset after take");

    frame_reading r1 = {0}, r2 = {0};
    frame_status s1 = frame_decode((frame_variant)v, frame, got_bits, &r1);
    frame_status s2 = frame_decode((frame_variant)v, packed, want_bits, &r2);
    char t1[FRAME_LINE_MAX], t2[FRAME_LINE_MAX], raw[FRAME_LINE_MAX];
    result_text(s1, &r1, t1);
    result_text(s2, &r2, t2);
    if (strcmp(t1, t2) != 0)
        fail(name, "framer path and hex path disagree");
    if (strcmp(t1, vec->expect) != 0) {
        char msg[128];
        snprintf(msg, sizeof msg, "got '%s', expected '%s'", t1, vec->expect);
        fail(name, msg);
    }
    frame_format_raw((frame_variant)v, frame, got_bits, raw);
    if (strcmp(raw, vec->raw) != 0) {
        char msg[128];
        snprintf(msg, sizeof msg, "raw line '%s', expected '%s'", raw, vec->raw);
        fail(name, msg);
    }
    printf("%s\t%s\t%s\n", name, t1, raw);
}

/* A glitch burst followed by an idle gap must not spoil the next frame. */
static void test_resync(void)
{
    static const uint8_t good[3] = {0xD2, 0x04, 0x00}; /* sign24, +12.34 mm */
    framer f;
    uint8_t frame[FRAME_MAX_BYTES];
    frame_reading r;
    char text[FRAME_LINE_MAX];
    framer_reset(&f);
    if (framer_take(&f, frame) != 0)
        fail("resync", "empty gap should give 0 bits");
    for (int i = 0; i < 7; i++)
        framer_bit(&f, 1);
    if (framer_take(&f, frame) != 7)
        fail("resync", "glitch burst length");
    for (int i = 0; i < 24; i++)
        framer_bit(&f, (good[i / 8] >> (i % 8)) & 1);
    uint8_t n = framer_take(&f, frame);
    if (frame_decode(FRAME_SIGN24, frame, n, &r) != FRAME_OK)
        fail("resync", "frame after glitch rejected");
    frame_format_reading(&r, text);
    if (strcmp(text, "+12.34 mm") != 0)
        fail("resync", text);
}

int main(int argc, char **argv)
{
    if (argc != 2) {
        fprintf(stderr, "usage: %s frames.tsv\n", argv[0]);
        return 2;
    }
    static vector vec[256];
    int vectors = vectors_load(argv[1], vec, 256);
    if (vectors < 0)
        return 2;
    for (int i = 0; i < vectors; i++)
        run_vector(&vec[i]);
    test_resync();
    fprintf(stderr, "test_frame: %d vectors, %d failures\n", vectors, failures);
    return failures || vectors == 0 ? 1 : 0;
}
