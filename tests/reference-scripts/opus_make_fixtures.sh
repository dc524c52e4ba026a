#!/bin/sh
# Regenerates plugin/tests/data/opus/: Ogg Opus fixtures written by the reference encoder
# (libopus, through Debian's ffmpeg for channel mapping family 2 and through
# opus_reference.c's projection encoder for family 3) from the demo scene, and the reference
# decodes the tests compare with (libopus through opus_reference.c). Run from the repository
# root after `cargo build -p fieldglass`; needs ffmpeg, libopus-dev, libogg-dev, python3.
# Not run at test time: the outputs are committed.
set -eu
out=plugin/tests/data/opus
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
cc -O2 -o "$work/opus_reference" tests/reference-scripts/opus_reference.c \
  $(pkg-config --cflags --libs opus ogg) -lm
fg=target/debug/fieldglass
"$fg" demo --write "$work/o3.wav" --order 3 --seconds 2
"$fg" demo --write "$work/o1.wav" --order 1 --seconds 1
# Order 1 plus a non-diegetic stereo pair (two steady tones, 440 Hz left and 660 Hz right).
ffmpeg -v error -y -i "$work/o1.wav" \
  -f lavfi -i "sine=frequency=440:sample_rate=48000:duration=1" \
  -f lavfi -i "sine=frequency=660:sample_rate=48000:duration=1" \
  -filter_complex "[0:a][1:a][2:a]amerge=inputs=3[a]" -map "[a]" -c:a pcm_f32le "$work/o1_stereo.wav"

# Family 2 with libopus through ffmpeg (bitexact: a fixed stream serial and no version tags,
# so a rerun writes the same bytes).
ffmpeg -v error -y -i "$work/o1_stereo.wav" -fflags +bitexact -c:a libopus -mapping_family 2 -b:a 160k \
  "$out/family2_order1_stereo.opus"
ffmpeg -v error -y -i "$work/o3.wav" -fflags +bitexact -c:a libopus -mapping_family 2 -b:a 320k \
  "$out/family2_order3.opus"
# Family 3 with the projection encoder; the order-1 file carries an output gain of -6 dB.
ffmpeg -v error -y -i "$work/o3.wav" -f f32le "$work/o3.f32"
ffmpeg -v error -y -i "$work/o1.wav" -f f32le "$work/o1.f32"
"$work/opus_reference" encode-projection "$work/o3.f32" 16 320000 0 "$out/family3_order3.opus"
"$work/opus_reference" encode-projection "$work/o1.f32" 4 128000 -1536 \
  "$out/family3_order1_gain.opus"

# Reference decodes, reduced to what the tests compare (see opus_reference_summary.py).
for f in family2_order1_stereo family2_order3 family3_order3 family3_order1_gain; do
  "$work/opus_reference" decode "$out/$f.opus" "$work/$f.f32"
done
python3 tests/reference-scripts/opus_reference_summary.py "$work" "$out"
python3 tests/reference-scripts/opus_fuzz_seeds.py
