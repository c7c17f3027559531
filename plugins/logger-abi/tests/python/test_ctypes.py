"""veer's C interface through Python's ctypes: a recording pushed in uneven blocks gives the same
events as `veer analyze --json`, and misuse gives error codes, never a crash.

    python3 test_ctypes.py LIBRARY CONFIG.toml RECORDING.csv ANALYSIS.json
"""
import ctypes as C
import csv
import json
import math
import sys

VEER_E_HANDLE, VEER_E_NONFINITE, VEER_E_LENGTH, VEER_E_BUFFER = -1, -5, -4, -7


def load(path):
    lib = C.CDLL(path)
    lib.veer_abi_version.restype = C.c_uint32
    lib.veer_create.argtypes = [C.c_char_p, C.POINTER(C.c_uint64)]
    lib.veer_destroy.argtypes = [C.c_uint64]
    lib.veer_finish.argtypes = [C.c_uint64]
    lib.veer_channel_count.argtypes = [C.c_uint64, C.POINTER(C.c_size_t)]
    lib.veer_push_f64.argtypes = [C.c_uint64, C.POINTER(C.c_double), C.c_size_t, C.c_size_t,
                                  C.c_double, C.c_double]
    lib.veer_poll_json.argtypes = [C.c_uint64, C.c_char_p, C.c_size_t, C.POINTER(C.c_size_t)]
    lib.veer_last_error.argtypes = [C.c_uint64, C.c_char_p, C.c_size_t]
    lib.veer_last_error.restype = C.c_size_t
    for f in (lib.veer_create, lib.veer_destroy, lib.veer_finish, lib.veer_channel_count,
              lib.veer_push_f64, lib.veer_poll_json):
        f.restype = C.c_int32
    return lib


def last_error(lib, h):
    buf = C.create_string_buffer(512)
    lib.veer_last_error(h, buf, len(buf))
    return buf.value.decode()


def drain(lib, h, out):
    """Every waiting result as a parsed JSON object."""
    buf = C.create_string_buffer(256)
    n = C.c_size_t(0)
    while True:
        r = lib.veer_poll_json(h, buf, len(buf), C.byref(n))
        if r == VEER_E_BUFFER:
            buf = C.create_string_buffer(n.value + 1)
            continue
        assert r >= 0, last_error(lib, h)
        if r == 0:
            return
        out.append(json.loads(buf.value.decode()))


def main():
    lib_path, config_path, csv_path, analysis_path = sys.argv[1:5]
    lib = load(lib_path)
    assert lib.veer_abi_version() >> 16 == 1
    config = open(config_path, "rb").read()
    with open(csv_path) as f:
        rows = list(csv.reader(f))
    header, rows = rows[0], rows[1:]
    rate, t0 = 4096.0, float(rows[0][0])
    frames = [[float(x) for x in r[1:]] for r in rows]
    n_ch = len(header) - 1

    h = C.c_uint64(0)
    assert lib.veer_create(config, C.byref(h)) == 0, last_error(lib, 0)
    count = C.c_size_t(0)
    lib.veer_channel_count(h, C.byref(count))
    assert count.value == n_ch

    results, at, k = [], 0, 0
    sizes = [5000, 1, 333, 20000, 7, 4096]
    while at < len(frames):
        n = min(sizes[k % len(sizes)], len(frames) - at)
        k += 1
        flat = (C.c_double * (n * n_ch))(*[x for fr in frames[at:at + n] for x in fr])
        r = lib.veer_push_f64(h, flat, n, n_ch, rate, t0 + at / rate)
        assert r == 0, last_error(lib, h)
        at += n
        drain(lib, h, results)
    assert lib.veer_finish(h) == 0
    drain(lib, h, results)

    events = [{k: v for k, v in e.items() if k != "type"} for e in results if e["type"] == "event"]
    want = json.load(open(analysis_path))["events"]
    assert events == want, "events differ:\n%s\n%s" % (events, want)
    assert sum(1 for e in results if e["type"] == "revolution") > 1000

    # Misuse: codes and messages, no crash.
    bad = (C.c_double * 6)(1.0, 2.0, math.nan, 0.0, 0.0, 0.0)
    assert lib.veer_push_f64(h, bad, 2, n_ch, rate, 0.0) == VEER_E_NONFINITE
    assert "NaN" in last_error(lib, h)
    assert lib.veer_push_f64(h, bad, 3, 2, rate, 0.0) == VEER_E_LENGTH
    assert lib.veer_destroy(h) == 0
    assert lib.veer_push_f64(h, bad, 2, n_ch, rate, 0.0) == VEER_E_HANDLE
    assert "not open" in last_error(lib, h)
    assert lib.veer_destroy(h) == VEER_E_HANDLE
    print("python ctypes: %d events equal to veer analyze, %d results" % (len(events), len(results)))


if __name__ == "__main__":
    main()
