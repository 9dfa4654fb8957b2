#!/usr/bin/env python3
"""Writes the tiny WAV fixtures in tests/fixtures/ (each well under 1 KB).

Most are written by libsndfile (through the pinned `soundfile`), so the reader is checked against files this project
did not write; the rest are put together byte by byte with `struct` to cover chunks libsndfile does not write (odd-sized
unknown chunks, `smpl` loops, `cue ` points). Deterministic: running it again gives the same bytes.

    .venv/bin/python scripts/make-fixtures.py

The signal is an integer triangle wave, `tri(i, period, amp)` below; tests/wav_fixtures.rs computes the same one.
"""
import io
import pathlib
import struct

import numpy as np
import soundfile as sf

OUT = pathlib.Path(__file__).resolve().parent.parent / "tests" / "fixtures"


def tri(i, period, amp):
    """Integer triangle: -amp at phase 0, +amp at half a period (same formula as the Rust tests)."""
    p = i % period
    half = period // 2
    return -amp + (2 * amp * p) // half if p < half else amp - (2 * amp * (p - half)) // half


def signal(frames, period, amp):
    return np.array([tri(i, period, amp) for i in range(frames)], dtype=np.int64)


def write_sf(name, data, rate, subtype, fmt="WAV"):
    buf = io.BytesIO()
    sf.write(buf, data, rate, subtype=subtype, format=fmt)
    b = bytearray(buf.getvalue())
    peak = b.find(b"PEAK")
    if peak >= 0:  # libsndfile's PEAK chunk holds the time of writing: zero it so the bytes are reproducible
        b[peak + 12 : peak + 16] = bytes(4)
    save(name, bytes(b))


def save(name, b):
    assert len(b) < 1024, (name, len(b))
    (OUT / name).write_bytes(b)
    print(f"{name}: {len(b)} bytes")


def chunk(cid, body):
    pad = b"\0" if len(body) % 2 else b""
    return cid + struct.pack("<I", len(body)) + body + pad


def riff(*chunks):
    body = b"WAVE" + b"".join(chunks)
    return b"RIFF" + struct.pack("<I", len(body)) + body


def fmt_pcm(channels, rate, bits):
    ba = channels * ((bits + 7) // 8)
    return chunk(b"fmt ", struct.pack("<HHIIHH", 1, channels, rate, rate * ba, ba, bits))


def main():
    OUT.mkdir(parents=True, exist_ok=True)
    # libsndfile writes these.
    write_sf("u8-mono-11025.wav", (signal(300, 50, 120) * 256).astype(np.int16), 11025, "PCM_U8")
    st = np.stack([signal(100, 40, 30000), signal(100, 26, 12345)], axis=1)
    write_sf("s16-stereo-22050.wav", st.astype(np.int16), 22050, "PCM_16")
    write_sf("s24-mono-48000.wav", (signal(100, 30, 8_000_000) * 256).astype(np.int32), 48000, "PCM_24")
    write_sf("s32-mono-8000.wav", (signal(60, 20, 2_000_000_000)).astype(np.int32), 8000, "PCM_32")
    write_sf("float32-mono-44100.wav", signal(100, 32, 16384).astype(np.float32) / 32768, 44100, "FLOAT")
    write_sf("float64-mono-8000.wav", signal(50, 10, 1000).astype(np.float64) / 1024, 8000, "DOUBLE")
    write_sf("extensible-s16-stereo-16000.wav", st[:50].astype(np.int16), 16000, "PCM_16", fmt="WAVEX")
    write_sf("mulaw-mono-8000.wav", signal(300, 40, 32000).astype(np.int16), 8000, "ULAW")
    write_sf("alaw-mono-8000.wav", signal(300, 40, 32000).astype(np.int16), 8000, "ALAW")
    # IMA ADPCM: libsndfile picks 256-byte blocks (505 samples) at 11025 Hz mono and 512-byte blocks (505 samples per
    # channel) at 8000 Hz stereo; both have a partial last block.
    write_sf("ima-adpcm-mono-11025.wav", signal(600, 64, 20000).astype(np.int16), 11025, "IMA_ADPCM")
    st2 = np.stack([signal(300, 64, 20000), signal(300, 18, 9000)], axis=1)
    write_sf("ima-adpcm-stereo-8000.wav", st2.astype(np.int16), 8000, "IMA_ADPCM")

    # Put together by hand.
    s16 = signal(64, 16, 16000)
    data = struct.pack("<64h", *s16)
    smpl = struct.pack("<9I", 0, 0, 1_000_000_000 // 22050, 60, 0, 0, 0, 2, 0)
    smpl += struct.pack("<6I", 0, 0, 16, 47, 0, 0) + struct.pack("<6I", 1, 1, 0, 63, 0, 3)
    cue = struct.pack("<I", 2) + struct.pack("<II4sIII", 1, 0, b"data", 0, 0, 8) + struct.pack(
        "<II4sIII", 2, 1, b"data", 0, 0, 40
    )
    save("smpl-loop-s16-mono-22050.wav", riff(fmt_pcm(1, 22050, 16), chunk(b"data", data), chunk(b"smpl", smpl),
                                            chunk(b"cue ", cue)))
    u8 = bytes(128 + tri(i, 20, 100) for i in range(33))  # odd length: the data chunk is padded too
    info = chunk(b"INAM", b"coin\0") + chunk(b"ISFT", b"make-fixtures.py\0")
    save("odd-chunks-u8-mono-8000.wav", riff(chunk(b"junk", b"abc"), fmt_pcm(1, 8000, 8), chunk(b"zzz9", b"\x01"),
                                           chunk(b"data", u8), chunk(b"LIST", b"INFO" + info)))


if __name__ == "__main__":
    main()
