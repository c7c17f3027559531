/*
 * Misuse of veer's C interface: every call must return its error code and leave a message, and
 * nothing may crash (run under valgrind or a sanitizer by the tests). Prints one line per check;
 * exits 1 at the first check that fails.
 */
#include "veer.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static int failures;

static void expect(const char *what, int32_t got, int32_t want, veer_handle h) {
    char msg[256];
    size_t n = veer_last_error(h, msg, sizeof msg);
    if (got != want || (want < 0 && n == 0)) {
        printf("FAIL %s: got %s, want %s, message \"%s\"\n", what, veer_status_name(got),
               veer_status_name(want), msg);
        failures++;
    } else {
        printf("ok %s: %s%s%s\n", what, veer_status_name(got), want < 0 ? ": " : "", want < 0 ? msg : "");
    }
}

static const char *CONFIG =
    "min_operating_rpm = 5200\n"
    "max_continuous_rpm = 6800\n"
    "tach = { channel = \"tach\" }\n"
    "sensors = [ { channel = \"x\", units = \"um\" }, { channel = \"y\", units = \"um\" } ]\n";

int main(void) {
    veer_handle h = 12345;
    float block[3 * 64];
    for (int i = 0; i < 3 * 64; i++) block[i] = (float)(i % 7);
    const float *planes[3] = {block, block + 64, block + 128};
    veer_result r;
    veer_stats st;
    char buf[16];
    size_t len = 0, n = 0;

    /* Bad configuration strings. */
    expect("null config", veer_create(NULL, &h), VEER_E_NULL, 0);
    if (h != 0) { printf("FAIL handle not zeroed\n"); failures++; }
    expect("null out", veer_create(CONFIG, NULL), VEER_E_NULL, 0);
    expect("not toml", veer_create("tach = [", &h), VEER_E_CONFIG, 0);
    expect("unknown key", veer_create("bogus = 1\n", &h), VEER_E_CONFIG, 0);
    expect("bad unit", veer_create("min_operating_rpm = 5200\nmax_continuous_rpm = 6800\n"
                                   "tach = { channel = \"t\" }\nsensors = [ { channel = \"x\", units = \"furlong\" } ]\n",
                                   &h), VEER_E_CONFIG, 0);
    expect("not utf-8", veer_create("tach = \"\xff\"", &h), VEER_E_ARGUMENT, 0);

    /* Null and made-up handles. */
    expect("push on handle 0", veer_push_f32(0, block, 64, 3, 1000.0, 0.0), VEER_E_HANDLE, 0);
    expect("poll on made-up handle", veer_poll(987654321, &r), VEER_E_HANDLE, 0);
    expect("destroy handle 0", veer_destroy(0), VEER_E_HANDLE, 0);

    expect("create", veer_create(CONFIG, &h), VEER_OK, h);
    expect("channel count", veer_channel_count(h, &n), VEER_OK, h);
    if (n != 3) { printf("FAIL channel count %zu\n", n); failures++; }

    /* Wrong lengths and pointers. */
    expect("null samples", veer_push_f32(h, NULL, 64, 3, 1000.0, 0.0), VEER_E_NULL, h);
    expect("zero frames, null samples", veer_push_f32(h, NULL, 0, 3, 1000.0, 0.0), VEER_OK, h);
    expect("wrong channel count", veer_push_f32(h, block, 32, 2, 1000.0, 0.0), VEER_E_LENGTH, h);
    expect("overflowing length", veer_push_f32(h, block, (size_t)-1, 3, 1000.0, 0.0), VEER_E_LENGTH, h);
    expect("planar, null array", veer_push_f32_planar(h, NULL, 3, 64, 1000.0, 0.0), VEER_E_NULL, h);
    const float *holes[3] = {block, NULL, block};
    expect("planar, null channel", veer_push_f32_planar(h, holes, 3, 64, 1000.0, 0.0), VEER_E_NULL, h);
    expect("planar, wrong count", veer_push_f32_planar(h, planes, 2, 64, 1000.0, 0.0), VEER_E_LENGTH, h);
    expect("zero rate", veer_push_f32(h, block, 64, 3, 0.0, 0.0), VEER_E_ARGUMENT, h);
    expect("NaN rate", veer_push_f32(h, block, 64, 3, NAN, 0.0), VEER_E_ARGUMENT, h);
    expect("infinite timestamp", veer_push_f32(h, block, 64, 3, 1000.0, INFINITY), VEER_E_ARGUMENT, h);
    expect("bad flag", veer_set_revolutions(h, 7), VEER_E_ARGUMENT, h);
    expect("null result", veer_poll(h, NULL), VEER_E_NULL, h);
    expect("null stats", veer_get_stats(h, NULL), VEER_E_NULL, h);

    /* NaN and infinite samples: refused whole. */
    block[3 * 10 + 1] = NAN;
    expect("NaN sample, interleaved", veer_push_f32(h, block, 64, 3, 1000.0, 0.0), VEER_E_NONFINITE, h);
    expect("NaN sample, planar", veer_push_f32_planar(h, planes, 3, 64, 1000.0, 0.0), VEER_E_NONFINITE, h);
    double d[3 * 4] = {0, 0, 0, 1, 1, 1, 1e300, 0, 0, 2, 2, 2};
    expect("f64 beyond float range", veer_push_f64(h, d, 4, 3, 1000.0, 0.0), VEER_E_NONFINITE, h);
    expect("stats after refusals", veer_get_stats(h, &st), VEER_OK, h);
    if (st.frames != 0) { printf("FAIL refused blocks were consumed (%llu frames)\n", (unsigned long long)st.frames); failures++; }
    /* A flat signal from here on: no tach pulses, so the only result is the gap below. */
    for (int i = 0; i < 3 * 64; i++) block[i] = 1.0f;

    /* A good block, then a tiny JSON buffer. */
    expect("good block", veer_push_f32(h, block, 64, 3, 1000.0, 0.0), VEER_OK, h);
    expect("poll with nothing queued", veer_poll_json(h, buf, sizeof buf, &len), 0, h);
    expect("gap is accepted", veer_push_f32(h, block, 64, 3, 1000.0, 5.0), VEER_OK, h);
    expect("json into 16 bytes", veer_poll_json(h, buf, sizeof buf, &len), VEER_E_BUFFER, h);
    if (len <= sizeof buf) { printf("FAIL needed length not reported (%zu)\n", len); failures++; }
    expect("json with null buffer and cap", veer_poll_json(h, NULL, 0, &len), VEER_E_BUFFER, h);
    char *big = malloc(len + 1);
    expect("json into enough bytes", veer_poll_json(h, big, len + 1, &len), 1, h);
    if (!strstr(big, "\"type\":\"gap\"")) { printf("FAIL expected the gap, got %s\n", big); failures++; }
    free(big);
    char tiny[4];
    size_t full = veer_last_error(h, tiny, sizeof tiny);
    if (full < 4 || strlen(tiny) != 3) { printf("FAIL last error not cut to its buffer\n"); failures++; }

    expect("reset", veer_reset(h), VEER_OK, h);
    expect("finish", veer_finish(h), VEER_OK, h);
    expect("destroy", veer_destroy(h), VEER_OK, h);

    /* Calls after destroy. */
    expect("push after destroy", veer_push_f32(h, block, 64, 3, 1000.0, 0.0), VEER_E_HANDLE, h);
    expect("poll after destroy", veer_poll(h, &r), VEER_E_HANDLE, h);
    expect("json after destroy", veer_poll_json(h, buf, sizeof buf, &len), VEER_E_HANDLE, h);
    expect("reset after destroy", veer_reset(h), VEER_E_HANDLE, h);
    expect("destroy twice", veer_destroy(h), VEER_E_HANDLE, h);
    if (strcmp(veer_status_name(-999), "unknown") != 0) { printf("FAIL status name\n"); failures++; }

    printf("%d failure(s)\n", failures);
    return failures ? 1 : 0;
}
