/*
 * Reads a CSV recording (time, tach, sensors...), pushes it through veer's C interface in uneven
 * block sizes and prints the results.
 *
 *   roundtrip CONFIG.toml RECORDING.csv RATE PUSH POLL
 *
 * PUSH: f32 | f64 (interleaved) | f32p | f64p (one buffer per channel).
 * POLL: json (every result as its JSON line) | struct (one line per critical, from the structs).
 * The last line is "summary revolutions=N states=N events=N".
 */
#include "veer.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static void die(veer_handle h, const char *what, int32_t code) {
    char msg[512];
    veer_last_error(h, msg, sizeof msg);
    fprintf(stderr, "%s: %s (%s)\n", what, veer_status_name(code), msg);
    exit(1);
}

static char *read_file(const char *path) {
    FILE *f = fopen(path, "rb");
    if (!f) { perror(path); exit(1); }
    fseek(f, 0, SEEK_END);
    long n = ftell(f);
    fseek(f, 0, SEEK_SET);
    char *buf = malloc((size_t)n + 1);
    if (!buf || fread(buf, 1, (size_t)n, f) != (size_t)n) { fprintf(stderr, "read %s\n", path); exit(1); }
    buf[n] = 0;
    fclose(f);
    return buf;
}

/* Samples as float, channel-major: data[c * frames + i]; column 0 (time) is dropped. */
static float *read_csv(const char *path, size_t *frames_out, size_t *channels_out, double *t0_out) {
    char *text = read_file(path);
    char *line = strtok(text, "\n");
    size_t cols = 1;
    for (char *p = line; *p; p++) cols += (*p == ',');
    size_t channels = cols - 1, cap = 1 << 16, frames = 0;
    float *rows = malloc(cap * channels * sizeof(float));
    *t0_out = 0.0;
    while ((line = strtok(NULL, "\n")) != NULL) {
        if (frames == cap) { cap *= 2; rows = realloc(rows, cap * channels * sizeof(float)); }
        char *p = line, *end;
        double t = strtod(p, &end);
        if (frames == 0) *t0_out = t;
        p = end;
        for (size_t c = 0; c < channels; c++) {
            if (*p == ',') p++;
            /* strtof rounds the decimal straight to float, as the CSV reader of veer analyze does. */
            rows[frames * channels + c] = strtof(p, &end);
            p = end;
        }
        frames++;
    }
    float *data = malloc(frames * channels * sizeof(float));
    for (size_t i = 0; i < frames; i++)
        for (size_t c = 0; c < channels; c++) data[c * frames + i] = rows[i * channels + c];
    free(rows);
    free(text);
    *frames_out = frames;
    *channels_out = channels;
    return data;
}

static long revolutions, states, events;

static void drain_json(veer_handle h) {
    size_t cap = 64, len = 0;
    char *buf = malloc(cap);
    for (;;) {
        int32_t r = veer_poll_json(h, buf, cap, &len);
        if (r == VEER_E_BUFFER) { /* grow and retry: the result stayed queued */
            cap = len + 1;
            buf = realloc(buf, cap);
            continue;
        }
        if (r < 0) die(h, "veer_poll_json", r);
        if (r == 0) break;
        if (strlen(buf) != len) { fprintf(stderr, "length mismatch\n"); exit(1); }
        if (strstr(buf, "\"type\":\"revolution\"")) revolutions++;
        if (strstr(buf, "\"type\":\"state\"")) states++;
        if (strstr(buf, "\"type\":\"event\"")) events++;
        printf("%s\n", buf);
    }
    free(buf);
}

static void drain_struct(veer_handle h) {
    veer_vector *vectors = NULL;
    veer_critical *crits = NULL;
    size_t vcap = 0, ccap = 0;
    for (;;) {
        veer_result r;
        memset(&r, 0, sizeof r);
        r.vectors = vectors; r.vectors_cap = vcap;
        r.criticals = crits; r.criticals_cap = ccap;
        int32_t s = veer_poll(h, &r);
        if (s == VEER_E_BUFFER) {
            if (r.n_vectors > vcap) { vcap = r.n_vectors; vectors = realloc(vectors, vcap * sizeof *vectors); }
            if (r.n_criticals > ccap) { ccap = r.n_criticals; crits = realloc(crits, ccap * sizeof *crits); }
            continue;
        }
        if (s < 0) die(h, "veer_poll", s);
        if (s == 0) break;
        if (r.kind == VEER_RESULT_REVOLUTION) {
            revolutions++;
            if (r.n_vectors == 0 || !(r.speed_rpm > 0) || r.vectors[0].order == 0) {
                fprintf(stderr, "bad revolution\n"); exit(1);
            }
        } else if (r.kind == VEER_RESULT_STATE) {
            states++;
        } else if (r.kind == VEER_RESULT_EVENT) {
            events++;
            printf("event %s %.3f %.3f %.1f %.1f\n",
                   r.event_kind == VEER_EVENT_RUN_UP ? "run-up" : "coast-down",
                   r.start_s, r.time_s, r.speed_start_rpm, r.speed_rpm);
            for (size_t i = 0; i < r.n_criticals; i++) {
                const veer_critical *c = &r.criticals[i];
                printf("critical %u %.1f %.2f %.4f %.2f %.2f\n", c->channel, c->speed_rpm,
                       c->amplification_factor, c->damping_ratio, c->required_margin_pct,
                       c->actual_margin_pct);
            }
        }
    }
    free(vectors);
    free(crits);
}

int main(int argc, char **argv) {
    if (argc != 6) { fprintf(stderr, "usage: roundtrip CONFIG CSV RATE PUSH POLL\n"); return 2; }
    if ((veer_abi_version() >> 16) != VEER_ABI_VERSION_MAJOR) { fprintf(stderr, "ABI major mismatch\n"); return 1; }
    char *config = read_file(argv[1]);
    double rate = strtod(argv[3], NULL), t0;
    const char *push = argv[4];
    int json = strcmp(argv[5], "json") == 0;
    size_t frames, channels;
    float *data = read_csv(argv[2], &frames, &channels, &t0);

    veer_handle h = 0;
    int32_t s = veer_create(config, &h);
    if (s != VEER_OK) die(0, "veer_create", s);
    free(config);
    size_t want = 0;
    veer_channel_count(h, &want);
    if (want != channels) { fprintf(stderr, "CSV has %zu channels, tracker wants %zu\n", channels, want); return 1; }

    static const size_t sizes[] = {1, 4096, 17, 1000, 3, 65536, 250, 7919, 2, 12345};
    size_t at = 0, k = 0;
    float *inter32 = malloc(70000 * channels * sizeof(float));
    double *inter64 = malloc(70000 * channels * sizeof(double));
    double **plan64 = malloc(channels * sizeof(double *));
    const float **plan32 = malloc(channels * sizeof(float *));
    for (size_t c = 0; c < channels; c++) plan64[c] = malloc(70000 * sizeof(double));
    while (at < frames) {
        size_t n = sizes[k++ % (sizeof sizes / sizeof sizes[0])];
        if (n > frames - at) n = frames - at;
        double t = t0 + (double)at / rate;
        if (strcmp(push, "f32") == 0) {
            for (size_t i = 0; i < n; i++)
                for (size_t c = 0; c < channels; c++) inter32[i * channels + c] = data[c * frames + at + i];
            s = veer_push_f32(h, inter32, n, channels, rate, t);
        } else if (strcmp(push, "f64") == 0) {
            for (size_t i = 0; i < n; i++)
                for (size_t c = 0; c < channels; c++) inter64[i * channels + c] = data[c * frames + at + i];
            s = veer_push_f64(h, inter64, n, channels, rate, t);
        } else if (strcmp(push, "f32p") == 0) {
            for (size_t c = 0; c < channels; c++) plan32[c] = data + c * frames + at;
            s = veer_push_f32_planar(h, plan32, channels, n, rate, t);
        } else {
            for (size_t c = 0; c < channels; c++)
                for (size_t i = 0; i < n; i++) plan64[c][i] = data[c * frames + at + i];
            s = veer_push_f64_planar(h, (const double *const *)plan64, channels, n, rate, t);
        }
        if (s != VEER_OK) die(h, "push", s);
        at += n;
        if (json) drain_json(h); else drain_struct(h);
    }
    s = veer_finish(h);
    if (s != VEER_OK) die(h, "veer_finish", s);
    if (json) drain_json(h); else drain_struct(h);
    veer_stats st;
    veer_get_stats(h, &st);
    if (st.frames != frames) { fprintf(stderr, "stats: %llu frames\n", (unsigned long long)st.frames); return 1; }
    if (veer_destroy(h) != VEER_OK) die(h, "veer_destroy", -1);
    printf("summary revolutions=%ld states=%ld events=%ld\n", revolutions, states, events);
    for (size_t c = 0; c < channels; c++) free(plan64[c]);
    free(plan64); free(plan32); free(inter32); free(inter64); free(data);
    return 0;
}
