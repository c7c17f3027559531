#!/usr/bin/env python3
"""Samples a process from /proc every --interval seconds until it exits (or --stop appears).

One JSON line per sample: wall time, CPU ticks used so far (utime + stime of the whole process),
resident memory (VmRSS, KiB), and the ticks of each thread by name, so a report can say which
stage (serial reader, machine worker, storage writer) used the CPU.
"""

import argparse
import json
import os
import time

TICK = os.sysconf("SC_CLK_TCK")


def ticks(stat_path):
    """utime + stime of a /proc stat file (fields 14 and 15, after the parenthesised name)."""
    with open(stat_path, encoding="ascii", errors="replace") as f:
        s = f.read()
    fields = s[s.rindex(")") + 2:].split()
    return int(fields[11]) + int(fields[12])


def rss_kib(pid):
    with open(f"/proc/{pid}/status", encoding="ascii", errors="replace") as f:
        for line in f:
            if line.startswith("VmRSS:"):
                return int(line.split()[1])
    return 0


def threads(pid):
    out = {}
    for tid in os.listdir(f"/proc/{pid}/task"):
        try:
            with open(f"/proc/{pid}/task/{tid}/comm", encoding="utf-8", errors="replace") as f:
                name = f.read().strip()
            out[name] = out.get(name, 0) + ticks(f"/proc/{pid}/task/{tid}/stat")
        except OSError:
            pass  # the thread ended between listing and reading
    return out


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("pid", type=int)
    ap.add_argument("out")
    ap.add_argument("--interval", type=float, default=1.0)
    ap.add_argument("--stop", help="stop sampling once this file exists")
    a = ap.parse_args()
    with open(a.out, "w", encoding="utf-8") as out:
        next_at = time.time()
        while True:
            if a.stop and os.path.exists(a.stop):
                break
            try:
                sample = {
                    "t": time.time(),
                    "ticks": ticks(f"/proc/{a.pid}/stat"),
                    "tick_hz": TICK,
                    "rss_kib": rss_kib(a.pid),
                    "threads": threads(a.pid),
                }
            except (OSError, ValueError):
                break  # the process is gone
            out.write(json.dumps(sample) + "\n")
            out.flush()
            next_at += a.interval
            time.sleep(max(0.0, next_at - time.time()))


if __name__ == "__main__":
    main()
