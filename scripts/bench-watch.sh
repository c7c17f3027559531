#!/usr/bin/env bash
# Load figures of the watch daemon (`veer watch`) on a machine with 16 vibration channels and a
# tach at 51.2 kHz. Not a test and not for CI: it runs for about 25 minutes of wall time (the
# soak alone plays 1 hour of data in 10 minutes).
#
#   scripts/bench-watch.sh            # everything
#   ONLY="stream alert" scripts/bench-watch.sh
#
# What it measures, each printed as one `bench-watch:` line, then a summary:
#   stream   a 2-minute recording played in real time through a pseudo-terminal into a serial
#            source: the daemon's CPU share (process utime + stime over the wall time of the
#            feed, % of one core, with the split by thread), whether anything fell behind (gap
#            rows, the span of stored data against the stream, lateness of the feed's writes,
#            CPU still used after the last write).
#   folder   the same recording as a WAV file renamed into a watched folder: time from the drop
#            to the ingest row's `done`, as a multiple of real time; vector rows stored per second
#            of the writer thread's CPU time and per second end to end.
#   storage  `cargo bench -p veer-storage` (vector rows per second in 1000-row transactions).
#   soak     the recording played over and over (frame index carried on) for SOAK_WALL_S seconds
#            at SOAK_SPEED times real time: the daemon's resident memory sampled every second,
#            start, median, max and the slope of a straight-line fit, MB per hour.
#   alert    a steady machine whose speed creeps toward its criticals (several design criticals,
#            so that one creep crosses several thresholds; delay_s = 0): latency of each alert
#            = time its line appeared in alerts.jsonl - time the frame at the alert's time_s was
#            written to the pseudo-terminal (and, second figure, - time the last frame of the
#            speed bucket the rule judged was written). Median and max, for each drift window in
#            ALERT_WINDOWS (minutes; default "60 5"), since the window sets the bucket length.
#
# Settings (environment): CHANNELS (16), RATE (51200), SOAK_WALL_S (600), SOAK_SPEED (6), ALERT_WINDOWS ("60 5"),
# ONLY (all parts), BENCH_DIR (target/bench-watch; recordings of about 0.4 GB each are kept there
# for reruns unless CLEAN=1), VEER (a veer binary to use instead of building one).
# Needs python3 (standard library only) and sqlite3.
set -euo pipefail
cd "$(dirname "$0")/.."
root=$(pwd)
CHANNELS=${CHANNELS:-16}
RATE=${RATE:-51200}
SOAK_WALL_S=${SOAK_WALL_S:-600}
SOAK_SPEED=${SOAK_SPEED:-6}
ONLY=${ONLY:-"stream folder storage soak alert"}
work=${BENCH_DIR:-target/bench-watch}
mkdir -p "$work"
work=$(cd "$work" && pwd)
if [ -z "${VEER:-}" ]; then
    cargo build --release --quiet -p veer
    VEER=${CARGO_TARGET_DIR:-$root/target}/release/veer
fi
py=python3
summary=()
say() {
    set -- "$* [load average $(cut -d' ' -f1-3 /proc/loadavg)]"
    echo "bench-watch: $*"
    summary+=("$*")
}
wants() { [[ " $ONLY " == *" $1 "* ]]; }

# Background processes of this script, ended by their ids when it exits.
pids=()
cleanup() {
    for p in "${pids[@]}"; do
        kill "$p" 2>/dev/null || true
    done
}
trap cleanup EXIT

echo "bench-watch: host $(nproc) cores, $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | sed 's/^ //')"

# --- recordings -----------------------------------------------------------------------------
# A run-up, a short hold and a coast-down in two minutes, beginning and ending at 400 r/min so
# that the soak can play it back to back.
profile="0:400,10:400,50:6200,70:6200,120:400"
# Steady at 5150 r/min for 20 s, then a creep of 1 r/min per second (0.02 %/s, well inside what
# the state tracker still calls steady) down to 5000 r/min.
alert_profile="0:5150,20:5150,170:5000"
sim() {
    local out=$1
    shift
    if [ ! -f "$out" ]; then
        local t0=$SECONDS
        "$VEER" simulate --machine comp-3 --channels "$CHANNELS" --rate "$RATE" --out "$out" "$@" 2>&1 |
            sed 's/^/  /'
        echo "  (simulated in $((SECONDS - t0)) s)"
    fi
}
if wants stream || wants soak; then sim "$work/rec.frames" --profile "$profile" --serial frames; fi
if wants folder; then sim "$work/rec.wav" --profile "$profile"; fi
if wants alert; then sim "$work/alert.frames" --profile "$alert_profile" --serial frames; fi

channel_list() {
    local i
    printf '"tach"'
    for i in $(seq 1 "$CHANNELS"); do printf ', "ch%02d"' "$i"; done
}
sensor_list() {
    local i
    for i in $(seq 1 "$CHANNELS"); do
        printf '  { channel = "ch%02d", kind = "displacement", units = "um", angle_deg = %s },\n' \
            "$i" "$($py -c "print(round((45 + 360 * ($i - 1) / $CHANNELS) % 360, 6))")"
    done
}
# write_config DIR SOURCE CRITICALS ALERTS
write_config() {
    cat >"$1/plant.toml" <<EOF
database = "veer.db"

[daemon]
trend_interval_s = 10

[[machine]]
id = "bench"
name = "Bench rotor with $CHANNELS probes"
min_operating_rpm = 4800
max_continuous_rpm = 6800
source = $2
tach = { channel = "tach", ppr = 1 }
sensors = [
$(sensor_list)
]
criticals = [ $3 ]

[machine.alerts]
$4
outputs = [ { kind = "jsonl", path = "alerts.jsonl" } ]
EOF
}
default_crit='{ rpm = 2900, af = 7.1, origin = "design" }'
serial_source() {
    echo "{ kind = \"serial\", port = \"$1\", baud = 4000000, format = \"frames\", sample_rate = $RATE, channels = [ $(channel_list) ] }"
}

# wait_for FILE PATTERN SECONDS: waits until a line of FILE matches.
wait_for() {
    local i
    for i in $(seq 1 $(($3 * 20))); do
        if grep -q "$2" "$1" 2>/dev/null; then return 0; fi
        sleep 0.05
    done
    echo "bench-watch: gave up waiting for '$2' in $1" >&2
    tail -20 "$1" >&2 || true
    return 1
}

# run_stream DIR FRAMES [feeder options...]: plays FRAMES into a serial source; leaves feed.json,
# proc.jsonl, daemon.log and veer.db in DIR.
run_stream() {
    local dir=$1 frames=$2
    shift 2
    rm -rf "$dir"
    mkdir -p "$dir"
    write_config "$dir" "$(serial_source "$dir/tty")" "${CRITICALS:-$default_crit}" "${ALERTS:-}"
    $py scripts/pty_feed.py --file "$frames" --link "$dir/tty" --go "$dir/go" --linger-s 3 "$@" \
        >"$dir/feed.json" &
    local feeder=$!
    pids+=("$feeder")
    for _ in $(seq 1 200); do [ -L "$dir/tty" ] && break; sleep 0.05; done
    "$VEER" watch --config "$dir/plant.toml" 2>"$dir/daemon.log" &
    local daemon=$!
    pids+=("$daemon")
    wait_for "$dir/daemon.log" "serial port open" 20
    $py scripts/proc_sample.py "$daemon" "$dir/proc.jsonl" --stop "$dir/stop" &
    local sampler=$!
    pids+=("$sampler")
    sleep 1
    touch "$dir/go"
    wait "$feeder"
    touch "$dir/stop"
    wait "$sampler"
    kill -TERM "$daemon"
    wait "$daemon" || echo "bench-watch: the daemon exited with status $?" >&2
}

# --- 1. stream keep-up ----------------------------------------------------------------------
if wants stream; then
    echo "bench-watch: stream: 120 s of $CHANNELS channels + tach at $RATE Hz through a pseudo-terminal, real time"
    d=$work/stream
    run_stream "$d" "$work/rec.frames"
    line=$($py - "$d" <<'EOF'
import json, sqlite3, statistics, sys
d = sys.argv[1]
feed = json.load(open(f"{d}/feed.json"))
samples = [json.loads(l) for l in open(f"{d}/proc.jsonl")]
hz = samples[0]["tick_hz"]
def at(t):
    return min(samples, key=lambda s: abs(s["t"] - t))
a, b = at(feed["start"]), at(feed["end"])
share = (b["ticks"] - a["ticks"]) / hz / (b["t"] - a["t"]) * 100
threads = {k: (b["threads"].get(k, 0) - a["threads"].get(k, 0)) / hz / (b["t"] - a["t"]) * 100
           for k in b["threads"]}
split = ", ".join(f"{k} {v:.1f} %" for k, v in sorted(threads.items(), key=lambda kv: -kv[1]) if v >= 0.5)
tail = samples[-1]
after = (tail["ticks"] - b["ticks"]) / hz
db = sqlite3.connect(f"file:{d}/veer.db?mode=ro", uri=True)
gaps = db.execute("select count(*), coalesce(sum(dropped_frames), 0) from gap").fetchone()
segs = db.execute("select count(*), min(data_start), max(data_end) from ingest where kind = 'stream'").fetchone()
vectors = db.execute("select count(*) from vector").fetchone()[0]
events = db.execute("select count(*) from event").fetchone()[0]
trend = db.execute("select count(*) from trend").fetchone()[0]
span = (segs[2] or 0) - (segs[1] or 0)
ok = gaps[0] == 0 and segs[0] == 1 and abs(span - feed["data_s"]) < 0.05 and feed["max_lag_s"] < 0.1
print(f"stream: CPU {share:.1f} % of one core over {b['t'] - a['t']:.0f} s of real-time feed "
      f"({feed['bytes'] / feed['wall_s'] / 1e6:.2f} MB/s; {split}); CPU after the last write "
      f"{after:.2f} s; gaps {gaps[0]} ({gaps[1]} frames); stream segments {segs[0]}, stored span "
      f"{span:.3f} s of {feed['data_s']:.3f} s sent; feed lateness max {feed['max_lag_s'] * 1e3:.1f} ms, "
      f"{feed['late_writes']} writes > 50 ms late; stored {events} events, {vectors} vector rows, "
      f"{trend} trend rows; {'kept up' if ok else 'FELL BEHIND or lost data'}")
EOF
)
    say "$line"
fi

# --- 2. folder throughput, 3. vector rows per second -----------------------------------------
if wants folder; then
    echo "bench-watch: folder: the same recording as a $(du -h "$work/rec.wav" | cut -f1) WAV renamed into a watched folder"
    d=$work/folder
    rm -rf "$d"
    mkdir -p "$d/incoming"
    write_config "$d" '{ kind = "folder", path = "incoming", settle_s = 0 }' "$default_crit" ""
    "$VEER" watch --config "$d/plant.toml" 2>"$d/daemon.log" &
    daemon=$!
    pids+=("$daemon")
    wait_for "$d/daemon.log" "watching" 20
    $py scripts/proc_sample.py "$daemon" "$d/proc.jsonl" --interval 0.1 --stop "$d/stop" &
    sampler=$!
    pids+=("$sampler")
    # Copied under a hidden name first (ignored), so the drop is the rename alone.
    cp "$work/rec.wav" "$d/incoming/.rec.wav.part"
    sleep 1
    line=$($py - "$d" <<'EOF'
import os, sqlite3, sys, time
d = sys.argv[1]
t_drop = time.time()
os.rename(f"{d}/incoming/.rec.wav.part", f"{d}/incoming/rec_20250101T000000Z.wav")
while True:
    try:
        db = sqlite3.connect(f"file:{d}/veer.db?mode=ro", uri=True)
        r = db.execute("select status from ingest where kind = 'file'").fetchone()
        db.close()
        if r and r[0] != "pending":
            break
    except sqlite3.Error:
        pass
    time.sleep(0.01)
    if time.time() - t_drop > 600:
        break
t_done = time.time()
print(f"{t_drop:.6f} {t_done:.6f}")
EOF
)
    sleep 0.5
    touch "$d/stop"
    wait "$sampler"
    kill -TERM "$daemon"
    wait "$daemon" || true
    line=$($py - "$d" "$line" "$RATE" "$CHANNELS" <<'EOF'
import json, sqlite3, sys
d, times, rate, chans = sys.argv[1], sys.argv[2].split(), float(sys.argv[3]), sys.argv[4]
t_drop, t_done = map(float, times)
db = sqlite3.connect(f"file:{d}/veer.db?mode=ro", uri=True)
status, started, finished, a, b = db.execute(
    "select status, started_at, finished_at, data_start, data_end from ingest where kind = 'file'").fetchone()
vectors = db.execute("select count(*) from vector").fetchone()[0]
maps = db.execute("select count(*) from order_map").fetchone()[0]
events = db.execute("select count(*) from event").fetchone()[0]
trend = db.execute("select count(*) from trend").fetchone()[0]
samples = [json.loads(l) for l in open(f"{d}/proc.jsonl")]
hz = samples[0]["tick_hz"]
w0 = next(s for s in samples if s["t"] >= t_drop - 0.2)["threads"]
w1 = samples[-1]["threads"]
def cpu(name):
    return (w1.get(name, 0) - w0.get(name, 0)) / hz
writer_cpu = cpu("veer-writer")
worker_cpu = cpu("veer-bench")
elapsed = t_done - t_drop
length = b - a
commit = t_done - finished
print(f"folder: {status}: {length:.1f} s of {chans}-channel data at {rate:.0f} Hz "
      f"processed in {elapsed:.2f} s from drop to done: {length / elapsed:.1f}x real time "
      f"(worker thread CPU {worker_cpu:.2f} s, writer thread CPU {writer_cpu:.2f} s; analysis "
      f"finished {finished - started:.2f} s after the worker took the file)")
print(f"rows: {vectors} vector rows ({events} events, {maps} order-map rows, {trend} trend rows) in one "
      f"transaction: {vectors / writer_cpu:,.0f} vector rows/s of writer CPU, "
      f"{vectors / commit:,.0f} rows/s over the {commit:.2f} s from the worker's hand-over to done, "
      f"{vectors / elapsed:,.0f} rows/s end to end (drop to done)")
EOF
)
    while IFS= read -r l; do say "$l"; done <<<"$line"
fi

if wants storage; then
    echo "bench-watch: storage: cargo bench -p veer-storage"
    out=$(cargo bench -p veer-storage 2>/dev/null | grep -iE 'rows/s|median' || true)
    echo "$out" | sed 's/^/  /'
    say "storage bench: $(echo "$out" | tr '\n' ';' | sed 's/;$//')"
fi

# --- 4. memory soak -------------------------------------------------------------------------
if wants soak; then
    echo "bench-watch: soak: the recording back to back for $SOAK_WALL_S s at ${SOAK_SPEED}x real time"
    d=$work/soak
    run_stream "$d" "$work/rec.frames" --wall-s "$SOAK_WALL_S" --speed "$SOAK_SPEED"
    line=$($py - "$d" <<'EOF'
import json, sqlite3, statistics, sys
d = sys.argv[1]
feed = json.load(open(f"{d}/feed.json"))
s = [json.loads(l) for l in open(f"{d}/proc.jsonl")]
s = [x for x in s if feed["start"] <= x["t"] <= feed["end"]]
hz = s[0]["tick_hz"]
rss = [x["rss_kib"] / 1024 for x in s]
def slope(pts):
    n = len(pts)
    mt = sum(t for t, _ in pts) / n
    mr = sum(r for _, r in pts) / n
    num = sum((t - mt) * (r - mr) for t, r in pts)
    den = sum((t - mt) ** 2 for t, _ in pts)
    return num / den * 3600 if den else 0.0
pts = [(x["t"], x["rss_kib"] / 1024) for x in s]
speed = feed["data_s"] / feed["wall_s"]
half = pts[len(pts) // 2:]
share = (s[-1]["ticks"] - s[0]["ticks"]) / hz / (s[-1]["t"] - s[0]["t"]) * 100
db = sqlite3.connect(f"file:{d}/veer.db?mode=ro", uri=True)
gaps = db.execute("select count(*) from gap").fetchone()[0]
events = db.execute("select count(*) from event").fetchone()[0]
vectors = db.execute("select count(*) from vector").fetchone()[0]
marks = " ".join(f"{int(100 * i / 10)}%:{pts[min(len(pts) - 1, len(pts) * i // 10)][1]:.1f}" for i in range(1, 11))
print(f"soak: {feed['data_s'] / 60:.1f} min of data ({feed['repeats']} plays) fed in "
      f"{feed['wall_s'] / 60:.1f} min of wall time ({speed:.1f}x real time); RSS start {rss[0]:.1f} MB, median "
      f"{statistics.median(rss):.1f} MB, max {max(rss):.1f} MB, end {rss[-1]:.1f} MB (MB at each tenth of "
      f"the feed: {marks}); linear-fit slope over the second half {slope(half) / speed:+.2f} MB per hour "
      f"of data ({slope(half):+.2f} MB per wall hour), over the whole feed {slope(pts) / speed:+.2f} MB "
      f"per hour of data; CPU {share:.1f} % of one core; feed lateness max "
      f"{feed['max_lag_s'] * 1e3:.0f} ms, {feed['late_writes']} of {feed['frames'] // round(feed['rate'] / 100)} writes > 50 ms late; "
      f"gaps {gaps}; stored {events} events, {vectors} vector rows")
EOF
)
    say "$line"
fi

# --- 5. alert latency -----------------------------------------------------------------------
# The margin rule judges 1-s speed means gathered into buckets of max(1 s, drift window / 1000),
# so the drift window (default 60 min: 3.6-s buckets) sets part of the latency. ALERT_WINDOWS
# lists the windows to run, minutes.
if wants alert; then
    for window in ${ALERT_WINDOWS:-60 5}; do
        echo "bench-watch: alert: steady at 5150 r/min, creeping to 5000 r/min at 1 r/min per second; drift_window_min = $window"
        d=$work/alert-$window
        # Fixed 15 % margin, warning band 5 points: a critical at Nc warns below Nc / 0.8 r/min.
        # The criticals put those speeds at 5120, 5100, 5080, 5060, 5040 and 5020 r/min, one
        # crossing every 20 s of the creep.
        crit=""
        for w in 5120 5100 5080 5060 5040 5020; do
            crit+="{ rpm = $($py -c "print($w * 0.8)"), af = 5.0, origin = \"design\" }, "
        done
        CRITICALS="${crit%, }" ALERTS="margin = 15
warn_band_pct = 5
delay_s = 0
hysteresis_pct = 1
drift_window_min = $window
drift_horizon_min = 0" run_stream "$d" "$work/alert.frames" --log "$d/writes.csv" \
            --watch "$d/alerts.jsonl" --watch-log "$d/appear.tsv"
        line=$($py - "$d" "$window" <<'EOF'
import bisect, json, math, sqlite3, statistics, sys
d, window = sys.argv[1], float(sys.argv[2])
bucket = max(1.0, window * 60 / 1000)
feed = json.load(open(f"{d}/feed.json"))
rate = feed["rate"]
db = sqlite3.connect(f"file:{d}/veer.db?mode=ro", uri=True)
t0 = db.execute("select min(data_start) from ingest where kind = 'stream'").fetchone()[0]
firsts, walls = [], []
for row in open(f"{d}/writes.csv").read().split("\n")[1:]:
    if row:
        f, n, w = row.split(",")
        firsts.append(int(f))
        walls.append(float(w))
def written(t):
    """Wall time the packet holding the frame dated t was written."""
    i = bisect.bisect_right(firsts, round((t - t0) * rate)) - 1
    return walls[i] if 0 <= i < len(walls) else math.nan
lat, tail, details = [], [], []
for row in open(f"{d}/appear.tsv"):
    wall, text = row.rstrip("\n").split("\t", 1)
    a = json.loads(text)
    if a["event"] == "cleared":
        continue
    l = float(wall) - written(a["time_s"])
    # The last data of the bucket the rule judged.
    end = (math.floor(a["time_s"] / bucket) + 1) * bucket
    e = float(wall) - written(end)
    lat.append(l)
    tail.append(e)
    details.append(f"{a['key']} {a['severity']} at {a['evidence']['speed_rpm']:.0f} r/min {l:.2f} s ({e:.2f} s)")
if lat:
    print(f"alert (drift window {window:g} min, speed buckets {bucket:g} s): {len(lat)} alerts, latency "
          f"from the frame at the alert's time_s median {statistics.median(lat):.2f} s, max {max(lat):.2f} s; "
          f"from the last frame of the judged bucket median {statistics.median(tail):.2f} s, max "
          f"{max(tail):.2f} s (delay_s = 0, full stream load): " + "; ".join(details))
else:
    print(f"alert (drift window {window:g} min): NO ALERT was raised")
EOF
)
        say "$line"
    done
fi

echo
echo "bench-watch summary:"
for s in "${summary[@]}"; do echo "  $s"; done
if [ "${CLEAN:-0}" = 1 ]; then rm -rf "$work"; fi
