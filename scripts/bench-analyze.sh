#!/usr/bin/env bash
# Throughput of `veer analyze` on a 10-minute, 25.6 kHz recording with a tach and two vibration
# channels (about 46 M samples), as 16-bit WAV, float WAV and CSV. Prints each run's figures and the
# median of five. The recordings are simulated into target/bench/ (about 0.9 GB) and kept for reruns.
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release --quiet
veer=target/release/veer
dir=target/bench
mkdir -p "$dir"
profile="0:400,30:400,270:6200,330:6200,600:300"
[ -f "$dir/long16.wav" ] || "$veer" simulate --machine comp-3 --profile "$profile" --rate 25600 \
    --out "$dir/long16.wav" --wav-format pcm16 --full-scale 1000
[ -f "$dir/longf.wav" ] || "$veer" simulate --machine comp-3 --profile "$profile" --rate 25600 \
    --out "$dir/longf.wav"
[ -f "$dir/long.csv" ] || "$veer" simulate --machine comp-3 --profile "$profile" --rate 25600 \
    --out "$dir/long.csv"

run() {
    local label=$1
    shift
    local lines=()
    for _ in 1 2 3 4 5; do
        # The page cache holds the file after the first run; each run prints one "bench:" line.
        lines+=("$("$veer" analyze "$@" --bench 2>&1 >/dev/null | grep '^bench:')")
    done
    printf '%s\n' "${lines[@]}" | sed "s/^/$label /"
    local sps mbs mem
    sps=$(printf '%s\n' "${lines[@]}" | sed -E 's/.* ([0-9.]+) M samples\/s.*/\1/' | sort -n | sed -n 3p)
    mbs=$(printf '%s\n' "${lines[@]}" | sed -E 's/.* ([0-9.]+) MB\/s.*/\1/' | sort -n | sed -n 3p)
    mem=$(printf '%s\n' "${lines[@]}" | sed -E 's/.*peak memory ([0-9.]+) MiB.*/\1/' | sort -n | sed -n 5p)
    echo "$label median of 5: $sps M samples/s, $mbs MB/s; largest peak memory $mem MiB"
}

run "wav-pcm16" "$dir/long16.wav" --tach 0 --vib 1,2 --scale 1000
run "wav-f32" "$dir/longf.wav" --tach 0 --vib 1,2
run "csv" "$dir/long.csv" --tach tach --vib x,y
