/* pt_emit: the protocol v1 emitter of padtune's C library (protocol/PROTOCOL.md).
 *
 * Writes info lines, comment lines, sequenced frames (with the optional state field) and the answer
 * lines of section 7 through a put-char callback the application supplies (a UART's transmit
 * register, a ring buffer, a USB CDC packet). Nothing is buffered: the line checksum (CRC-16/CCITT-FALSE)
 * is updated one character at a time as each character goes out, and `*HHHH` is appended at the end.
 *
 * C99, no malloc, no floating point, no division (numbers are printed by dividing by ten with shifts
 * and adds: a Cortex-M0+ has no divide instruction), no table: 1114 B of flash on a Cortex-M0+. All state lives in a caller-owned `pt_emit_t`; one
 * instance per output port; instances never share anything, so each is re-entrant on its own.
 * A line must be finished before another starts on the same instance: call the emitter from one
 * context (the main loop), never from an interrupt that could cut into a line.
 */
#ifndef PT_EMIT_H
#define PT_EMIT_H

#include <stddef.h>
#include <stdint.h>

/* Key states in the optional state field: PROTOCOL.md section 3 (processing.detections.KeyState). */
#define PT_STATE_RELEASED 0u
#define PT_STATE_CONFIRMING 1u
#define PT_STATE_TOUCHED 2u
#define PT_STATE_RELEASING 3u

/* The longest line the protocol allows (PROTOCOL.md section 1), line end not counted. */
#define PT_MAX_LINE_BYTES 8192u

/* Hands one character to the transport; `ctx` is the pointer given to pt_emit_init. */
typedef void (*pt_put_fn)(void *ctx, char c);

/* One output port. Fields are private: use the functions below. */
typedef struct {
    pt_put_fn put;     /* where characters go */
    void *ctx;         /* passed back to put */
    uint16_t crc;      /* running CRC of the line so far */
    uint16_t seq;      /* sequence number of the next frame, wraps 65535 -> 0 */
    uint8_t checksum;  /* 1: end every line with *HHHH */
    uint8_t tail;      /* how much of a checksum-like `*HHHH` ends the line so far (0..5) */
} pt_emit_t;

/* What the info line says (PROTOCOL.md section 4). Pointers may be NULL (the key is left out);
 * texts must be printable ASCII without spaces (names: 1-32 of A-Z a-z 0-9 _ - .). Can be const,
 * placed in flash. */
typedef struct {
    const char *board;              /* board=... */
    uint16_t channels;              /* channels=N (1..512); 0 leaves it out */
    uint32_t rate_mhz;              /* rate in millihertz: 100000 prints rate=100, 12500 rate=12.5; 0 leaves it out */
    const char *const *names;       /* names=a,b,c: `channels` names */
    const char *method;             /* method=osc */
    const int8_t *polarity;         /* per channel +1/-1: one sign when all agree, else a comma list */
    const char *fw;                 /* fw=0.4.1 */
    uint8_t settings;               /* 1: settings=1 (the board takes section 7's commands) */
    uint8_t states;                 /* 1: states=1 (frames carry the state field) */
} pt_info_t;

/* Start an emitter. `checksum` nonzero appends *HHHH to every line. The first frame gets seq 0. */
void pt_emit_init(pt_emit_t *e, pt_put_fn put, void *ctx, int checksum);

/* Set the sequence number of the next frame (a board that restarts starts again at 0 by itself). */
void pt_emit_set_seq(pt_emit_t *e, uint16_t seq);

/* The info line. `announce` nonzero adds proto=1 (at start-up, or when a host connects: it starts a
 * new session on the host); zero is the answer to `?`, which refreshes the host's view key by key. */
void pt_emit_info(pt_emit_t *e, const pt_info_t *info, int announce);

/* A comment line `# text`. Bytes outside printable ASCII become '?', so the line stays one line of
 * ASCII. */
void pt_emit_comment(pt_emit_t *e, const char *text);

/* One sequenced frame `@seq v0 v1 ...`, then the sequence number counts on. `states` (may be NULL)
 * adds the state field `;ddd` (one PT_STATE_* per channel, 0..3; anything above 3 is sent as 0 -
 * never garble a frame). `count` is 1..512 readings. Cost on a Cortex-M0+: about 70 cycles per
 * character (the CRC bit by bit), about 25 more per digit printed, plus the put-char function: a
 * 5-digit reading is 6 characters. Stack: about 130 bytes, plus the put-char function's. */
void pt_emit_frame(pt_emit_t *e, const int32_t *readings, uint16_t count, const uint8_t *states);

/* Building a line of your own (the answer lines of section 7 are made so): begin, then any mix of
 * chars, strings and numbers, then end (checksum and LF). A line must stay within PT_MAX_LINE_BYTES
 * and must not contain CR or LF. */
/* Starts a line: the running CRC starts again at 0xFFFF. */
void pt_emit_begin(pt_emit_t *e);
/* One character of the line: sent at once, counted in the CRC. */
void pt_emit_char(pt_emit_t *e, char c);
/* A NUL-terminated string, character by character. */
void pt_emit_str(pt_emit_t *e, const char *s);
/* At most `n` characters of `s` (stops early at a NUL). */
void pt_emit_strn(pt_emit_t *e, const char *s, size_t n);
/* A signed decimal number, INT32_MIN included (`-2147483648`). */
void pt_emit_int(pt_emit_t *e, int32_t v);
/* An unsigned decimal number (0..4294967295), no leading zeros. */
void pt_emit_uint(pt_emit_t *e, uint32_t v);
/* Ends the line (and readies the next: pt_emit_begin() is then optional): `*HHHH` when checksums are on; without them, a line that happens to end in `*` and
 * four hex digits gets a trailing space first (the host would read it as a checksum; section 2). */
void pt_emit_end(pt_emit_t *e);

/* CRC-16/CCITT-FALSE (poly 0x1021, init 0xFFFF) of one more byte: the emitter's own step, public so a
 * board can check a host line the same way. */
uint16_t pt_crc16_step(uint16_t crc, uint8_t byte);

#endif /* PT_EMIT_H */
