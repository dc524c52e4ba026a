/*
 * Reference encoder and decoder for the Ogg Opus fixtures of plugin/tests/data/opus/.
 * Run only to regenerate them (see opus_make_fixtures.sh beside this file); nothing runs it
 * at test time.
 *
 * It uses Debian's libopus (the reference implementation, RFC 6716) and libogg:
 *   apt-get install -y libopus-dev libogg-dev
 *   cc -O2 -o opus_reference tests/reference-scripts/opus_reference.c \
 *      $(pkg-config --cflags --libs opus ogg) -lm
 *
 *   opus_reference encode-projection IN.f32 CHANNELS BITRATE GAIN_Q8 OUT.opus
 *     IN.f32: interleaved 32-bit float samples at 48 kHz, ACN/SN3D, (N+1)^2 channels.
 *     Writes channel mapping family 3 (RFC 8486 section 3.2): the projection encoder's
 *     streams with its demixing matrix in the identification header. GAIN_Q8 (dB in Q7.8) is
 *     added to the header's output gain on top of the gain the encoder reports for its matrix.
 *   opus_reference decode IN.opus OUT.f32
 *     Decodes family 0, 1, 2, 255 (multistream) or 3 (projection) with libopus at 48 kHz,
 *     applies the header's output gain with OPUS_SET_GAIN, drops the pre-skip and trims the
 *     end to the last granule position (RFC 7845 sections 4.2 and 4.5), and writes
 *     interleaved 32-bit floats.
 */
#include <ogg/ogg.h>
#include <opus/opus.h>
#include <opus/opus_multistream.h>
#include <opus/opus_projection.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define FRAME 960 /* 20 ms at 48 kHz */
#define MAX_PACKET 65536

static void fail(const char *what) {
    fprintf(stderr, "opus_reference: %s\n", what);
    exit(1);
}

static void put16(unsigned char *p, unsigned v) { p[0] = v & 0xff; p[1] = (v >> 8) & 0xff; }
static void put32(unsigned char *p, uint32_t v) {
    put16(p, v & 0xffff);
    put16(p + 2, v >> 16);
}

static void write_pages(ogg_stream_state *os, FILE *out, int flush) {
    ogg_page page;
    while (flush ? ogg_stream_flush(os, &page) : ogg_stream_pageout(os, &page)) {
        fwrite(page.header, 1, page.header_len, out);
        fwrite(page.body, 1, page.body_len, out);
    }
}

static int encode_projection(const char *in_path, int channels, int bitrate, int gain_q8,
                             const char *out_path) {
    FILE *in = fopen(in_path, "rb");
    if (!in) fail("cannot open the input");
    fseek(in, 0, SEEK_END);
    long bytes = ftell(in);
    fseek(in, 0, SEEK_SET);
    long frames = bytes / (long)(sizeof(float) * channels);
    float *pcm = calloc((size_t)(frames + FRAME) * channels, sizeof(float));
    if (!pcm || fread(pcm, sizeof(float) * channels, frames, in) != (size_t)frames)
        fail("cannot read the input");
    fclose(in);

    int streams = 0, coupled = 0, err = 0;
    OpusProjectionEncoder *enc = opus_projection_ambisonics_encoder_create(
        48000, channels, 3, &streams, &coupled, OPUS_APPLICATION_AUDIO, &err);
    if (err != OPUS_OK || !enc) fail("cannot create the projection encoder");
    opus_projection_encoder_ctl(enc, OPUS_SET_BITRATE(bitrate));
    opus_int32 lookahead = 0, matrix_size = 0, matrix_gain = 0;
    opus_projection_encoder_ctl(enc, OPUS_GET_LOOKAHEAD(&lookahead));
    opus_projection_encoder_ctl(enc, OPUS_PROJECTION_GET_DEMIXING_MATRIX_SIZE(&matrix_size));
    opus_projection_encoder_ctl(enc, OPUS_PROJECTION_GET_DEMIXING_MATRIX_GAIN(&matrix_gain));
    if (matrix_size != 2 * channels * (streams + coupled)) fail("unexpected matrix size");

    /* Identification header, RFC 7845 section 5.1 with the family 3 table of RFC 8486. */
    int head_len = 21 + matrix_size;
    unsigned char *head = calloc(head_len, 1);
    memcpy(head, "OpusHead", 8);
    head[8] = 1;
    head[9] = (unsigned char)channels;
    put16(head + 10, (unsigned)lookahead);
    put32(head + 12, 48000);
    put16(head + 16, (unsigned)(int16_t)(matrix_gain + gain_q8));
    head[18] = 3;
    head[19] = (unsigned char)streams;
    head[20] = (unsigned char)coupled;
    opus_projection_encoder_ctl(enc, OPUS_PROJECTION_GET_DEMIXING_MATRIX(head + 21, matrix_size));

    const char *vendor = opus_get_version_string();
    int vendor_len = (int)strlen(vendor);
    unsigned char *tags = calloc(16 + vendor_len, 1);
    memcpy(tags, "OpusTags", 8);
    put32(tags + 8, (uint32_t)vendor_len);
    memcpy(tags + 12, vendor, vendor_len);
    put32(tags + 12 + vendor_len, 0);

    FILE *out = fopen(out_path, "wb");
    if (!out) fail("cannot create the output");
    ogg_stream_state os;
    ogg_stream_init(&os, 0x46474c53);
    ogg_packet op = {0};
    op.packet = head;
    op.bytes = head_len;
    op.b_o_s = 1;
    ogg_stream_packetin(&os, &op);
    write_pages(&os, out, 1);
    memset(&op, 0, sizeof op);
    op.packet = tags;
    op.bytes = 16 + vendor_len;
    op.packetno = 1;
    ogg_stream_packetin(&os, &op);
    write_pages(&os, out, 1);

    /* Enough frames that the decoder's output covers the lookahead too. */
    long total = frames + lookahead;
    unsigned char packet[MAX_PACKET];
    float *block = calloc((size_t)FRAME * channels, sizeof(float));
    long packetno = 2;
    for (long start = 0; start < total; start += FRAME) {
        memset(block, 0, sizeof(float) * FRAME * channels);
        long n = frames - start < FRAME ? frames - start : FRAME;
        if (n > 0) memcpy(block, pcm + start * channels, sizeof(float) * n * channels);
        int len = opus_projection_encode_float(enc, block, FRAME, packet, MAX_PACKET);
        if (len < 0) fail("encoding failed");
        int last = start + FRAME >= total;
        memset(&op, 0, sizeof op);
        op.packet = packet;
        op.bytes = len;
        op.packetno = packetno++;
        op.granulepos = last ? frames + lookahead : start + FRAME;
        op.e_o_s = last;
        ogg_stream_packetin(&os, &op);
        write_pages(&os, out, last);
    }
    ogg_stream_clear(&os);
    fclose(out);
    fprintf(stderr, "wrote %s: %d channels, %d streams, %d coupled, pre-skip %d, matrix gain %d\n",
            out_path, channels, streams, coupled, lookahead, matrix_gain);
    opus_projection_encoder_destroy(enc);
    return 0;
}

static int decode(const char *in_path, const char *out_path) {
    FILE *in = fopen(in_path, "rb");
    if (!in) fail("cannot open the input");
    FILE *out = fopen(out_path, "wb");
    if (!out) fail("cannot create the output");
    ogg_sync_state oy;
    ogg_stream_state os;
    ogg_sync_init(&oy);
    int have_stream = 0, packets = 0, channels = 0, family = 0, preskip = 0;
    OpusMSDecoder *ms = NULL;
    OpusProjectionDecoder *proj = NULL;
    float *pcm = NULL;
    int64_t written = 0, decoded = 0;
    for (;;) {
        char *buf = ogg_sync_buffer(&oy, 4096);
        size_t got = fread(buf, 1, 4096, in);
        ogg_sync_wrote(&oy, (long)got);
        ogg_page page;
        while (ogg_sync_pageout(&oy, &page) == 1) {
            if (!have_stream) {
                ogg_stream_init(&os, ogg_page_serialno(&page));
                have_stream = 1;
            }
            ogg_stream_pagein(&os, &page);
            ogg_packet op;
            while (ogg_stream_packetout(&os, &op) == 1) {
                if (packets == 0) {
                    const unsigned char *h = op.packet;
                    if (op.bytes < 19 || memcmp(h, "OpusHead", 8)) fail("not Opus");
                    channels = h[9];
                    preskip = h[10] | h[11] << 8;
                    int gain = (int16_t)(h[16] | h[17] << 8);
                    family = h[18];
                    int err = 0;
                    if (family == 0) {
                        unsigned char map[2] = {0, 1};
                        ms = opus_multistream_decoder_create(48000, channels, 1, channels - 1,
                                                             map, &err);
                    } else if (family == 3) {
                        int matrix_size = 2 * channels * (h[19] + h[20]);
                        proj = opus_projection_decoder_create(48000, channels, h[19], h[20],
                                                              (unsigned char *)h + 21,
                                                              matrix_size, &err);
                    } else {
                        ms = opus_multistream_decoder_create(48000, channels, h[19], h[20],
                                                             h + 21, &err);
                    }
                    if (err != OPUS_OK) fail("cannot create the decoder");
                    if (proj) opus_projection_decoder_ctl(proj, OPUS_SET_GAIN(gain));
                    else opus_multistream_decoder_ctl(ms, OPUS_SET_GAIN(gain));
                    pcm = calloc((size_t)5760 * channels, sizeof(float));
                } else if (packets > 1) {
                    int n = proj ? opus_projection_decode_float(proj, op.packet, op.bytes, pcm,
                                                                5760, 0)
                                 : opus_multistream_decode_float(ms, op.packet, op.bytes, pcm,
                                                                 5760, 0);
                    if (n < 0) fail("decoding failed");
                    int64_t from = decoded < preskip ? preskip - decoded : 0;
                    if (from > n) from = n;
                    int64_t to = n;
                    if (op.e_o_s) {
                        /* End trimming: the last granule position counts the pre-skip too. */
                        int64_t keep = op.granulepos - preskip - written;
                        if (from + keep < to) to = from + keep;
                    }
                    decoded += n;
                    if (to > from) {
                        fwrite(pcm + from * channels, sizeof(float) * channels, to - from, out);
                        written += to - from;
                    }
                }
                packets++;
            }
        }
        if (got == 0) break;
    }
    fclose(out);
    fprintf(stderr, "decoded %s: family %d, %d channels, pre-skip %d, %lld frames\n", in_path,
            family, channels, preskip, (long long)written);
    return 0;
}

int main(int argc, char **argv) {
    if (argc == 7 && !strcmp(argv[1], "encode-projection"))
        return encode_projection(argv[2], atoi(argv[3]), atoi(argv[4]), atoi(argv[5]), argv[6]);
    if (argc == 4 && !strcmp(argv[1], "decode")) return decode(argv[2], argv[3]);
    fprintf(stderr, "usage: opus_reference encode-projection IN.f32 CHANNELS BITRATE GAIN_Q8 "
                    "OUT.opus\n       opus_reference decode IN.opus OUT.f32\n");
    return 2;
}
