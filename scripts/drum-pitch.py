#!/usr/bin/env python3
"""Outside pitch estimate of a drum sample, independent of tonus.

Usage: python3 scripts/drum-pitch.py FILE
Prints one line: "<lowest strong peak, Hz> <strongest peak, Hz> <onset, s>".

Decoding is SoX's (`sox FILE -t f32 -c 1 -`: channels averaged, native rate).
The onset is the first sample whose magnitude reaches 10 % of the peak. From
the onset, the first 0.5 s (or up to the end, if the sample is shorter) gets
a Hann window and a real FFT zero-padded to at least 2^18 points (about
0.17 Hz a bin at 44.1 kHz; the resolution is set by the window length, 2 Hz
for 0.5 s). Peaks are local maxima of the magnitude spectrum between 30 Hz
and 5 kHz, refined by a parabola through the log-magnitudes of three bins.
"Lowest strong peak": the lowest-frequency peak within 12 dB of the
strongest one (the fundamental (0,1) of a drum is often not the loudest
partial, but it is rarely 12 dB below it in the first half second).

Needs numpy (pip install numpy) and sox.
"""
import subprocess
import sys

import numpy as np

WINDOW_S = 0.5
ONSET_FRACTION = 0.1
F_MIN_HZ, F_MAX_HZ = 30.0, 5000.0
STRONG_DB = 12.0
MIN_FFT = 1 << 18


def main(path: str) -> None:
    rate = int(subprocess.run(["soxi", "-r", path], capture_output=True, check=True, text=True).stdout)
    raw = subprocess.run(["sox", path, "-t", "f32", "-c", "1", "-"], capture_output=True, check=True).stdout
    x = np.frombuffer(raw, dtype=np.float32).astype(np.float64)
    x = x - x.mean()
    peak = np.abs(x).max()
    if peak == 0:
        print("nan nan nan")
        return
    onset = int(np.argmax(np.abs(x) >= ONSET_FRACTION * peak))
    seg = x[onset:onset + int(WINDOW_S * rate)]
    n_fft = max(MIN_FFT, 1 << int(np.ceil(np.log2(8 * len(seg)))))
    spec = np.abs(np.fft.rfft(seg * np.hanning(len(seg)), n_fft))
    freqs = np.arange(len(spec)) * rate / n_fft
    db = 20 * np.log10(spec + 1e-300)
    lo, hi = np.searchsorted(freqs, [F_MIN_HZ, F_MAX_HZ])
    k = np.arange(max(lo, 1), min(hi, len(spec) - 1))
    is_peak = (db[k] > db[k - 1]) & (db[k] >= db[k + 1])
    k = k[is_peak]
    if len(k) == 0:
        print("nan nan %.4f" % (onset / rate))
        return

    def refined(i: int) -> float:
        a, b, c = db[i - 1], db[i], db[i + 1]
        d = a - 2 * b + c
        off = 0.5 * (a - c) / d if d != 0 else 0.0
        return (i + off) * rate / n_fft

    strongest = k[np.argmax(db[k])]
    strong = k[db[k] >= db[strongest] - STRONG_DB]
    print("%.2f %.2f %.4f" % (refined(strong[0]), refined(strongest), onset / rate))


if __name__ == "__main__":
    main(sys.argv[1])
