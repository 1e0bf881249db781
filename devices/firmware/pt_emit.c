/* pt_emit: protocol v1 lines written a character at a time, the CRC kept as they go (see pt_emit.h).
 *
 * Written for flash: the CRC bit by bit (no table), one number printer for readings, counts and the
 * rate's decimals (no table of powers of ten, no division: the M0+ has none), hex digits computed. */
#include "pt_emit.h"

uint16_t pt_crc16_step(uint16_t crc, uint8_t byte)
{
    unsigned i;
    unsigned c = crc ^ ((unsigned)byte << 8);
    for (i = 0; i < 8; i++) {
        c = (c & 0x8000u) ? (c << 1) ^ 0x1021u : c << 1;
    }
    return (uint16_t)c;
}

void pt_emit_init(pt_emit_t *e, pt_put_fn put, void *ctx, int checksum)
{
    e->put = put;
    e->ctx = ctx;
    e->seq = 0;
    e->checksum = checksum ? 1u : 0u;
    pt_emit_begin(e);
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
    uint8_t t = e->tail;
    e->crc = pt_crc16_step(e->crc, (uint8_t)c);
    /* how much of a checksum-like `*HHHH` ends the line so far (only matters without checksums) */
    e->tail = c == '*' ? 1u
              : (t >= 1u && t < 5u && ((c >= '0' && c <= '9') || ((c | 0x20) >= 'a' && (c | 0x20) <= 'f')))
                ? (uint8_t)(t + 1u) : 0u;
    e->put(e->ctx, c);
}

void pt_emit_str(pt_emit_t *e, const char *s)
{
    pt_emit_strn(e, s, (size_t)-1);
}

void pt_emit_strn(pt_emit_t *e, const char *s, size_t n)
{
    while (n-- > 0 && *s != '\0') {
        pt_emit_char(e, *s++);
    }
}

/* v in decimal; `frac` > 0 puts a decimal point before the last `frac` digits (leading zero kept,
 * trailing zeros of the fraction dropped with the point when nothing is left). Digits are found by
 * dividing by ten with shifts and adds (exact for every uint32: Hacker's Delight, divu10) into a
 * 10-byte buffer, then sent most significant first. */
static void number(pt_emit_t *e, uint32_t v, unsigned frac)
{
    char digit[10];
    unsigned n = 0;
    unsigned skip = 0;
    do {
        uint32_t q = (v >> 1) + (v >> 2);
        uint32_t r;
        q += q >> 4;
        q += q >> 8;
        q += q >> 16;
        q >>= 3;
        r = v - q * 10u;
        if (r > 9u) {
            q++;
            r -= 10u;
        }
        digit[n++] = (char)('0' + r);
        v = q;
    } while (v != 0 || n <= frac);
    while (skip < frac && digit[skip] == '0') {
        skip++;
    }
    while (n > skip) {
        if (n == frac) {
            pt_emit_char(e, '.');
        }
        pt_emit_char(e, digit[--n]);
    }
}

void pt_emit_uint(pt_emit_t *e, uint32_t v)
{
    number(e, v, 0);
}

void pt_emit_int(pt_emit_t *e, int32_t v)
{
    uint32_t m = (uint32_t)v; /* modulo 2^32: defined for INT32_MIN too */
    if (v < 0) {
        pt_emit_char(e, '-');
        m = 0u - m;
    }
    number(e, m, 0);
}

void pt_emit_end(pt_emit_t *e)
{
    unsigned i;
    if (e->checksum) {
        uint16_t crc = e->crc;
        e->put(e->ctx, '*');
        for (i = 12; i < 16; i -= 4) { /* 12, 8, 4, 0: unsigned wraps past 0 and stops the loop */
            unsigned h = (crc >> i) & 0x0Fu;
            e->put(e->ctx, (char)(h < 10u ? '0' + h : 'A' - 10u + h));
        }
    } else if (e->tail == 5) {
        e->put(e->ctx, ' ');
    }
    e->put(e->ctx, '\n');
    pt_emit_begin(e);
}

/* ` key=text`, or nothing when there is no text. `key` holds the blank and the `=`. */
static void text_key(pt_emit_t *e, const char *key, const char *text)
{
    if (text != NULL) {
        pt_emit_str(e, key);
        pt_emit_str(e, text);
    }
}

/* ` key=a,b,c`: `n` names, or `n` polarity signs when `names` is NULL. */
static void list(pt_emit_t *e, const char *key, const char *const *names, const int8_t *pol, unsigned n)
{
    unsigned c;
    pt_emit_str(e, key);
    for (c = 0; c < n; c++) {
        text_key(e, c > 0 ? "," : "", names != NULL ? names[c] : pol[c] < 0 ? "-" : "+");
    }
}

void pt_emit_info(pt_emit_t *e, const pt_info_t *info, int announce)
{
    unsigned c;
    unsigned n = info->channels;
    const int8_t *pol = info->polarity;
    pt_emit_str(e, announce ? "! proto=1" : "!");
    text_key(e, " board=", info->board);
    if (n != 0) {
        pt_emit_str(e, " channels=");
        number(e, n, 0);
    }
    if (info->rate_mhz != 0) {
        pt_emit_str(e, " rate=");
        number(e, info->rate_mhz, 3);
    }
    if (info->names != NULL && n != 0) {
        list(e, " names=", info->names, NULL, n);
    }
    text_key(e, " method=", info->method);
    if (pol != NULL && n != 0) {
        for (c = 1; c < n && (pol[c] < 0) == (pol[0] < 0); c++) {
        }
        list(e, " polarity=", NULL, pol, c == n ? 1u : n); /* all agree: one sign */
    }
    text_key(e, " fw=", info->fw);
    text_key(e, " settings=", info->settings ? "1" : NULL);
    text_key(e, " states=", info->states ? "1" : NULL);
    pt_emit_end(e);
}

void pt_emit_comment(pt_emit_t *e, const char *text)
{
    pt_emit_str(e, "# ");
    while (*text != '\0') {
        char c = *text++;
        pt_emit_char(e, (c >= 0x20 && c < 0x7F) ? c : (c == '\t' ? ' ' : '?'));
    }
    pt_emit_end(e);
}

void pt_emit_frame(pt_emit_t *e, const int32_t *readings, uint16_t count, const uint8_t *states)
{
    uint16_t c;
    pt_emit_char(e, '@');
    number(e, e->seq++, 0);
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
}
