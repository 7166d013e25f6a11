/* Reader for the shared frame vectors; see vectors.h. */
#include "vectors.h"

#include <stdio.h>
#include <string.h>

static int hexval(char c)
{
    if (c >= '0' && c <= '9') return c - '0';
    if (c >= 'A' && c <= 'F') return c - 'A' + 10;
    if (c >= 'a' && c <= 'f') return c - 'a' + 10;
    return -1;
}

static int copy(char *dst, size_t cap, const char *src)
{
    if (strlen(src) >= cap)
        return -1;
    strcpy(dst, src);
    return 0;
}

static int parse_row(char *line, vector *v)
{
    char *col[7] = {0}; /* name variant bits hex expect raw note */
    char *p = line;
    for (int i = 0; i < 7 && p; i++) {
        col[i] = p;
        p = strchr(p, '\t');
        if (p)
            *p++ = '\0';
    }
    if (!col[5] || copy(v->name, sizeof v->name, col[0]) ||
        copy(v->variant, sizeof v->variant, col[1]) || copy(v->bits, sizeof v->bits, col[2]) ||
        copy(v->expect, sizeof v->expect, col[4]) || copy(v->raw, sizeof v->raw, col[5]))
        return -1;
    v->nbits = strlen(v->bits);
    if (strspn(v->bits, "01") != v->nbits)
        return -1;
    size_t nhex = strlen(col[3]);
    if (nhex != 2 * ((v->nbits + 7) / 8))
        return -1;
    memset(v->packed, 0, sizeof v->packed);
    for (size_t i = 0; i < nhex / 2; i++) {
        int hi = hexval(col[3][2 * i]), lo = hexval(col[3][2 * i + 1]);
        if (hi < 0 || lo < 0)
            return -1;
        v->packed[i] = (uint8_t)(hi << 4 | lo);
    }
    return 0;
}

int vectors_load(const char *path, vector *out, int max)
{
    FILE *fp = fopen(path, "r");
    if (!fp) {
        perror(path);
        return -1;
    }
    char line[512];
    int n = 0, header = 1, lineno = 0;
    while (fgets(line, sizeof line, fp)) {
        lineno++;
        if (line[0] == '#' || line[0] == '\n')
            continue;
        line[strcspn(line, "\r\n")] = '\0';
        if (header) { /* the column-name row */
            header = 0;
            continue;
        }
        if (n == max || parse_row(line, &out[n]) != 0) {
            fprintf(stderr, "%s:%d: malformed vector row (or too many rows)\n", path, lineno);
            fclose(fp);
            return -1;
        }
        n++;
    }
    fclose(fp);
    return n;
}
