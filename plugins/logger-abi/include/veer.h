/*
 * veer.h: the C interface of veer's order-tracking engine, for data loggers' host programs.
 *
 * Link with -lveer_abi (libveer_abi.so / libveer_abi.a; the static library also needs -lpthread
 * -ldl -lm). A test of the library checks that every declaration here matches an exported function.
 *
 * VERSIONING. veer_abi_version() returns (MAJOR << 16) | MINOR. The MAJOR version changes with
 * anything that can break a caller compiled against an older header: a function removed or its
 * parameters changed, a struct field added, removed or moved, a constant's value changed. The
 * MINOR version changes with additions an old caller never sees: new functions, new status codes,
 * new result kinds (an old caller must skip kinds it does not know). Check at start-up that the
 * library's MAJOR equals VEER_ABI_VERSION_MAJOR and its MINOR is at least the header's.
 *
 * CHANNELS. Every block carries the tach first, then the sensors in the order the configuration
 * lists them: n_channels = 1 + number of sensors (veer_channel_count tells).
 *
 * TIME. A block comes with its sample rate and the time of its first sample, in seconds on the
 * logger's clock. The engine starts at the first block. A later block whose rate differs, or
 * whose timestamp is more than 2 sample periods from where the previous block ended, is a break:
 * the engine is finished (an open run-up or coast-down is closed and reported), a VEER_RESULT_GAP
 * result is queued, and a new engine starts at that block. Give sample-exact timestamps (start
 * time + sample index / rate).
 *
 * ERRORS. Functions return a status: VEER_OK (0) or a positive count on success, a negative
 * VEER_E_* code on failure. The message of the last failed call is kept per handle and per
 * thread: veer_last_error(h, ...) (or with h = 0 for calls that have no handle, such as a failed
 * veer_create). Success does not clear it. A refused call changes nothing: a block with a NaN is
 * not consumed at all, a result that does not fit the caller's buffer stays queued. No Rust panic
 * crosses this interface: a fault inside the library returns VEER_E_INTERNAL and the handle then
 * refuses calls until veer_reset or veer_destroy.
 *
 * HANDLES. A veer_handle is a number, not a pointer: 0 is never a handle, handles are never
 * reused within a process, and a call with a destroyed or made-up handle returns VEER_E_HANDLE.
 *
 * THREADS. Every function may be called from any thread. Calls on one handle are serialised by a
 * lock inside the library (results come out in order, whoever polls); different handles run in
 * parallel. veer_destroy on one thread while another thread is inside a call on the same handle is
 * allowed: that call completes, later ones get VEER_E_HANDLE. The library starts no threads and
 * never calls back.
 *
 * BUFFERS. Every pointer passed in belongs to the caller and is only read (or written, for
 * outputs) during the call: the library copies what it keeps and holds no pointer after it
 * returns. Input arrays must hold the number of elements their length arguments say and must not
 * change during the call; a length of 0 allows a null pointer. Output arrays need room for their
 * stated capacity. Strings are NUL-terminated UTF-8. Strings returned by veer_status_name are
 * static and must not be freed.
 */
#ifndef VEER_H
#define VEER_H

#include <stddef.h>
#include <stdint.h>

#ifdef __cplusplus
extern "C" {
#endif

#define VEER_ABI_VERSION_MAJOR 1
#define VEER_ABI_VERSION_MINOR 0

/* Status codes. */
#define VEER_OK 0
#define VEER_E_HANDLE (-1)    /* handle 0, destroyed, or never created */
#define VEER_E_NULL (-2)      /* a required pointer was null */
#define VEER_E_CONFIG (-3)    /* the configuration string was refused (the message names the key) */
#define VEER_E_LENGTH (-4)    /* channel count or block length does not fit */
#define VEER_E_NONFINITE (-5) /* a sample was NaN or infinite; the block was refused whole */
#define VEER_E_ARGUMENT (-6)  /* sample rate, timestamp or flag out of range */
#define VEER_E_BUFFER (-7)    /* a caller's buffer is too small; sizes written, nothing consumed */
#define VEER_E_INTERNAL (-8)  /* a fault inside the library; reset or destroy the handle */

/* Result kinds (veer_result.kind). */
#define VEER_RESULT_REVOLUTION 1 /* nX vectors of one revolution (or block of revolutions) */
#define VEER_RESULT_STATE 2      /* machine state changed */
#define VEER_RESULT_EVENT 3      /* a run-up or coast-down finished, with its criticals */
#define VEER_RESULT_TACH_LOST 4  /* the tach pulses stopped */
#define VEER_RESULT_GAP 5        /* a break in the data; the engine started again */

/* Machine states (veer_result.state, from_state). */
#define VEER_STATE_STOPPED 0
#define VEER_STATE_SLOW_ROLL 1
#define VEER_STATE_SPEEDING_UP 2
#define VEER_STATE_STEADY 3
#define VEER_STATE_SLOWING_DOWN 4

/* Event kinds (veer_result.event_kind). */
#define VEER_EVENT_RUN_UP 1
#define VEER_EVENT_COAST_DOWN 2

/* Critical flags (veer_critical.flags). */
#define VEER_CRITICAL_HEAVILY_DAMPED 1u /* AF below the heavily-damped limit */
#define VEER_CRITICAL_FIT 2u            /* fit_natural_rpm and fit_damping_ratio are set */
#define VEER_CRITICAL_MARGIN 4u         /* the margin_* fields are set */

/* Where a critical lies against the operating range (veer_critical.margin_side). */
#define VEER_SIDE_NONE 0
#define VEER_SIDE_BELOW 1
#define VEER_SIDE_INSIDE 2
#define VEER_SIDE_ABOVE 3

/* Separation-margin verdicts (veer_critical.margin_verdict). */
#define VEER_VERDICT_NONE 0
#define VEER_VERDICT_NOT_REQUIRED 1 /* API rule, AF below 2.5: no margin applies */
#define VEER_VERDICT_CLEAR 2
#define VEER_VERDICT_WARNING 3 /* met, but within the warning band */
#define VEER_VERDICT_ALARM 4   /* not met, or inside the operating range */

/* A handle to an open tracker. 0 is never a handle. */
typedef uint64_t veer_handle;

/* One nX vector of one sensor. Amplitudes in the sensor's display unit and detection. */
typedef struct veer_vector {
    uint32_t channel;  /* sensor index, 0-based, in configured order */
    uint32_t order;    /* 1 for 1X */
    double amplitude;
    double phase_deg;  /* phase lag, [0, 360) */
    double re;         /* the phasor itself */
    double im;
} veer_vector;

/* One critical speed of an event. Figures the analysis could not give are NaN. */
typedef struct veer_critical {
    uint32_t channel; /* sensor index, 0-based */
    uint32_t flags;   /* VEER_CRITICAL_* */
    double speed_rpm;
    double peak_amplitude;
    double phase_deg;
    double amplification_factor; /* half-power method; NaN when not measurable */
    double damping_ratio;
    double phase_change_deg;
    double n1_rpm; /* half-power speeds */
    double n2_rpm;
    double fit_natural_rpm; /* single-mode fit */
    double fit_damping_ratio;
    int32_t margin_side;    /* VEER_SIDE_* */
    int32_t margin_verdict; /* VEER_VERDICT_* */
    double required_margin_pct;
    double actual_margin_pct; /* negative inside the operating range */
} veer_critical;

/*
 * One result. Zero it, then set vectors/vectors_cap and criticals/criticals_cap to arrays of
 * your own (or leave them NULL and 0); veer_poll writes every other field. n_vectors and
 * n_criticals say how many the result has; when that is more than the capacity, veer_poll returns
 * VEER_E_BUFFER and leaves the result queued, so grow the array and poll again.
 */
typedef struct veer_result {
    int32_t kind;       /* VEER_RESULT_* */
    int32_t state;      /* revolution: state after it; state change: new state; else -1 */
    int32_t from_state; /* state change: state left; else -1 */
    int32_t event_kind; /* event: VEER_EVENT_*; else 0 */
    double time_s;      /* revolution: mid-time; state: start of the new state; event: end;
                           tach lost: when; gap: the new block's timestamp */
    double speed_rpm;   /* revolution: mean speed; state: speed at the change; event: end speed */
    double start_s;     /* event: start time; gap: where the data would have continued; else NaN */
    double speed_start_rpm;  /* event; else NaN */
    double sweep_rate_rpm_s; /* event (negative on a coast-down); else NaN */
    veer_vector *vectors;    /* caller's array */
    size_t vectors_cap;
    size_t n_vectors;        /* channels x orders, for a revolution */
    veer_critical *criticals; /* caller's array */
    size_t criticals_cap;
    size_t n_criticals;      /* all sensors' criticals, for an event */
} veer_result;

/* Counters of a tracker. */
typedef struct veer_stats {
    uint64_t frames;          /* frames accepted since creation or reset */
    uint64_t revolutions;     /* since the last break in the data */
    uint64_t vectors;
    uint64_t pulses;
    uint64_t pulses_inserted;
    uint64_t pulses_dropped;
    uint64_t tach_losses;
    uint64_t gaps;            /* breaks in the data since creation or reset */
    uint64_t results_dropped; /* revolution results dropped: nobody polled 65536 results */
    uint64_t pending;         /* results waiting */
} veer_stats;

/* (MAJOR << 16) | MINOR of the library. */
uint32_t veer_abi_version(void);

/* Name of a status code ("VEER_E_LENGTH"), static. */
const char *veer_status_name(int32_t code);

/*
 * Creates a tracker. config: one machine's section of veer's TOML configuration (tach, sensors,
 * min_operating_rpm, max_continuous_rpm, trip_rpm, [tracking], [alerts] margin and warn_band_pct;
 * the daemon's other keys are accepted and ignored), at top level or as a single [[machine]].
 * Writes the handle to *out (0 on failure; see veer_last_error(0, ...)).
 */
int32_t veer_create(const char *config, veer_handle *out);

/* Closes a handle. Destroying it twice returns VEER_E_HANDLE. */
int32_t veer_destroy(veer_handle h);

/* Forgets data and results, keeps the configuration; also clears an internal fault. */
int32_t veer_reset(veer_handle h);

/* Ends the data: an open run-up or coast-down is closed and its event queued. */
int32_t veer_finish(veer_handle h);

/* Per-revolution results on (1, the default) or off (0). */
int32_t veer_set_revolutions(veer_handle h, int32_t on);

/* Channels per block: 1 (tach) + sensors. */
int32_t veer_channel_count(veer_handle h, size_t *out);

/* Interleaved frames: samples[frame * n_channels + channel], n_frames * n_channels values. */
int32_t veer_push_f32(veer_handle h, const float *samples, size_t n_frames, size_t n_channels,
                      double sample_rate, double t0);
int32_t veer_push_f64(veer_handle h, const double *samples, size_t n_frames, size_t n_channels,
                      double sample_rate, double t0);

/* One buffer per channel: channels[c][frame], channels[0] the tach. */
int32_t veer_push_f32_planar(veer_handle h, const float *const *channels, size_t n_channels,
                             size_t n_frames, double sample_rate, double t0);
int32_t veer_push_f64_planar(veer_handle h, const double *const *channels, size_t n_channels,
                             size_t n_frames, double sample_rate, double t0);

/* Takes the next result: returns 1 if *out was written, 0 if none is waiting. */
int32_t veer_poll(veer_handle h, veer_result *out);

/*
 * Takes the next result as one JSON object on one line, NUL-terminated, no newline: returns 1 if
 * written, 0 if none is waiting. *len (len may be NULL) receives the length without the NUL; when
 * cap is too small the call returns VEER_E_BUFFER with *len set and the result stays queued.
 */
int32_t veer_poll_json(veer_handle h, char *buf, size_t cap, size_t *len);

/* Counters. */
int32_t veer_get_stats(veer_handle h, veer_stats *out);

/*
 * Copies the last failed call's message (for h, or for this thread when h is 0 or not open) into
 * buf, cut to cap - 1 bytes and NUL-terminated; returns the full length without the NUL.
 */
size_t veer_last_error(veer_handle h, char *buf, size_t cap);

#ifdef __cplusplus
}
#endif

#endif /* VEER_H */
