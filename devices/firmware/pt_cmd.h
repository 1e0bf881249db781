/* pt_cmd: the host-command parser of padtune's C library (PROTOCOL.md section 7: settings travel).
 *
 * Feed it the bytes the UART receives, one at a time, from the main loop (an interrupt handler should
 * only queue them). When a line ends (LF, CR or CRLF) the parser runs the command and answers through
 * a pt_emit_t:
 *
 *   ?                        the info line again (without proto), through the `info` hook
 *   get N | get *            one `>val N key=value ...` line per channel, then `>ok get N`
 *   set N|* key=value ...    all pairs checked together against the profile's rules (the same rules and
 *                            nearly the same words as padtune's processing/settings.py), applied all or
 *                            none: `>ok set N key=value ...` (the values now in force, in the order
 *                            given) or `>no set N: key: reason` (the first problem; nothing changed)
 *   keep                     `>ok keep` or `>no keep: reason`, through the `keep` hook
 *   anything else            the `other` hook may take it (a board's own commands); if not,
 *                            `>no WORD: unknown command`
 *
 * Lines over the buffer's size, and lines holding bytes outside printable ASCII, are refused whole
 * with one `>no` line; empty and blank lines are ignored. Every command gets exactly one final `>ok` or
 * `>no` line (`?` answers with the info line only, as it always has).
 *
 * The parser never owns the settings: it reads and writes them through hooks, as nine int32 values in
 * the order of `pt_cmd_key_t` (polarity +1 or -1), so the application keeps them wherever its detector
 * reads them (a RAM copy of the const profile). C99, no malloc, no floating point; state in a
 * caller-owned `pt_cmd_t`, the line buffer caller-owned too; hooks const (placeable in flash).
 */
#ifndef PT_CMD_H
#define PT_CMD_H

#include <stddef.h>
#include <stdint.h>

#include "pt_emit.h"

/* The settings a host can read and write, in the wire's order (section 7's `>val` line). */
typedef enum {
    PT_KEY_THRESHOLD_COUNTS = 0,
    PT_KEY_HYSTERESIS_COUNTS,
    PT_KEY_TOUCH_DEBOUNCE_FRAMES,
    PT_KEY_RELEASE_DEBOUNCE_FRAMES,
    PT_KEY_BASELINE_SLOW_SHIFT,
    PT_KEY_BASELINE_FAST_SHIFT,
    PT_KEY_BASELINE_PERIOD_FRAMES,
    PT_KEY_STUCK_TIMEOUT_FRAMES,
    PT_KEY_POLARITY, /* +1 touch raises counts, -1 lowers them; on the wire `+` or `-` */
    PT_KEY_COUNT
} pt_cmd_key_t;

/* A line buffer that holds the longest useful command (`set 511` with all nine keys at their widest
 * values is about 230 characters). Smaller buffers work; longer commands are then refused. */
#define PT_CMD_LINE_BYTES 256u

/* What the parser asks of the application. All hooks get the `ctx` given to pt_cmd_init. */
typedef struct {
    /* Fill `values` with channel `channel`'s settings in force (channel < channels). Required. */
    void (*read)(void *ctx, uint16_t channel, int32_t values[PT_KEY_COUNT]);
    /* Put `values` in force for `channel`; they have been checked (see pt_cmd_problem). The detector
     * must treat it as a live settings change (ALGORITHM.md). Required. */
    void (*write)(void *ctx, uint16_t channel, const int32_t values[PT_KEY_COUNT]);
    /* Store the settings in force so they survive a power cycle. Returns NULL when kept, else the
     * reason (printable ASCII, one line). NULL hook: `keep` is refused (cannot keep settings). */
    const char *(*keep)(void *ctx);
    /* Send the info line without proto (pt_emit_info(..., 0)). NULL hook: `?` is an unknown command. */
    void (*info)(void *ctx);
    /* A line that is none of the above (`len` characters of printable ASCII, no line end). Return
     * nonzero when the application took it (and answered as it likes); zero, or a NULL hook, gives
     * `>no WORD: unknown command`. */
    int (*other)(void *ctx, const char *line, size_t len);
} pt_cmd_hooks_t;

/* One command port. Fields are private: use the functions below. */
typedef struct {
    const pt_cmd_hooks_t *hooks;
    void *ctx;
    pt_emit_t *out;
    char *buf;          /* the caller's line buffer */
    uint16_t size;      /* its size in bytes */
    uint16_t len;       /* characters of the current line held */
    uint16_t channels;  /* channels 0..channels-1 exist */
    uint8_t overlong;   /* the current line outgrew the buffer: the rest is skipped */
    uint8_t binary;     /* the current line holds a byte outside printable ASCII */
} pt_cmd_t;

/* Start a parser for a board of `channels` channels (1..512). `buf` (`size` bytes, 8..65535;
 * PT_CMD_LINE_BYTES is a good size) holds one line; `out` is the emitter answers go through. */
void pt_cmd_init(pt_cmd_t *p, const pt_cmd_hooks_t *hooks, void *ctx, pt_emit_t *out,
                 char *buf, uint16_t size, uint16_t channels);

/* One received byte. Runs the command (and answers it) when the byte ends a line. */
void pt_cmd_feed(pt_cmd_t *p, uint8_t byte);

/* Forget a partly received line (the host reconnected, the UART reported a framing error). */
void pt_cmd_reset(pt_cmd_t *p);

/* Run one whole line (no line end; `len` bytes) as if it had been received: for boards that frame
 * lines themselves (USB packets). The buffer limit does not apply; the line is not modified. */
void pt_cmd_line(pt_cmd_t *p, const char *line, size_t len);

/* The first problem of a channel's settings, checked by the rules of a profile
 * (processing/settings.py): PT_KEY_COUNT when there is none, else the key to blame. The `set` command
 * checks with it; an application can check its stored settings at start-up with it too. */
pt_cmd_key_t pt_cmd_problem(const int32_t values[PT_KEY_COUNT]);

/* The wire name of a key (`threshold_counts`, ..., `polarity`); NULL past PT_KEY_COUNT. */
const char *pt_cmd_key_name(pt_cmd_key_t key);

#endif /* PT_CMD_H */
