/* pt_cmd: the host-command parser of padtune's C library (PROTOCOL.md section 7: settings travel).
 *
 * Feed it the bytes the UART receives, one at a time, from the main loop (an interrupt handler should
 * only queue them). When a line ends (LF, CR or CRLF) the parser runs the command and answers through
 * a pt_emit_t:
 *
 *   ?                        the info line again (without proto), through the `info` hook
 *   get N | get *            one `>val N key=value ...` line per channel, then `>ok get N`
 *   set N|* key=value ...    all pairs checked together with pt_settings_problem() (the profile's rules,
 *                            in its order), applied all or none: `>ok set N key=value ...` (the values
 *                            now in force, in the order given) or `>no set N: key: must be RULE` (the
 *                            first problem's key and its rule, e.g. `must be 1..255`; nothing changed)
 *   keep                     `>ok keep` or `>no keep: reason`, through the `keep` hook
 *   anything else            the `other` hook may take it (a board's own commands); if not,
 *                            `>no WORD: unknown command`
 *
 * Lines that do not fit the buffer (with a NUL after them), and lines holding bytes outside printable
 * ASCII, are refused whole with one `>no` line (short reasons: `line too long`, `no such channel`,
 * `unknown setting`, ...); empty and blank lines are ignored. Every command gets exactly one final `>ok` or
 * `>no` line (`?` answers with the info line only, as it always has).
 *
 * The settings are the application's RAM copy (`pt_settings_t`, pt_types.h): the same array the
 * detector reads, given to pt_cmd_init. At a line end the words become C strings in the line buffer
 * (blanks turned into NULs). `set` checks every value, writes the channel's entry only when all of
 * them pass, and calls the `changed` hook so the detector treats it as a live change
 * (pt_detect_settings_changed). C99, no malloc, no floating point; state in a caller-owned `pt_cmd_t`,
 * the line buffer caller-owned too; hooks const (placeable in flash).
 */
#ifndef PT_CMD_H
#define PT_CMD_H

#include <stddef.h>
#include <stdint.h>

#include "pt_emit.h"
#include "pt_types.h"

/* A line buffer that holds the longest useful command (`set 511` with all nine keys at their widest
 * values is about 230 characters) and the NUL after it. Smaller buffers work; longer commands are then
 * refused. */
#define PT_CMD_LINE_BYTES 256u

/* What the parser asks of the application. All hooks get the `ctx` given to pt_cmd_init. */
typedef struct {
    /* Channel `channel`'s entry of the live settings was just rewritten by `set` (its new values
     * checked): call pt_detect_settings_changed(&detector, channel). NULL: nobody is told. */
    void (*changed)(void *ctx, uint16_t channel);
    /* Store the settings in force so they survive a power cycle. Returns NULL when kept, else the
     * reason (printable ASCII, one line). NULL hook: `keep` is refused (cannot keep settings). */
    const char *(*keep)(void *ctx);
    /* Send the info line without proto (pt_emit_info(..., 0)). NULL hook: `?` is an unknown command. */
    void (*info)(void *ctx);
    /* A line that is none of the above (`len` characters of printable ASCII, tabs as spaces, no line
     * end; a NUL follows them). Return
     * nonzero when the application took it (and answered as it likes); zero, or a NULL hook, gives
     * `>no WORD: unknown command`. */
    int (*other)(void *ctx, const char *line, size_t len);
} pt_cmd_hooks_t;

/* One command port. Fields are private: use the functions below. */
typedef struct {
    const pt_cmd_hooks_t *hooks;
    void *ctx;
    pt_emit_t *out;
    pt_settings_t *settings; /* the live settings, `channels` entries (not owned) */
    char *buf;          /* the caller's line buffer */
    uint16_t size;      /* its size in bytes */
    uint16_t len;       /* characters of the current line held */
    uint16_t channels;  /* channels 0..channels-1 exist */
    uint8_t overlong;   /* the current line outgrew the buffer: the rest is skipped */
    uint8_t binary;     /* the current line holds a byte outside printable ASCII */
} pt_cmd_t;

/* Start a parser for a board of `channels` channels (1..1024) whose live settings are `settings`
 * (`channels` entries in RAM, the array the detector reads; `get` reads it, `set` writes it). `buf`
 * (`size` bytes, 8..65535; PT_CMD_LINE_BYTES is a good size) holds one line, `size` - 1 characters; `out` is the emitter the
 * answers go through. Nothing is copied: all four must outlive the parser. */
void pt_cmd_init(pt_cmd_t *p, const pt_cmd_hooks_t *hooks, void *ctx, pt_emit_t *out,
                 pt_settings_t *settings, uint16_t channels, char *buf, uint16_t size);

/* One received byte. Runs the command (and answers it) when the byte ends a line. Cost: about 15
 * cycles a byte on a Cortex-M0+; at a line end, a few thousand cycles to parse and check a command
 * (`set *` a few hundred more per channel), then the answer's characters through the emitter. Stack:
 * about 280 bytes at the deepest, plus the put-char function's. Flash: the parser is about 2.2 KB. */
void pt_cmd_feed(pt_cmd_t *p, uint8_t byte);

/* Forget a partly received line (the host reconnected, the UART reported a framing error). */
void pt_cmd_reset(pt_cmd_t *p);

/* Run one whole line (no line end; `len` bytes) as if it had been received: for boards that frame
 * lines themselves (USB packets). Its bytes go through pt_cmd_feed() (and the line buffer, whose limit
 * applies), then a line end; `line` itself is not modified. */
void pt_cmd_line(pt_cmd_t *p, const char *line, size_t len);

/* The wire name of a setting (`threshold_counts`, ..., `polarity`: enum pt_setting_key of
 * pt_types.h), or NULL for PT_KEY_NONE and anything past PT_KEY_POLARITY. */
const char *pt_cmd_key_name(int key);

#endif /* PT_CMD_H */
