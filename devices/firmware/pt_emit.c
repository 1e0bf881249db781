/* pt_emit: protocol v1 lines written a character at a time, the CRC kept as they go (see pt_emit.h). */
#include "pt_emit.h"

/* CRC-16/CCITT-FALSE four bits at a time: 16 entries (32 bytes of flash) instead of a 512-byte table,
 * two lookups per byte instead of eight shift-and-test steps. */
static const uint16_t crc_nibble[16] = {
    0x0000, 0x1021, 0x2042, 0x3063, 0x4084, 0x50A5, 0x60C6, 0x70E7,
    0x8108, 0x9129, 0xA14A, 0xB16B, 0xC18C, 0xD1AD, 0xE1CE, 0xF1EF,
};

/* Powers of ten for printing without division (the M0+ has no divide instruction). */
static const uint32_t ten_power[9] = {
    1000000000u, 100000000u, 10000000u, 1000000u, 100000u, 10000u, 1000u, 100u, 10u,
};

static const char hex_digit[16] = {
    '0', '1', '2', '3', '4', '5', '6', '7', '8', '9', 'A', 'B', 'C', 'D', 'E', 'F',
};

uint16_t pt_crc16_step(uint16_t crc, uint8_t byte)
{
    crc = (uint16_t)((crc << 4) ^ crc_nibble[((crc >> 12) ^ (byte >> 4)) & 0x0Fu]);
    crc = (uint16_t)((crc << 4) ^ crc_nibble[((crc >> 12) ^ byte) & 0x0Fu]);
    return crc;
}

static int is_hex(char c)
{
    return (c >= '0' && c <= '9') || (c >= 'A' && c <= 'F') || (c >= 'a' && c <= 'f');
}

void pt_emit_init(pt_emit_t *e, pt_put_fn put, void *ctx, int checksum)
{
    e->put = put;
    e->ctx = ctx;
    e->crc = 0xFFFFu;
    e->seq = 0;
    e->checksum = checksum ? 1u : 0u;
    e->tail = 0;
}

void pt_emit_set_seq(pt_emit_t *e, uint16_t seq)
{
    e->seq = seq;
}

void pt_emit_begin(pt_emit_t *e)
{
    e->crc = 0xFFFFu;
    e->tail = 0;
}

void pt_emit_char(pt_emit_t *e, char c)
{
    e->crc = pt_crc16_step(e->crc, (uint8_t)c);
    if (c == '*') {
        e->tail = 1;
    } else if (e->tail >= 1 && e->tail < 5 && is_hex(c)) {
        e->tail++;
    } else {
        e->tail = 0;
    }
    e->put(e->ctx, c);
}

void pt_emit_str(pt_emit_t *e, const char *s)
{
    while (*s != '\0') {
        pt_emit_char(e, *s++);
    }
}

void pt_emit_strn(pt_emit_t *e, const char *s, size_t n)
{
    while (n-- > 0 && *s != '\0') {
        pt_emit_char(e, *s++);
    }
}

void pt_emit_uint(pt_emit_t *e, uint32_t v)
{
    unsigned i;
    int started = 0;
    for (i = 0; i < 9; i++) {
        char digit = '0';
        while (v >= ten_power[i]) {
            v -= ten_power[i];
            digit++;
        }
        if (started || digit != '0') {
            pt_emit_char(e, digit);
            started = 1;
        }
    }
    pt_emit_char(e, (char)('0' + v));
}

void pt_emit_int(pt_emit_t *e, int32_t v)
{
    if (v < 0) {
        pt_emit_char(e, '-');
        /* -(v + 1) + 1 in unsigned arithmetic: INT32_MIN has no positive int32 */
        pt_emit_uint(e, (uint32_t)(-(v + 1)) + 1u);
    } else {
        pt_emit_uint(e, (uint32_t)v);
    }
}

void pt_emit_end(pt_emit_t *e)
{
    if (e->checksum) {
        uint16_t crc = e->crc;
        e->put(e->ctx, '*');
        e->put(e->ctx, hex_digit[(crc >> 12) & 0x0Fu]);
        e->put(e->ctx, hex_digit[(crc >> 8) & 0x0Fu]);
        e->put(e->ctx, hex_digit[(crc >> 4) & 0x0Fu]);
        e->put(e->ctx, hex_digit[crc & 0x0Fu]);
    } else if (e->tail == 5) {
        e->put(e->ctx, ' ');
    }
    e->put(e->ctx, '\n');
    e->crc = 0xFFFFu;
    e->tail = 0;
}

/* ` key=text`, or nothing when there is no text. `key` holds the blank and the `=`. */
static void text_key(pt_emit_t *e, const char *key, const char *text)
{
    if (text != NULL) {
        pt_emit_str(e, key);
        pt_emit_str(e, text);
    }
}

static void rate(pt_emit_t *e, uint32_t rate_mhz)
{
    uint32_t whole = 0;
    uint32_t milli = rate_mhz;
    unsigned i;
    while (milli >= 1000000u) { /* in big steps first: at most 4294 rounds otherwise */
        milli -= 1000000u;
        whole += 1000u;
    }
    while (milli >= 1000u) {
        milli -= 1000u;
        whole++;
    }
    pt_emit_uint(e, whole);
    if (milli != 0) {
        pt_emit_char(e, '.');
        for (i = 7; i < 9 && milli != 0; i++) { /* 100, 10: the fraction's digits, no trailing zeros */
            char digit = '0';
            while (milli >= ten_power[i]) {
                milli -= ten_power[i];
                digit++;
            }
            pt_emit_char(e, digit);
        }
        if (milli != 0) {
            pt_emit_char(e, (char)('0' + milli));
        }
    }
}

static void polarity(pt_emit_t *e, const int8_t *pol, uint16_t channels)
{
    uint16_t c;
    int same = 1;
    for (c = 1; c < channels; c++) {
        if ((pol[c] < 0) != (pol[0] < 0)) {
            same = 0;
        }
    }
    pt_emit_str(e, " polarity=");
    for (c = 0; c < (same ? 1u : channels); c++) {
        if (c > 0) {
            pt_emit_char(e, ',');
        }
        pt_emit_char(e, pol[c] < 0 ? '-' : '+');
    }
}

void pt_emit_info(pt_emit_t *e, const pt_info_t *info, int announce)
{
    uint16_t c;
    uint16_t n = info->channels;
    pt_emit_begin(e);
    pt_emit_str(e, announce ? "! proto=1" : "!");
    text_key(e, " board=", info->board);
    if (n != 0) {
        pt_emit_str(e, " channels=");
        pt_emit_uint(e, n);
    }
    if (info->rate_mhz != 0) {
        pt_emit_str(e, " rate=");
        rate(e, info->rate_mhz);
    }
    if (info->names != NULL && n != 0) {
        pt_emit_str(e, " names=");
        for (c = 0; c < n; c++) {
            if (c > 0) {
                pt_emit_char(e, ',');
            }
            pt_emit_str(e, info->names[c]);
        }
    }
    text_key(e, " method=", info->method);
    if (info->polarity != NULL && n != 0) {
        polarity(e, info->polarity, n);
    }
    text_key(e, " fw=", info->fw);
    text_key(e, " settings=", info->settings ? "1" : NULL);
    text_key(e, " states=", info->states ? "1" : NULL);
    pt_emit_end(e);
}

void pt_emit_comment(pt_emit_t *e, const char *text)
{
    pt_emit_begin(e);
    pt_emit_char(e, '#');
    pt_emit_char(e, ' ');
    while (*text != '\0') {
        char c = *text++;
        pt_emit_char(e, (c >= 0x20 && c < 0x7F) ? c : (c == '\t' ? ' ' : '?'));
    }
    pt_emit_end(e);
}

void pt_emit_frame(pt_emit_t *e, const int32_t *readings, uint16_t count, const uint8_t *states)
{
    uint16_t c;
    pt_emit_begin(e);
    pt_emit_char(e, '@');
    pt_emit_uint(e, e->seq);
    for (c = 0; c < count; c++) {
        pt_emit_char(e, ' ');
        pt_emit_int(e, readings[c]);
    }
    if (states != NULL) {
        pt_emit_char(e, ';');
        for (c = 0; c < count; c++) {
            pt_emit_char(e, (char)('0' + (states[c] <= 3u ? states[c] : 0u)));
        }
    }
    pt_emit_end(e);
    e->seq++;
}
