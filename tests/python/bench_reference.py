"""The numpy side of `make bench`: what a DSP engineer would write instead of the Rust core, timed on demand.

    bench_reference.py --serve DIR        answer timing requests on stdin (one JSON line per request on stdout)
    bench_reference.py --write-wav PATH --seconds S   write a long stereo 48 kHz 16-bit WAV (for the memory check)

`--serve` loads DIR/input.json and DIR/input.f32 (planar float32 channels, written by examples/bench_ratios.rs) and
answers these lines:

- `info`: numpy version and the SIMD kernels numpy dispatches to on this machine (from numpy.show_runtime()).
- `chain`: times one run of the benchmark chain (gain with clip, zero-order hold to a quarter of the rate, 8-bit
  TPDF dither, hold back to the source rate, input/output levels and SQNR, the same figures the core's report holds).
- `spectrum`: times a Welch spectrum (Hann, 50 % overlap, numpy's FFT) of the same frames the core analyses.
- `spectrum_values`: the spectrum in dBFS, to check it against the core's.
- `quit`.

Nothing here asserts a time. The caller (examples/bench_ratios.rs) alternates these requests with the native runs
and takes the medians. The caller also removes OPENBLAS_CORETYPE and OPENBLAS_L2_SIZE from this process's
environment, so that numpy picks its kernels for the real CPU.
"""

import contextlib
import io
import json
import sys
import time
import wave

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view


def numpy_runtime():
    """numpy's version and SIMD kernels, from numpy.show_runtime() (its printed summary, parsed back)."""
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf), contextlib.redirect_stderr(io.StringIO()):
        np.show_runtime()
    simd = {}
    try:
        from numpy._core._multiarray_umath import __cpu_baseline__, __cpu_features__

        simd = {
            "baseline": list(__cpu_baseline__),
            "found": [k for k, v in __cpu_features__.items() if v and k not in __cpu_baseline__],
        }
    except ImportError:  # older or newer layouts: keep the printed text only
        pass
    return {"numpy": np.__version__, "simd": simd, "show_runtime": buf.getvalue()}


class Reference:
    def __init__(self, folder):
        with open(f"{folder}/input.json") as f:
            meta = json.load(f)
        self.meta = meta
        self.rate = meta["sample_rate"]
        data = np.fromfile(f"{folder}/input.f32", dtype="<f4")
        self.x = data.reshape(meta["channels"], meta["frames"])
        c = meta["chain"]
        self.gain = np.float32(10.0 ** (c["gain_db"] / 20.0))
        self.hold = c["source_rate"] // c["target_rate"]  # an integer ratio: hold picks every hold-th sample
        assert self.hold * c["target_rate"] == c["source_rate"], "the numpy chain handles integer ratios only"
        self.bits = c["bits"]
        self.rng = np.random.default_rng(c["seed"])
        self.fft_size = meta["spectrum"]["fft_size"]
        n = self.fft_size
        self.window = (0.5 - 0.5 * np.cos(2.0 * np.pi * np.arange(n) / n)).astype(np.float32)  # periodic Hann

    def chain(self):
        """gain → clip → hold to rate/h → 8-bit TPDF → hold back ×h, with the report's figures."""
        x = np.nan_to_num(self.x, nan=0.0, posinf=1.0, neginf=-1.0)  # as the core sanitizes its input
        n = x.shape[1]
        y = x * self.gain
        gain_clipped = int(np.count_nonzero(np.abs(y) > 1.0))
        np.clip(y, -1.0, 1.0, out=y)
        reduced = y[:, :: self.hold]  # sample k of the reduced stream is source sample k·h
        scale = np.float32(2 ** (self.bits - 1))
        dither = self.rng.random(reduced.shape, dtype=np.float32)
        dither -= self.rng.random(reduced.shape, dtype=np.float32)  # TPDF, ±1 LSB
        v = reduced * scale
        v += dither
        k = np.rint(v, out=v)
        np.clip(k, -scale, scale - 1, out=k)
        export = k * np.float32(1.0 / scale)
        audition = np.repeat(export, self.hold, axis=1)[:, :n]
        err = audition - x
        quant_err = export - reduced  # the quantizer's error alone, at the reduced rate
        in_ms = float(np.mean(np.square(x)))
        out_ms = float(np.mean(np.square(audition)))
        err_ms = float(np.mean(np.square(err)))
        return {
            "sqnr_db": 10.0 * np.log10(in_ms / err_ms),
            "in_rms_dbfs": 10.0 * np.log10(2.0 * in_ms),
            "out_rms_dbfs": 10.0 * np.log10(2.0 * out_ms),
            "out_peak_dbfs": 20.0 * np.log10(float(np.max(np.abs(audition)))),
            "quant_err_dbfs": 10.0 * np.log10(2.0 * float(np.mean(np.square(quant_err)))),
            "gain_clipped": gain_clipped,
            "export_frames": int(export.shape[1]),
        }

    def spectrum(self):
        """Welch: frames of fft_size with hop fft_size/2, Hann, |rfft|² averaged over frames and channels, dBFS."""
        n, hop = self.fft_size, self.fft_size // 2
        acc = np.zeros(n // 2 + 1)
        frames = 0
        for ch in self.x:
            f = sliding_window_view(ch, n)[::hop] * self.window  # the same frames as the core (no padding needed)
            spec = np.fft.rfft(f, axis=-1)
            acc += np.sum(spec.real**2 + spec.imag**2, axis=0)
            frames += f.shape[0]
        scale = np.full(n // 2 + 1, 2.0 / float(np.sum(self.window, dtype=np.float64)))
        scale[0] /= 2.0
        scale[-1] /= 2.0
        p = acc / frames * scale**2
        return np.maximum(10.0 * np.log10(np.maximum(p, 1e-300)), -240.0), frames


def serve(folder):
    ref = Reference(folder)
    out = sys.stdout
    for line in sys.stdin:
        cmd = line.strip()
        if cmd == "info":
            reply = numpy_runtime()
        elif cmd == "chain":
            t0 = time.perf_counter()
            figures = ref.chain()
            reply = {"s": time.perf_counter() - t0, **figures}
        elif cmd == "spectrum":
            t0 = time.perf_counter()
            _, frames = ref.spectrum()
            reply = {"s": time.perf_counter() - t0, "frames": frames}
        elif cmd == "spectrum_values":
            db, frames = ref.spectrum()
            reply = {"frames": frames, "db": [float(v) for v in db]}
        elif cmd == "quit":
            break
        else:
            reply = {"error": f"unknown request {cmd!r}"}
        out.write(json.dumps(reply) + "\n")
        out.flush()


def write_wav(path, seconds, rate=48_000):
    """A long stereo 16-bit WAV: a slow chord with some noise, written in one-second chunks."""
    rng = np.random.default_rng(7)
    with wave.open(path, "wb") as w:
        w.setnchannels(2)
        w.setsampwidth(2)
        w.setframerate(rate)
        for s in range(int(seconds)):
            t = (np.arange(rate) + s * rate) / rate
            left = 0.3 * np.sin(2 * np.pi * 220.0 * t) + 0.2 * np.sin(2 * np.pi * 331.0 * t)
            right = 0.3 * np.sin(2 * np.pi * 277.0 * t) + 0.2 * np.sin(2 * np.pi * 440.0 * t)
            noise = 0.02 * rng.standard_normal((2, rate))
            frames = np.stack([left, right]) + noise
            pcm = np.clip(np.round(frames.T * 32767.0), -32768, 32767).astype("<i2")
            w.writeframes(pcm.tobytes())


def main(argv):
    if len(argv) >= 2 and argv[0] == "--serve":
        serve(argv[1])
    elif len(argv) >= 4 and argv[0] == "--write-wav" and argv[2] == "--seconds":
        write_wav(argv[1], float(argv[3]))
    else:
        sys.exit(__doc__)


if __name__ == "__main__":
    main(sys.argv[1:])
