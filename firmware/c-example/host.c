/* The example station on a desktop: `station-host BLOB VECTORS` reads a blob and a
 * vectors file (`linegate replay --vectors`: a `# model` line, then one unit per line of
 * space-separated raw readings) and prints what the device would. */
#include <stdio.h>
#include <stdlib.h>

#include "station.h"

void board_write(const char *s) { fputs(s, stdout); }

static unsigned char *slurp(const char *path, size_t *len) {
    FILE *f = fopen(path, "rb");
    if (!f) return NULL;
    size_t cap = 1 << 16, n = 0;
    unsigned char *buf = malloc(cap);
    size_t got;
    while (buf && (got = fread(buf + n, 1, cap - n, f)) > 0) {
        n += got;
        if (n == cap) buf = realloc(buf, cap *= 2);
    }
    fclose(f);
    *len = n;
    return buf;
}

int main(int argc, char **argv) {
    if (argc != 3) {
        fprintf(stderr, "usage: %s BLOB VECTORS\n", argv[0]);
        return 64;
    }
    size_t blob_len = 0, text_len = 0;
    unsigned char *blob = slurp(argv[1], &blob_len);
    char *text = (char *)slurp(argv[2], &text_len);
    if (!blob || !text) {
        fprintf(stderr, "cannot read %s\n", blob ? argv[2] : argv[1]);
        return 66;
    }
    text = realloc(text, text_len + 1);
    text[text_len] = 0;
    size_t cap = 1 << 16, n = 0, width = 0, rows = 0;
    int32_t *v = malloc(cap * sizeof *v);
    for (char *line = text; line && *line;) {
        char *end = line;
        while (*end && *end != '\n') end++;
        char *next = *end ? end + 1 : NULL;
        *end = 0;
        if (*line && *line != '#') {
            size_t w = 0;
            for (char *p = line, *q; ; p = q) {
                long x = strtol(p, &q, 10);
                if (q == p) break;
                if (n == cap) v = realloc(v, (cap *= 2) * sizeof *v);
                v[n++] = (int32_t)x;
                w++;
            }
            if (rows && w != width) {
                fprintf(stderr, "%s: line %zu has %zu readings, not %zu\n", argv[2], rows + 1, w, width);
                return 65;
            }
            width = w;
            rows++;
        }
        line = next;
    }
    int rc = run_station(blob, blob_len, v, width, rows);
    fflush(stdout);
    return rc;
}
