"""Reduces the reference decodes (interleaved float32 from opus_reference.c) to what
plugin/tests/opus_input.rs compares: three windows of samples (the start, where the pre-skip
ends; the middle; the end, where the granule position trims) and per-channel whole-file energy
and peak. Usage: opus_reference_summary.py WORK_DIR OUT_DIR (called by opus_make_fixtures.sh).
"""
import array
import os
import subprocess
import sys

WINDOW = 512
NAMES = ["family2_order1_stereo", "family2_order3", "family3_order3", "family3_order1_gain"]


def channels_of(opus_path):
    with open(opus_path, "rb") as f:
        data = f.read(64)
    i = data.index(b"OpusHead")
    return data[i + 9]


def main(work, out):
    version = subprocess.run(
        ["pkg-config", "--modversion", "opus"], capture_output=True, text=True
    ).stdout.strip()
    for name in NAMES:
        channels = channels_of(os.path.join(out, name + ".opus"))
        samples = array.array("f")
        with open(os.path.join(work, name + ".f32"), "rb") as f:
            samples.frombytes(f.read())
        frames = len(samples) // channels
        starts = [0, (frames - WINDOW) // 2, frames - WINDOW]
        windows = array.array("f")
        for s in starts:
            windows.extend(samples[s * channels:(s + WINDOW) * channels])
        with open(os.path.join(out, name + ".reference.f32"), "wb") as f:
            f.write(windows.tobytes())
        energy = [sum(x * x for x in samples[c::channels]) for c in range(channels)]
        peak = [max(abs(x) for x in samples[c::channels]) for c in range(channels)]
        with open(os.path.join(out, name + ".reference.txt"), "w") as f:
            f.write(f"# Reference decode of {name}.opus by libopus {version}\n")
            f.write("# (tests/reference-scripts/opus_reference.c, summarised by opus_reference_summary.py)\n")
            f.write(f"frames {frames}\n")
            f.write(f"channels {channels}\n")
            f.write(f"window_frames {WINDOW}\n")
            f.write("window_starts " + " ".join(map(str, starts)) + "\n")
            f.write("energy " + " ".join(repr(e) for e in energy) + "\n")
            f.write("peak " + " ".join(repr(p) for p in peak) + "\n")


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2])
