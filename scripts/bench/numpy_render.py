"""The plain numpy script `make bench` times `stairstep render` against, whole process to whole process.

    numpy_render.py IN.wav OUT.wav [--gain-db G] [--rate HZ] [--bits N]

What a DSP engineer would write for the bench job: read the WAV (soundfile), gain with clipping, zero-order hold
down to HZ (every k-th sample, k = source rate / HZ, an integer), N-bit TPDF dither and rounding, unsigned 8-bit WAV
out (soundfile). Nothing here is timed: scripts/bench.sh times the whole process.
"""

import argparse

import numpy as np
import soundfile as sf


def main():
    p = argparse.ArgumentParser()
    p.add_argument("input")
    p.add_argument("output")
    p.add_argument("--gain-db", type=float, default=-3.0)
    p.add_argument("--rate", type=int, default=12_000)
    p.add_argument("--bits", type=int, default=8)
    a = p.parse_args()
    x, rate = sf.read(a.input, dtype="float32", always_2d=True)
    x = np.clip(x * np.float32(10 ** (a.gain_db / 20)), -1.0, 1.0)
    x = x[:: rate // a.rate]
    q = 2.0 ** (a.bits - 1)
    rng = np.random.default_rng(1)
    tpdf = rng.random(x.shape, dtype=np.float32) - rng.random(x.shape, dtype=np.float32)
    codes = np.clip(np.round(x * q + tpdf), -q, q - 1)
    sf.write(a.output, (codes / q).astype(np.float32), a.rate, subtype="PCM_U8")


if __name__ == "__main__":
    main()
