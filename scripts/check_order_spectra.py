#!/usr/bin/env python3
"""Check veer's order spectra against numpy.fft.rfft.

Reads JSON lines written by the veer-tracker example `order_blocks` (from a file named on the
command line, or from standard input). Each line holds a resampled angle-domain block before
windowing, the window's name and veer's amplitudes. For each block this script applies the same
periodic window, takes numpy.fft.rfft, scales to peak amplitudes (2|X_k| / sum(w), and |X_0| / sum(w)
for the mean) and compares with veer's values. It prints one summary line and exits with status 1
if any block deviates by more than 1e-6 of its largest amplitude.

Usage:
    cargo run -q --release -p veer-tracker --example order_blocks | python3 scripts/check_order_spectra.py
"""

import json
import sys

import numpy as np

LIMIT = 1e-6

# Cosine-series coefficients a_k of the periodic windows, w[j] = sum_k (-1)^k a_k cos(2 pi k j / N).
# Flat top: G. D'Antona & A. Ferrero, "Digital Signal Processing for Measurement Systems",
# Springer, 2006, p. 70.
WINDOWS = {
    "hann": [0.5, 0.5],
    "rectangular": [1.0],
    "flat_top": [0.21557895, 0.41663158, 0.277263158, 0.083578947, 0.006947368],
}


def window(name, n):
    """The periodic window `name` of length n."""
    x = 2.0 * np.pi * np.arange(n) / n
    return sum((-1.0) ** k * a * np.cos(k * x) for k, a in enumerate(WINDOWS[name]))


def reference_amplitudes(block, name):
    """Peak amplitudes of the windowed block from numpy's real FFT."""
    w = window(name, len(block))
    spectrum = np.fft.rfft(w * block)
    amp = 2.0 * np.abs(spectrum) / w.sum()
    amp[0] *= 0.5
    return amp


def check(lines):
    """Compare every block; returns (blocks per window, worst deviation, failure messages)."""
    counts = {}
    worst = 0.0
    failures = []
    for number, line in enumerate(lines, start=1):
        line = line.strip()
        if not line:
            continue
        rec = json.loads(line)
        name = rec["window"]
        block = np.asarray(rec["resampled"], dtype=np.float64)
        veer = np.asarray(rec["amplitudes"], dtype=np.float64)
        n_expected = rec["samples_per_rev"] * rec["revs_per_block"]
        if len(block) != n_expected:
            failures.append(f"line {number}: block of {len(block)} values, expected {n_expected}")
            continue
        if abs(rec["order_step"] * rec["revs_per_block"] - 1.0) > 1e-12:
            failures.append(f"line {number}: order_step {rec['order_step']} is not 1/revs_per_block")
        ref = reference_amplitudes(block, name)
        if len(veer) > len(ref):
            failures.append(f"line {number}: {len(veer)} bins, more than the FFT's {len(ref)}")
            continue
        ref = ref[: len(veer)]
        scale = ref.max()
        dev = float(np.max(np.abs(ref - veer)) / scale) if scale > 0 else float(np.max(np.abs(veer)))
        worst = max(worst, dev)
        if not dev < LIMIT:
            failures.append(f"line {number} ({name}, block {rec['block']}): deviation {dev:.3e}")
        counts[name] = counts.get(name, 0) + 1
    return counts, worst, failures


def main():
    if len(sys.argv) > 1:
        with open(sys.argv[1], encoding="utf-8") as f:
            counts, worst, failures = check(f)
    else:
        counts, worst, failures = check(sys.stdin)
    total = sum(counts.values())
    per_window = ", ".join(f"{name} {count}" for name, count in sorted(counts.items()))
    ok = total > 0 and not failures
    print(
        f"order spectra vs numpy.fft.rfft: {total} blocks ({per_window or 'none'}), "
        f"max deviation {worst:.2e} of the largest amplitude (limit {LIMIT:.0e}): "
        f"{'OK' if ok else 'FAILED'}"
    )
    for message in failures[:10]:
        print(f"  {message}", file=sys.stderr)
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
