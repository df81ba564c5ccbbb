/* The example station's two halves: run_station (station.c) and the board's output. */
#ifndef LINEGATE_EXAMPLE_STATION_H
#define LINEGATE_EXAMPLE_STATION_H
#include <stddef.h>
#include <stdint.h>

/* Steps a station over `count` vectors of `width` raw readings; returns 0, or 2 when the
 * blob was refused (every unit then shows NO-GO), 3 on a line failure. */
int run_station(const uint8_t *blob, size_t blob_len, const int32_t *vectors, size_t width,
                size_t count);

/* Writes a NUL-terminated string to the board's console. */
void board_write(const char *s);

#endif
