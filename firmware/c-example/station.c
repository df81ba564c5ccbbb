/* Linegate example station in C: the board-independent part.
 *
 * Sets up a station from a model blob (validated once), then steps it once per vector:
 * the sensor callback hands over the next vector's raw readings, the library classifies
 * them with the same kernel the host audit ran and drives the lines through the line
 * callback. One line per vector, the same lines as `linegate replay`:
 *   <index> <GO|NO-GO|RECHECK> <score>   or   <index> FAULT ch<channel>
 * and for a model of several classes the leading class's name after the lead:
 *   <index> <GO|NO-GO|RECHECK> <lead> <class name>
 * then the station's field record (its statistics over the units, under the zero plan) as
 *   # field <lower-case hex of the record's bytes>
 * Output goes through board_write (host: stdout; device: semihosting). No heap, no libc. */
#include "station.h"
#include "linegate.h"

/* Plays the vectors as sensor readings, one vector per read. */
struct playback {
    const int32_t *data;
    size_t width, count, next;
    bool level[3]; /* GO, NO-GO, RECHECK line levels */
};

static bool read_vector(void *ctx, int32_t *raw, size_t n) {
    struct playback *p = ctx;
    if (n != p->width || p->next >= p->count) return false;
    const int32_t *v = p->data + p->next * p->width;
    for (size_t i = 0; i < n; i++) raw[i] = v[i];
    p->next++;
    return true;
}

static bool set_line(void *ctx, lg_line line, bool high) {
    struct playback *p = ctx;
    if ((unsigned)line > 2) return false;
    p->level[line] = high;
    return true;
}

/* Decimal text of v into buf (at least 21 bytes); returns the length. */
static size_t decimal(int64_t v, char *buf) {
    char tmp[21];
    size_t n = 0, len = 0;
    uint64_t u = v < 0 ? (uint64_t)0 - (uint64_t)v : (uint64_t)v;
    do {
        tmp[n++] = (char)('0' + u % 10u);
        u /= 10u;
    } while (u);
    if (v < 0) buf[len++] = '-';
    while (n) buf[len++] = tmp[--n];
    buf[len] = 0;
    return len;
}

static void put(const char *s) { board_write(s); }

static void put_int(int64_t v) {
    char buf[24];
    decimal(v, buf);
    put(buf);
}

static void put_hex(const uint8_t *b, size_t n) {
    static const char digits[] = "0123456789abcdef";
    char buf[3] = {0, 0, 0};
    for (size_t i = 0; i < n; i++) {
        buf[0] = digits[b[i] >> 4];
        buf[1] = digits[b[i] & 15];
        put(buf);
    }
}

static lg_station station; /* static: zeroed, lives as long as the program */
static uint8_t record[LG_FIELD_RECORD_MAX]; /* the field record, written after the units */

int run_station(const uint8_t *blob, size_t blob_len, const int32_t *vectors, size_t width,
                size_t count) {
    struct playback p = {vectors, width, count, 0, {false, false, false}};
    lg_status st = lg_station_init(&station, blob, blob_len, NULL, read_vector, set_line, &p);
    uint8_t id[16];
    uint32_t blob_id = 0;
    if (st != LG_OK) {
        put("FAULT blob: status ");
        put_int(st);
        put("\n");
    } else if (lg_station_ids(&station, id, &blob_id) == LG_OK) {
        uint8_t be[4] = {(uint8_t)(blob_id >> 24), (uint8_t)(blob_id >> 16),
                         (uint8_t)(blob_id >> 8), (uint8_t)blob_id};
        put("# model ");
        put_hex(id, 16);
        put(" blob ");
        put_hex(be, 4);
        put("\n");
    }
    char name[32];
    for (size_t i = 0; i < count; i++) {
        lg_result r;
        if (lg_station_step(&station, &r) != LG_OK) {
            put("# line failure\n");
            return 3;
        }
        put_int((int64_t)i);
        if (r.fault == LG_FAULT_NONE) {
            put(r.verdict == LG_GO ? " GO " : r.verdict == LG_NOGO ? " NO-GO " : " RECHECK ");
            put_int(r.score);
            /* A model of several classes names the leading class, decided or not. */
            if (r.class_index != LG_NO_CLASS &&
                lg_station_class_name(&station, r.class_index, name, sizeof name) == LG_OK) {
                put(" ");
                put(name);
            }
        } else if (r.fault == LG_FAULT_RANGE) {
            put(" FAULT ch");
            put_int(r.channel);
        } else if (r.fault == LG_FAULT_BLOB) {
            put(" FAULT blob");
        } else {
            put(" FAULT count");
        }
        put("\n");
    }
    size_t record_len = 0;
    if (lg_station_field_record(&station, record, sizeof record, &record_len) == LG_OK) {
        put("# field ");
        put_hex(record, record_len);
        put("\n");
    }
    put("# lines: GO=");
    put_int(p.level[LG_LINE_GO]);
    put(" NO-GO=");
    put_int(p.level[LG_LINE_NOGO]);
    put(" RECHECK=");
    put_int(p.level[LG_LINE_RECHECK]);
    put("\n");
    return st == LG_OK ? 0 : 2;
}
