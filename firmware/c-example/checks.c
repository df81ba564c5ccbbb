/* The C interface's edges, checked from C on the desktop: NULL pointers, storage never
 * set up, each kind of damaged blob, channel names and short buffers, wrong reading
 * counts, a release key given to a build without signed releases, and the station's
 * fail-safe behaviour when a sensor or a line fails.
 * Usage: checks BLOB   (a valid unsigned blob; prints one line per check, exits 1 on a failure) */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "linegate.h"

static int failures;

static void check(int ok, const char *what) {
    printf("%s: %s\n", ok ? "ok" : "FAILED", what);
    if (!ok) failures++;
}

static unsigned char *slurp(const char *path, size_t *len) {
    FILE *f = fopen(path, "rb");
    if (!f) return NULL;
    unsigned char *buf = malloc(1 << 16);
    *len = fread(buf, 1, 1 << 16, f);
    fclose(f);
    return buf;
}

struct bench {
    bool sensor_ok, lines_ok;
    int32_t value;
    bool level[3];
    int line_writes;
};

static bool read_all(void *ctx, int32_t *raw, size_t n) {
    struct bench *b = ctx;
    for (size_t i = 0; i < n; i++) raw[i] = b->value;
    return b->sensor_ok;
}

static bool set_line(void *ctx, lg_line line, bool high) {
    struct bench *b = ctx;
    b->line_writes++;
    if (!b->lines_ok) return false;
    b->level[line] = high;
    return true;
}

int main(int argc, char **argv) {
    if (argc != 2 && argc != 3) {
        fprintf(stderr, "usage: %s BLOB [CLASS-BLOB]\n", argv[0]);
        return 64;
    }
    size_t len = 0;
    unsigned char *blob = slurp(argv[1], &len);
    if (!blob) {
        fprintf(stderr, "cannot read %s\n", argv[1]);
        return 66;
    }
    static lg_classifier c, never_loaded;
    lg_result r;
    size_t n = 0;
    uint32_t id = 0;
    uint8_t model_id[16];
    char name[64];

    check(lg_load(NULL, blob, len) == LG_ERR_NULL, "lg_load with no classifier");
    check(lg_load(&c, NULL, 10) == LG_ERR_NULL, "lg_load with no region");
    check(lg_classify(&never_loaded, NULL, 0, &r) == LG_ERR_NOT_LOADED, "a classifier never loaded");
    check(lg_channel_count(&never_loaded, &n) == LG_ERR_NOT_LOADED, "ids of a classifier never loaded");

    /* Damaged blobs: each refused with its own status, and the classifier left unusable. */
    unsigned char *bad = malloc(len + 8);
    memcpy(bad, blob, len);
    check(lg_load(&c, bad, 3) == LG_ERR_TRUNCATED, "a blob cut short");
    bad[0] ^= 0xFF;
    check(lg_load(&c, bad, len) == LG_ERR_BAD_MAGIC, "a wrong magic");
    memcpy(bad, blob, len);
    bad[len - 8] ^= 0x04;
    check(lg_load(&c, bad, len) == LG_ERR_CRC, "one flipped bit");
    check(lg_classify(&c, NULL, 0, &r) == LG_ERR_NOT_LOADED, "a refused blob leaves nothing loaded");
    memcpy(bad, blob, len);
    bad[len] = 0xFF; /* a flash region is longer than the blob: erased bytes after it */
    check(lg_load(&c, bad, len + 1) == LG_OK, "a region longer than the blob");

    check(lg_load(&c, blob, len) == LG_OK, "the valid blob loads");
    check(lg_channel_count(&c, &n) == LG_OK && n >= 1, "channel count");
    check(lg_model_id(&c, model_id) == LG_OK && lg_blob_id(&c, &id) == LG_OK, "model and blob ids");
    check(lg_model_id(&c, NULL) == LG_ERR_NULL, "model id into NULL");
    check(lg_channel_name(&c, 0, name, sizeof name) == LG_OK && strlen(name) > 0, "first channel's name");
    size_t need = strlen(name) + 1;
    check(lg_channel_name(&c, 0, name, need - 1) == LG_ERR_BUFFER, "a name without room for its NUL");
    check(lg_channel_name(&c, 0, name, need) == LG_OK && strlen(name) == need - 1, "a name with exactly its room");
    check(lg_channel_name(&c, n, name, sizeof name) == LG_ERR_INDEX, "a channel past the last");
    uint8_t classes = 9;
    check(lg_class_count(&c, &classes) == LG_OK && classes == 0, "a two-sided model has no classes");
    check(lg_class_name(&c, 0, name, sizeof name) == LG_ERR_CLASS, "and no class names");
    check(lg_class_count(&c, NULL) == LG_ERR_NULL, "a class count into NULL");
    check(lg_class_count(&never_loaded, &classes) == LG_ERR_NOT_LOADED, "classes of a classifier never loaded");

    int32_t *raw = calloc(n + 1, sizeof *raw);
    check(lg_classify(&c, raw, n + 1, &r) == LG_OK && r.fault == LG_FAULT_COUNT && r.verdict == LG_NOGO,
          "one reading too many: FAULT, NO-GO");
    check(lg_classify(&c, raw, n, NULL) == LG_ERR_NULL, "no result to write to");
    raw[0] = INT32_MIN;
    check(lg_classify(&c, raw, n, &r) == LG_OK && r.fault == LG_FAULT_RANGE && r.channel == 0 &&
              r.raw == INT32_MIN && r.verdict == LG_NOGO,
          "a reading out of range: FAULT on its channel, NO-GO");

    /* The station: lines to NO-GO at once; faults hold NO-GO; the first of a run is marked. */
    static lg_station s, never_station;
    uint8_t key[32] = {0};
    struct bench b = {true, true, INT32_MIN, {true, true, true}, 0};
    check(lg_station_init(&s, blob, len, key, read_all, set_line, &b) == LG_ERR_NO_SIGNING,
          "a release key to a build without signed releases");
    check(lg_station_step(&s, &r) == LG_ERR_NOT_LOADED, "that station does not run");
    check(b.level[LG_LINE_NOGO] && !b.level[LG_LINE_GO], "and its lines hold NO-GO");
    check(lg_station_init(&s, blob, len, NULL, read_all, set_line, &b) == LG_OK, "station set up");
    check(lg_station_step(&s, &r) == LG_OK && r.fault == LG_FAULT_RANGE && r.first, "out of range: first fault");
    check(lg_station_step(&s, &r) == LG_OK && r.fault == LG_FAULT_RANGE && !r.first, "the same fault again: not first");
    check(b.level[LG_LINE_NOGO] && !b.level[LG_LINE_GO] && !b.level[LG_LINE_RECHECK], "NO-GO shown");
    b.sensor_ok = false;
    check(lg_station_step(&s, &r) == LG_OK && r.fault == LG_FAULT_SENSOR && r.first, "a sensor failure: NO-GO");
    b.sensor_ok = true;
    b.lines_ok = false;
    check(lg_station_step(&s, &r) == LG_ERR_LINE, "a line failure is reported");
    check(lg_station_init(&s, bad, 3, NULL, read_all, set_line, &b) == LG_ERR_LINE,
          "no station when the lines cannot be driven");
    b.lines_ok = true;
    check(lg_station_init(&s, bad, 3, NULL, read_all, set_line, &b) == LG_ERR_TRUNCATED,
          "a station on a damaged blob reports why");
    check(lg_station_ids(&s, model_id, &id) == LG_ERR_TRUNCATED, "and has no ids");
    check(lg_station_step(&s, &r) == LG_OK && r.fault == LG_FAULT_BLOB && r.verdict == LG_NOGO,
          "and shows NO-GO every step");
    check(lg_station_step(NULL, &r) == LG_ERR_NULL, "a step with no station");

    /* The field statistics: every step counted, the record into the caller's buffer. */
    lg_field f;
    uint8_t rec[LG_FIELD_RECORD_MAX];
    size_t rec_len = 0;
    check(lg_station_field(&s, &f) == LG_OK && f.units == 1 && f.faults == 1 && f.other_faults == 1 &&
              f.blob_id == 0,
          "a station on a damaged blob counts its step as an other fault, for blob id 0");
    check(lg_station_init(&s, blob, len, NULL, read_all, set_line, &b) == LG_OK, "station set up again");
    lg_field_plan plan = {-1000, 4, {100, 10, 50}, {100, 10, 50}};
    check(lg_station_set_field_plan(&s, &plan) == LG_OK, "a field plan");
    plan.shift = 63;
    check(lg_station_set_field_plan(&s, &plan) == LG_ERR_PLAN, "a bin shift above 62 is refused");
    check(lg_station_set_field_plan(&s, NULL) == LG_ERR_NULL, "no plan");
    check(lg_station_set_field_plan(NULL, &plan) == LG_ERR_NULL, "a plan for no station");
    check(lg_station_step(&s, &r) == LG_OK && r.fault == LG_FAULT_RANGE, "a reading out of range");
    b.sensor_ok = false;
    check(lg_station_step(&s, &r) == LG_OK && r.fault == LG_FAULT_SENSOR, "a sensor failure");
    b.sensor_ok = true;
    check(lg_station_field(&s, &f) == LG_OK && f.units == 2 && f.other_faults == 1 && f.channel_faults[0] == 1 && f.plan.shift == 4 &&
              f.plan.origin == -1000 && f.channels == n && f.blob_id == id,
          "both steps counted under the plan, for the blob's id");
    check(f.go + f.nogo + f.recheck + f.faults == f.units, "the counts add up");
    check(lg_station_field_record(&s, rec, 10, &rec_len) == LG_ERR_BUFFER && rec_len == 288 + 20 * n,
          "a buffer too short: the length needed is given");
    check(lg_station_field_record(&s, rec, sizeof rec, &rec_len) == LG_OK && rec_len == 288 + 20 * n &&
              memcmp(rec, "LGFR", 4) == 0,
          "the record, magic first");
    check(lg_station_field_record(&s, rec, sizeof rec, NULL) == LG_ERR_NULL, "no length to write to");
    check(lg_station_field_record(&never_station, rec, sizeof rec, &rec_len) == LG_ERR_NOT_LOADED,
          "a station never set up has no record");
    check(lg_station_field_reset(&s) == LG_OK && lg_station_field(&s, &f) == LG_OK && f.units == 0 &&
              f.plan.shift == 4,
          "a reset clears the counts and keeps the plan");
    check(lg_station_field_reset(NULL) == LG_ERR_NULL, "a reset of no station");

    /* A model of several classes (the second blob, version 5): names, results, station. */
    if (argc == 3) {
        size_t clen = 0;
        unsigned char *cblob = slurp(argv[2], &clen);
        check(cblob && lg_load(&c, cblob, clen) == LG_OK, "the class blob loads");
        check(lg_class_count(&c, &classes) == LG_OK && classes >= 2 && classes <= 8, "its class count");
        check(lg_class_name(&c, 0, name, sizeof name) == LG_OK && strlen(name) > 0, "its first class's name");
        size_t cneed = strlen(name) + 1;
        check(lg_class_name(&c, 0, name, cneed - 1) == LG_ERR_BUFFER, "a class name without room for its NUL");
        check(lg_class_name(&c, classes, name, sizeof name) == LG_ERR_CLASS, "a class past the last");
        check(lg_class_name(&c, 0, NULL, 8) == LG_ERR_NULL, "a class name into NULL");
        check(lg_channel_count(&c, &n) == LG_OK && n >= 1, "its channel count");
        int32_t *mid = calloc(n, sizeof *mid);
        check(lg_classify(&c, mid, n, &r) == LG_OK && (r.fault != LG_FAULT_NONE || r.class_index < classes),
              "a decision names a class");
        check(lg_classify(&c, mid, n + 1, &r) == LG_OK && r.fault == LG_FAULT_COUNT && r.class_index == LG_NO_CLASS,
              "a fault names none");
        check(lg_station_init(&s, cblob, clen, NULL, read_all, set_line, &b) == LG_OK, "a class station");
        check(lg_station_class_count(&s, &classes) == LG_OK && classes >= 2, "the station's class count");
        check(lg_station_class_name(&s, 0, name, sizeof name) == LG_OK && strlen(name) > 0, "the station's class name");
        check(lg_station_class_name(&s, 8, name, sizeof name) == LG_ERR_CLASS, "the station's class past the last");
        check(lg_station_class_name(&never_station, 0, name, sizeof name) == LG_ERR_NOT_LOADED,
              "class names of a station never set up");
        check(lg_station_class_count(NULL, &classes) == LG_ERR_NULL, "class count of no station");
        check(lg_station_init(&s, bad, 3, NULL, read_all, set_line, &b) == LG_ERR_TRUNCATED &&
                  lg_station_class_count(&s, &classes) == LG_ERR_TRUNCATED,
              "a station on a damaged blob has no classes and says why");
        free(mid);
        free(cblob);
    }

    printf("%d checks failed\n", failures);
    free(raw);
    free(bad);
    free(blob);
    return failures ? 1 : 0;
}
