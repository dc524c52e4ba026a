#!/usr/bin/env python3
"""Writes the committed seed corpus of the fuzz targets (small, valid inputs of each kind the
parsers take, so the fuzzer starts inside every code path). Run from tests/fuzz/."""
import json, struct, os

def chunk(cid, body):
    pad = b"\0" if len(body) % 2 else b""
    return cid + struct.pack("<I", len(body)) + body + pad

def fmt_plain(tag, ch, rate, bits):
    align = ch * ((bits + 7) // 8)
    return struct.pack("<HHIIHH", tag, ch, rate, rate * align, align, bits)

def fmt_ext(ch, rate, bits, subformat, mask=0):
    align = ch * ((bits + 7) // 8)
    return struct.pack("<HHIIHHHHI", 0xFFFE, ch, rate, rate * align, align, bits, 22, bits, mask) + subformat

def guid(d1, tail=b"\x00\x00\x00\x00\x10\x00\x80\x00\x00\xaa\x00\x38\x9b\x71"):
    return struct.pack("<I", d1) + tail

PCM, FLOAT = guid(1), guid(3)
# AMB B-format sub-formats (PCM and float) as Microsoft-style GUIDs with the AMB tail.
AMB_TAIL = b"\x21\x07\xd3\x11\x86\x44\xc8\xc1\xca\x00\x00\x00"
AMB_PCM, AMB_FLOAT = struct.pack("<I", 1) + AMB_TAIL, struct.pack("<I", 3) + AMB_TAIL

def samples(ch, frames, bits, float_=False):
    out = b""
    for k in range(frames):
        for c in range(ch):
            v = ((k * 7 + c * 3) % 17 - 8) / 9.0
            if float_ and bits == 32: out += struct.pack("<f", v)
            elif float_: out += struct.pack("<d", v)
            elif bits == 8: out += bytes([int(128 + v * 100)])
            elif bits == 16: out += struct.pack("<h", int(v * 30000))
            elif bits == 24: out += struct.pack("<i", int(v * 8_000_000))[:3]
            else: out += struct.pack("<i", int(v * 2_000_000_000))
    return out

def riff(fmt, data, extra=b""):
    body = b"WAVE" + chunk(b"fmt ", fmt) + extra + chunk(b"data", data)
    return b"RIFF" + struct.pack("<I", len(body)) + body

def long_form(magic, fmt, data, extra=b""):
    # ds64: riff size, data size, sample count (64-bit each), no table.
    ds64_len = 28
    riff_size = 4 + (8 + ds64_len) + (8 + len(fmt)) + len(extra) + (8 + len(data))
    ds64 = struct.pack("<QQQI", riff_size, len(data), 0, 0)
    body = b"WAVE" + chunk(b"ds64", ds64) + chunk(b"fmt ", fmt) + extra
    body += b"data" + struct.pack("<I", 0xFFFFFFFF) + data
    return magic + struct.pack("<I", 0xFFFFFFFF) + body

seeds = {
    "wav_reader/pcm16_stereo": riff(fmt_plain(1, 2, 48000, 16), samples(2, 8, 16)),
    "wav_reader/pcm8_mono": riff(fmt_plain(1, 1, 22050, 8), samples(1, 9, 8)),
    "wav_reader/float64_4ch": riff(fmt_plain(3, 4, 96000, 64), samples(4, 5, 64, True)),
    "wav_reader/ext_float32_16ch": riff(fmt_ext(16, 48000, 32, FLOAT), samples(16, 3, 32, True)),
    "wav_reader/ext_pcm24_9ch": riff(fmt_ext(9, 44100, 24, PCM, 0), samples(9, 4, 24)),
    "wav_reader/amb_pcm16_4ch": riff(fmt_ext(4, 48000, 16, AMB_PCM), samples(4, 6, 16)),
    "wav_reader/amb_float_4ch": riff(fmt_ext(4, 48000, 32, AMB_FLOAT), samples(4, 6, 32, True)),
    "wav_reader/rf64_pcm24_4ch": long_form(b"RF64", fmt_ext(4, 48000, 24, PCM), samples(4, 5, 24)),
    "wav_reader/bw64_float_4ch_chna": long_form(
        b"BW64", fmt_ext(4, 48000, 32, FLOAT), samples(4, 5, 32, True),
        chunk(b"chna", struct.pack("<HH", 4, 4) + b"".join(
            struct.pack("<H", i + 1) + b"AT_%08x_01" % (0x00040001 + i) + b"AO_1001\0\0\0\0\0\0\0\0\0\0\0\0\0\0"[:14]
            for i in range(4)))),
    "wav_reader/pcm32_with_list": riff(fmt_plain(1, 1, 8000, 32), samples(1, 4, 32),
                                       chunk(b"LIST", b"INFOINAM" + struct.pack("<I", 4) + b"tram")),
}
view = {"hold": False, "show_integrated": True, "show_grid": True, "show_labels": False, "show_sources": True}
state = {"version": "0.1.0",
         "params": {"format": {"string": "acn-sn3d"}, "method": {"string": "max-re"},
                    "time_constant": {"f32": 300.0}, "view_yaw": {"f32": -30.0}},
         "fields": {"view": json.dumps(view)}}
seeds["plugin_state/default_like"] = json.dumps(state).encode()
seeds["plugin_state/empty_fields"] = b'{"version":"","params":{},"fields":{}}'
seeds["state_fields/view_only"] = json.dumps(view).encode()
seeds["state_fields/view_and_other"] = json.dumps(view).encode() + b"\0other\0{}"
seeds["state_fields/partial_view"] = b'{"hold": true}'

for name, data in seeds.items():
    os.makedirs(os.path.join("corpus", os.path.dirname(name)), exist_ok=True)
    with open(os.path.join("corpus", name), "wb") as f:
        f.write(data)
print(len(seeds), "seeds")
