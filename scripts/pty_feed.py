#!/usr/bin/env python3
"""Plays a `frames` serial stream (see docs/serial-format.md) into a pseudo-terminal at the
logger's own pace, for measuring `veer watch` on a serial source without hardware.

The pseudo-terminal's slave is published as a symlink (--link), so a configuration can name a
fixed port. Nothing is written until the --go file exists (the daemon has opened the port), so no
byte is lost to a port nobody reads. Each packet is written when its last frame would have been
sampled: at start + (first frame + frames) / rate / speed. A reader that cannot keep up fills the
pseudo-terminal's buffer and the write blocks, so falling behind shows as lateness of the writes.

With --wall-s the recording is played again and again until that much wall time has passed; the
frame index and packet number of every repeat carry on from the previous one (and the CRC is
recomputed), so the reader sees one continuous stream with no gap.

Optional --watch FILE: a thread polls FILE (an alerts JSON-lines file) every 2 ms and logs the wall
time each new line appeared, on the same clock as the write log.

At the end one JSON object with the feed's figures is printed on stdout.
"""

import argparse
import json
import mmap
import os
import struct
import sys
import threading
import time
import tty
import zlib

SYNC = b"\xa7\x76\x65\x72"
HEADER = struct.Struct("<4sBBHHHIQd")  # sync, version, format, channels, frames, reserved, seq, first, rate


def packets(buf):
    """Offsets, lengths, first frames and frame counts of the packets of a frames file."""
    out = []
    pos = 0
    n = len(buf)
    while pos + HEADER.size <= n:
        sync, ver, fmt, chans, frames, _res, _seq, first, rate = HEADER.unpack_from(buf, pos)
        if sync != SYNC or ver != 1:
            raise SystemExit(f"not a frames packet at byte {pos}")
        sample = 4 if fmt == 1 else 2
        scales = 4 * chans if fmt == 2 else 0
        length = HEADER.size + scales + frames * chans * sample + 4
        out.append((pos, length, first, frames))
        pos += length
    return out, rate


def watch_file(path, log_path, stop):
    """Logs `wall_time<TAB>line` for every new line of `path` until `stop` is set."""
    seen = 0
    pending = b""
    with open(log_path, "w", encoding="utf-8") as log:
        while not stop.is_set():
            try:
                size = os.path.getsize(path)
            except OSError:
                size = 0
            if size > seen:
                now = time.time()
                with open(path, "rb") as f:
                    f.seek(seen)
                    data = f.read(size - seen)
                seen += len(data)
                pending += data
                *lines, pending = pending.split(b"\n")
                for line in lines:
                    log.write(f"{now:.6f}\t{line.decode('utf-8', 'replace')}\n")
                log.flush()
            time.sleep(0.002)


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--file", required=True, help="frames stream written by `veer simulate --serial frames`")
    ap.add_argument("--link", required=True, help="symlink to create to the pseudo-terminal's slave")
    ap.add_argument("--go", required=True, help="start writing once this file exists")
    ap.add_argument("--speed", type=float, default=1.0, help="multiple of real time (0: as fast as it goes)")
    ap.add_argument("--wall-s", type=float, default=0.0, help="repeat the recording for this long (0: play it once)")
    ap.add_argument("--log", help="CSV of every write: first_frame,frames,wall_time_after_write")
    ap.add_argument("--watch", help="JSON-lines file whose new lines are timed")
    ap.add_argument("--watch-log", help="where the times of --watch lines go")
    ap.add_argument("--linger-s", type=float, default=0.0, help="keep the port open this long after the last write")
    a = ap.parse_args()

    with open(a.file, "rb") as f:
        buf = mmap.mmap(f.fileno(), 0, access=mmap.ACCESS_READ)
    pkts, rate = packets(buf)
    if not pkts:
        raise SystemExit(f"{a.file}: no packets")
    total_frames = pkts[-1][2] + pkts[-1][3] - pkts[0][2]

    master, slave = os.openpty()
    tty.setraw(slave)
    if os.path.lexists(a.link):
        os.unlink(a.link)
    os.symlink(os.ttyname(slave), a.link)

    stop = threading.Event()
    watcher = None
    if a.watch and a.watch_log:
        watcher = threading.Thread(target=watch_file, args=(a.watch, a.watch_log, stop), daemon=True)
        watcher.start()

    while not os.path.exists(a.go):
        time.sleep(0.01)

    log = open(a.log, "w", encoding="utf-8") if a.log else None
    if log:
        log.write("first_frame,frames,wall\n")
    scratch = bytearray(max(p[1] for p in pkts))
    start = time.time()
    max_lag = 0.0
    late_writes = 0  # writes finishing more than 50 ms after their time
    written_frames = 0
    written_bytes = 0
    repeat = 0
    lag = 0.0
    while True:
        shift = repeat * total_frames
        for i, (pos, length, first, frames) in enumerate(pkts):
            out_first = first + shift
            if a.speed > 0:
                due = start + (out_first - pkts[0][2] + frames) / rate / a.speed
                wait = due - time.time()
                if wait > 0:
                    time.sleep(wait)
            if repeat == 0:
                view = buf[pos:pos + length]
            else:
                scratch[:length] = buf[pos:pos + length]
                seq = (i + repeat * len(pkts)) & 0xFFFFFFFF
                struct.pack_into("<IQ", scratch, 12, seq, out_first)
                crc = zlib.crc32(memoryview(scratch)[4:length - 4]) & 0xFFFFFFFF
                struct.pack_into("<I", scratch, length - 4, crc)
                view = memoryview(scratch)[:length]
            done = 0
            while done < length:
                done += os.write(master, view[done:])
            now = time.time()
            if a.speed > 0:
                lag = now - due
                max_lag = max(max_lag, lag)
                if lag > 0.05:
                    late_writes += 1
            if log:
                log.write(f"{out_first},{frames},{now:.6f}\n")
            written_frames += frames
            written_bytes += length
        repeat += 1
        if a.wall_s <= 0 or time.time() - start >= a.wall_s:
            break
    end = time.time()
    if log:
        log.close()
    time.sleep(a.linger_s)
    stop.set()
    if watcher:
        watcher.join()
    print(json.dumps({
        "start": start,
        "end": end,
        "wall_s": end - start,
        "frames": written_frames,
        "data_s": written_frames / rate,
        "bytes": written_bytes,
        "repeats": repeat,
        "rate": rate,
        "max_lag_s": max_lag,
        "final_lag_s": lag,
        "late_writes": late_writes,
    }))
    sys.stdout.flush()
    os.close(master)
    os.close(slave)
    os.unlink(a.link)


if __name__ == "__main__":
    main()
