/* Reader for the shared frame vectors (vectors/frames.tsv), used by the host
 * test program and the simavr harness. */
#ifndef VECTORS_H
#define VECTORS_H

#include <stddef.h>
#include <stdint.h>

#define VECTOR_MAX_BITS 96

typedef struct {
    char name[48];
    char variant[16];
    char bits[VECTOR_MAX_BITS + 1]; /* '0'/'1' in transmission order */
    uint8_t packed[VECTOR_MAX_BITS / 8]; /* the hex column */
    size_t nbits;
    char expect[48]; /* reading line, or "reject:<reason>" */
    char raw[48]; /* raw-frame line "F:<variant>:<bits>:<HEX>" (no line ending) */
} vector;

/* Loads up to `max` vectors; returns how many, or -1 (after a message on
 * stderr) if the file is missing or a row is malformed. */
int vectors_load(const char *path, vector *out, int max);

#endif
