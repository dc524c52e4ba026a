"""Writes the seeds of the opus_reader fuzz target (tests/fuzz/corpus/opus_reader/) from the
committed fixtures: the headers and first audio pages of each, the last kept page marked as
the end of the stream and its checksum re-stamped (RFC 3533 section 6), so each seed is a short
valid stream. Run from the repository root (opus_make_fixtures.sh calls it)."""
import os

FIXTURES = "plugin/tests/data/opus"
SEEDS = "tests/fuzz/corpus/opus_reader"
KEEP_PAGES = 3  # the two header pages and one page of audio
# ffmpeg's muxer writes pages of about a second, so its order-1 file is kept whole and its
# order-3 file left out (too large for a seed).
WHOLE = {"family2_order1_stereo.opus"}
SKIP = {"family2_order3.opus"}


def crc32_ogg(data):
    crc = 0
    for byte in data:
        crc ^= byte << 24
        for _ in range(8):
            crc = ((crc << 1) ^ 0x04C11DB7) if crc & 0x80000000 else (crc << 1)
            crc &= 0xFFFFFFFF
    return crc


def pages(data):
    at = 0
    while at + 27 <= len(data):
        segments = data[at + 26]
        body = sum(data[at + 27:at + 27 + segments])
        end = at + 27 + segments + body
        yield bytearray(data[at:end])
        at = end


def main():
    os.makedirs(SEEDS, exist_ok=True)
    for name in sorted(os.listdir(FIXTURES)):
        if not name.endswith(".opus") or name in SKIP:
            continue
        kept = list(pages(open(os.path.join(FIXTURES, name), "rb").read()))
        if name not in WHOLE:
            kept = kept[:KEEP_PAGES]
        last = kept[-1]
        last[5] |= 0x04
        last[22:26] = b"\0\0\0\0"
        last[22:26] = crc32_ogg(last).to_bytes(4, "little")
        with open(os.path.join(SEEDS, name[: -len(".opus")]), "wb") as f:
            for page in kept:
                f.write(page)


if __name__ == "__main__":
    main()
