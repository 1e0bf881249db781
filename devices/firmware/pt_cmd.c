/* pt_cmd: section 7's host commands, parsed from a caller-owned line buffer (see pt_cmd.h). */
#include "pt_cmd.h"

#include <string.h>

/* The profile's limits (processing/settings.py). */
#define MAX_COUNTS 16777216L /* 1 << 24 */
#define MAX_DEBOUNCE_FRAMES 255
#define MAX_SHIFT 16
#define MAX_PERIOD_FRAMES 256
#define MAX_WORD 16u         /* a refused line's first word is quoted up to this many characters */
#define ALL_CHANNELS 0xFFFFu /* `*` */

/* The settings as the wire lists them, index = enum pt_setting_key - 1. Commands work on int32
 * copies: a value is checked before it is narrowed into pt_settings_t's small fields (300 must be
 * refused as 300, not stored as 44), and a refusal quotes the value as it was given. */
#define NKEYS 9
#define K_THRESHOLD 0
#define K_HYSTERESIS 1
#define K_TOUCH_DEBOUNCE 2
#define K_RELEASE_DEBOUNCE 3
#define K_SLOW_SHIFT 4
#define K_FAST_SHIFT 5
#define K_PERIOD 6
#define K_STUCK 7
#define K_POLARITY 8
#define NO_PROBLEM NKEYS

static const char *const key_names[NKEYS] = {
    "threshold_counts", "hysteresis_counts", "touch_debounce_frames", "release_debounce_frames",
    "baseline_slow_shift", "baseline_fast_shift", "baseline_period_frames", "stuck_timeout_frames",
    "polarity",
};

const char *pt_cmd_key_name(int key)
{
    return key >= PT_KEY_THRESHOLD_COUNTS && key <= PT_KEY_POLARITY ? key_names[key - 1] : NULL;
}

static void to_values(const pt_settings_t *s, int32_t v[NKEYS])
{
    v[K_THRESHOLD] = s->threshold_counts;
    v[K_HYSTERESIS] = s->hysteresis_counts;
    v[K_TOUCH_DEBOUNCE] = s->touch_debounce_frames;
    v[K_RELEASE_DEBOUNCE] = s->release_debounce_frames;
    v[K_SLOW_SHIFT] = s->baseline_slow_shift;
    v[K_FAST_SHIFT] = s->baseline_fast_shift;
    v[K_PERIOD] = s->baseline_period_frames;
    v[K_STUCK] = s->stuck_timeout_frames;
    v[K_POLARITY] = s->polarity < 0 ? -1 : 1;
}

/* Only for values that passed check(): every one fits its field. */
static void from_values(pt_settings_t *s, const int32_t v[NKEYS])
{
    s->threshold_counts = v[K_THRESHOLD];
    s->hysteresis_counts = v[K_HYSTERESIS];
    s->touch_debounce_frames = (uint8_t)v[K_TOUCH_DEBOUNCE];
    s->release_debounce_frames = (uint8_t)v[K_RELEASE_DEBOUNCE];
    s->baseline_slow_shift = (uint8_t)v[K_SLOW_SHIFT];
    s->baseline_fast_shift = (uint8_t)v[K_FAST_SHIFT];
    s->baseline_period_frames = (uint16_t)v[K_PERIOD];
    s->stuck_timeout_frames = v[K_STUCK];
    s->polarity = (int8_t)v[K_POLARITY];
}

void pt_cmd_init(pt_cmd_t *p, const pt_cmd_hooks_t *hooks, void *ctx, pt_emit_t *out,
                 pt_settings_t *settings, uint16_t channels, char *buf, uint16_t size)
{
    p->settings = settings;
    p->hooks = hooks;
    p->ctx = ctx;
    p->out = out;
    p->buf = buf;
    p->size = size;
    p->channels = channels;
    pt_cmd_reset(p);
}

void pt_cmd_reset(pt_cmd_t *p)
{
    p->len = 0;
    p->overlong = 0;
    p->binary = 0;
}

/* --- words ------------------------------------------------------------------------------------- */

typedef struct {
    const char *s;
    size_t len;
} word_t;

static int is_blank(char c)
{
    return c == ' ' || c == '\t';
}

/* The next word at or after *pos; len 0 when the line has no more. */
static word_t next_word(const char *line, size_t len, size_t *pos)
{
    word_t w;
    size_t i = *pos;
    while (i < len && is_blank(line[i])) {
        i++;
    }
    w.s = line + i;
    while (i < len && !is_blank(line[i])) {
        i++;
    }
    w.len = (size_t)(line + i - w.s);
    *pos = i;
    return w;
}

static int word_is(word_t w, const char *text)
{
    size_t n = strlen(text);
    return w.len == n && memcmp(w.s, text, n) == 0;
}

/* A word quoted in an answer: at most MAX_WORD characters, anything unprintable as '?'. */
static void emit_word(pt_emit_t *e, word_t w)
{
    size_t i;
    for (i = 0; i < w.len && i < MAX_WORD; i++) {
        char c = w.s[i];
        pt_emit_char(e, (c > 0x20 && c < 0x7F) ? c : '?');
    }
}

/* Decimal, optional leading '-' when `sign`; 0 when not a number or outside int32. */
static int parse_int(word_t w, int sign, int32_t *out)
{
    size_t i = 0;
    int negative = 0;
    uint32_t v = 0;
    uint32_t limit = 2147483647u;
    if (sign && w.len > 0 && w.s[0] == '-') {
        negative = 1;
        limit = 2147483648u;
        i = 1;
    }
    if (i == w.len) {
        return 0;
    }
    for (; i < w.len; i++) {
        uint32_t digit;
        if (w.s[i] < '0' || w.s[i] > '9') {
            return 0;
        }
        digit = (uint32_t)(w.s[i] - '0');
        if (v > (limit - digit) / 10u) { /* v * 10 + digit > limit */
            return 0;
        }
        v = v * 10u + digit;
    }
    *out = negative ? (int32_t)(-(int32_t)(v - 1u) - 1) : (int32_t)v;
    return 1;
}

/* --- answers ----------------------------------------------------------------------------------- */

/* `>no WORD ARG: ` (ARG left out when its len is 0); the caller writes the reason and ends. */
static void no_head(pt_emit_t *e, const char *command, word_t arg)
{
    pt_emit_begin(e);
    pt_emit_str(e, ">no ");
    pt_emit_str(e, command);
    if (arg.len > 0) {
        pt_emit_char(e, ' ');
        emit_word(e, arg);
    }
    pt_emit_str(e, ": ");
}

/* The channel as the answers name it: its number without leading zeros, or `*`. */
static void emit_target(pt_emit_t *e, int32_t ch)
{
    if (ch == (int32_t)ALL_CHANNELS) {
        pt_emit_char(e, '*');
    } else {
        pt_emit_int(e, ch);
    }
}

/* `>no COMMAND CH: ` for a channel already understood. */
static void no_head_ch(pt_emit_t *e, const char *command, int32_t ch)
{
    pt_emit_begin(e);
    pt_emit_str(e, ">no ");
    pt_emit_str(e, command);
    pt_emit_char(e, ' ');
    emit_target(e, ch);
    pt_emit_str(e, ": ");
}

static void no_line(pt_emit_t *e, const char *command, word_t arg, const char *reason)
{
    no_head(e, command, arg);
    pt_emit_str(e, reason);
    pt_emit_end(e);
}

static void emit_value(pt_emit_t *e, unsigned key, int32_t v)
{
    if (key == K_POLARITY) {
        pt_emit_char(e, v < 0 ? '-' : '+');
    } else {
        pt_emit_int(e, v);
    }
}

/* --- the rules of a profile -------------------------------------------------------------------- */

static int out_of(int32_t v, int32_t lo, int32_t hi)
{
    return v < lo || v > hi;
}

/* The index of the first value that breaks a profile's rules (processing/settings.py, same order as
 * pt_settings_problem), or NO_PROBLEM. */
static unsigned problem(const int32_t v[NKEYS])
{
    int32_t period = v[K_PERIOD];
    if (out_of(v[K_THRESHOLD], 1, MAX_COUNTS)) {
        return K_THRESHOLD;
    }
    if (v[K_HYSTERESIS] < 0 || v[K_HYSTERESIS] >= v[K_THRESHOLD]) {
        return K_HYSTERESIS;
    }
    if (out_of(v[K_TOUCH_DEBOUNCE], 1, MAX_DEBOUNCE_FRAMES)) {
        return K_TOUCH_DEBOUNCE;
    }
    if (out_of(v[K_RELEASE_DEBOUNCE], 1, MAX_DEBOUNCE_FRAMES)) {
        return K_RELEASE_DEBOUNCE;
    }
    if (out_of(v[K_SLOW_SHIFT], 0, MAX_SHIFT)) {
        return K_SLOW_SHIFT;
    }
    if (out_of(v[K_FAST_SHIFT], 0, MAX_SHIFT)
        || v[K_FAST_SHIFT] > v[K_SLOW_SHIFT]) {
        return K_FAST_SHIFT;
    }
    if (out_of(period, 1, MAX_PERIOD_FRAMES) || (period & (period - 1)) != 0) {
        return K_PERIOD;
    }
    if (v[K_STUCK] < 0) {
        return K_STUCK;
    }
    if (v[K_POLARITY] != 1 && v[K_POLARITY] != -1) {
        return K_POLARITY;
    }
    return NO_PROBLEM;
}

static void between(pt_emit_t *e, const char *lo, int32_t hi, int32_t v)
{
    pt_emit_str(e, "must be between ");
    pt_emit_str(e, lo);
    pt_emit_str(e, " and ");
    pt_emit_int(e, hi);
    pt_emit_str(e, ", not ");
    pt_emit_int(e, v);
}

/* The reason, in processing/settings.py's words, why `key` of `v` is refused. */
static void emit_reason(pt_emit_t *e, unsigned key, const int32_t v[NKEYS])
{
    int32_t x = v[key];
    switch (key) {
    case K_THRESHOLD:
        between(e, "1", MAX_COUNTS, x);
        break;
    case K_HYSTERESIS:
        if (x < 0) {
            pt_emit_str(e, "must not be negative (");
            pt_emit_int(e, x);
            pt_emit_char(e, ')');
        } else {
            pt_emit_int(e, x);
            pt_emit_str(e, " must be below the threshold (");
            pt_emit_int(e, v[K_THRESHOLD]);
            pt_emit_str(e, "), or the key could never release");
        }
        break;
    case K_TOUCH_DEBOUNCE:
    case K_RELEASE_DEBOUNCE:
        between(e, "1 (react on the first frame)", MAX_DEBOUNCE_FRAMES, x);
        break;
    case K_SLOW_SHIFT:
        between(e, "0", MAX_SHIFT, x);
        break;
    case K_FAST_SHIFT:
        if (out_of(x, 0, MAX_SHIFT)) {
            between(e, "0", MAX_SHIFT, x);
        } else {
            pt_emit_int(e, x);
            pt_emit_str(e, " is slower than baseline_slow_shift (");
            pt_emit_int(e, v[K_SLOW_SHIFT]);
            pt_emit_str(e, "); the baseline must recover faster than it drifts");
        }
        break;
    case K_PERIOD:
        pt_emit_str(e, "must be a power of two from 1 to 256, not ");
        pt_emit_int(e, x);
        break;
    case K_STUCK:
        pt_emit_str(e, "must be 0 (never) or a positive frame count, not ");
        pt_emit_int(e, x);
        break;
    default:
        pt_emit_str(e, "must be + or -, not ");
        pt_emit_int(e, x);
        break;
    }
}

/* --- commands ---------------------------------------------------------------------------------- */

/* The channel word: 0..channels-1, or ALL_CHANNELS for `*`; -1 (after answering) when unusable. */
static int32_t channel_of(pt_cmd_t *p, const char *command, word_t arg)
{
    int32_t ch;
    if (arg.len == 0) {
        no_line(p->out, command, arg, command[0] == 'g'
                ? "which channel? (get N, or get * for all)"
                : "which channel? (set N key=value ..., or set * key=value ...)");
        return -1;
    }
    if (word_is(arg, "*")) {
        return (int32_t)ALL_CHANNELS;
    }
    if (!parse_int(arg, 0, &ch) || ch >= (int32_t)p->channels) {
        no_head(p->out, command, arg);
        pt_emit_str(p->out, "no such channel (0 to ");
        pt_emit_uint(p->out, (uint32_t)p->channels - 1u);
        pt_emit_str(p->out, ", or *)");
        pt_emit_end(p->out);
        return -1;
    }
    return ch;
}

static void run_get(pt_cmd_t *p, const char *line, size_t len, size_t pos)
{
    word_t arg = next_word(line, len, &pos);
    int32_t ch = channel_of(p, "get", arg);
    uint16_t first, last, c;
    int32_t v[NKEYS];
    unsigned k;
    if (ch < 0) {
        return;
    }
    if (next_word(line, len, &pos).len > 0) {
        no_head_ch(p->out, "get", ch);
        pt_emit_str(p->out, "one channel at a time (get N, or get * for all)");
        pt_emit_end(p->out);
        return;
    }
    first = ch == (int32_t)ALL_CHANNELS ? 0u : (uint16_t)ch;
    last = ch == (int32_t)ALL_CHANNELS ? (uint16_t)(p->channels - 1u) : (uint16_t)ch;
    for (c = first; c <= last; c++) {
        to_values(&p->settings[c], v);
        pt_emit_begin(p->out);
        pt_emit_str(p->out, ">val ");
        pt_emit_uint(p->out, c);
        for (k = 0; k < NKEYS; k++) {
            pt_emit_char(p->out, ' ');
            pt_emit_str(p->out, key_names[k]);
            pt_emit_char(p->out, '=');
            emit_value(p->out, k, v[k]);
        }
        pt_emit_end(p->out);
    }
    pt_emit_begin(p->out);
    pt_emit_str(p->out, ">ok get ");
    emit_target(p->out, ch);
    pt_emit_end(p->out);
}

/* `>no set CH: KEY: ` */
static void set_no(pt_cmd_t *p, int32_t ch, word_t key)
{
    no_head_ch(p->out, "set", ch);
    emit_word(p->out, key);
    pt_emit_str(p->out, ": ");
}

/* Reads the pairs into `given` (marking `have`); answers and returns 0 at the first that is wrong. */
static int read_pairs(pt_cmd_t *p, int32_t ch, const char *line, size_t len, size_t pos,
                      int32_t given[NKEYS], uint16_t *have)
{
    word_t w;
    *have = 0;
    for (w = next_word(line, len, &pos); w.len > 0; w = next_word(line, len, &pos)) {
        const char *eq = memchr(w.s, '=', w.len);
        word_t name, value;
        unsigned k;
        if (eq == NULL) {
            set_no(p, ch, w);
            pt_emit_str(p->out, "not key=value");
            pt_emit_end(p->out);
            return 0;
        }
        name.s = w.s;
        name.len = (size_t)(eq - w.s);
        value.s = eq + 1;
        value.len = w.len - name.len - 1u;
        for (k = 0; k < NKEYS && !word_is(name, key_names[k]); k++) {
        }
        if (k == NKEYS) {
            set_no(p, ch, name);
            pt_emit_str(p->out, "unknown setting");
            pt_emit_end(p->out);
            return 0;
        }
        if (*have & (1u << k)) {
            set_no(p, ch, name);
            pt_emit_str(p->out, "given twice");
            pt_emit_end(p->out);
            return 0;
        }
        if (k == K_POLARITY) {
            if (word_is(value, "+") || word_is(value, "-")) {
                given[k] = value.s[0] == '-' ? -1 : 1;
            } else {
                set_no(p, ch, name);
                pt_emit_str(p->out, "must be + or -, not '");
                emit_word(p->out, value);
                pt_emit_str(p->out, "'");
                pt_emit_end(p->out);
                return 0;
            }
        } else if (!parse_int(value, 1, &given[k])) {
            set_no(p, ch, name);
            pt_emit_str(p->out, "must be a whole number that fits in 32 bits, not '");
            emit_word(p->out, value);
            pt_emit_str(p->out, "'");
            pt_emit_end(p->out);
            return 0;
        }
        *have = (uint16_t)(*have | (1u << k));
    }
    return 1;
}

static void merge(int32_t v[NKEYS], const int32_t given[NKEYS], uint16_t have)
{
    unsigned k;
    for (k = 0; k < NKEYS; k++) {
        if (have & (1u << k)) {
            v[k] = given[k];
        }
    }
}

static void run_set(pt_cmd_t *p, const char *line, size_t len, size_t pos)
{
    word_t arg = next_word(line, len, &pos);
    int32_t ch = channel_of(p, "set", arg);
    int32_t given[NKEYS];
    int32_t v[NKEYS];
    uint16_t have, first, last, c;
    size_t pairs = pos;
    word_t w;
    if (ch < 0) {
        return;
    }
    if (!read_pairs(p, ch, line, len, pos, given, &have)) {
        return;
    }
    if (have == 0) {
        no_head_ch(p->out, "set", ch);
        pt_emit_str(p->out, "nothing to set (key=value ...)");
        pt_emit_end(p->out);
        return;
    }
    first = ch == (int32_t)ALL_CHANNELS ? 0u : (uint16_t)ch;
    last = ch == (int32_t)ALL_CHANNELS ? (uint16_t)(p->channels - 1u) : (uint16_t)ch;
    for (c = first; c <= last; c++) { /* all checked before any is written: all or none */
        unsigned bad;
        to_values(&p->settings[c], v);
        merge(v, given, have);
        bad = problem(v);
        if (bad != NO_PROBLEM) {
            no_head_ch(p->out, "set", ch);
            pt_emit_str(p->out, key_names[bad]);
            pt_emit_str(p->out, ": ");
            emit_reason(p->out, bad, v);
            if (ch == (int32_t)ALL_CHANNELS) {
                pt_emit_str(p->out, " (channel ");
                pt_emit_uint(p->out, c);
                pt_emit_char(p->out, ')');
            }
            pt_emit_end(p->out);
            return;
        }
    }
    for (c = first; c <= last; c++) {
        to_values(&p->settings[c], v);
        merge(v, given, have);
        from_values(&p->settings[c], v);
        if (p->hooks->changed != NULL) {
            p->hooks->changed(p->ctx, c);
        }
    }
    pt_emit_begin(p->out);
    pt_emit_str(p->out, ">ok set ");
    emit_target(p->out, ch);
    for (w = next_word(line, len, &pairs); w.len > 0; w = next_word(line, len, &pairs)) {
        const char *eq = memchr(w.s, '=', w.len);
        word_t name;
        unsigned k;
        name.s = w.s;
        name.len = (size_t)(eq - w.s);
        for (k = 0; !word_is(name, key_names[k]); k++) {
        }
        pt_emit_char(p->out, ' ');
        pt_emit_str(p->out, key_names[k]);
        pt_emit_char(p->out, '=');
        emit_value(p->out, k, given[k]);
    }
    pt_emit_end(p->out);
}

static void run_keep(pt_cmd_t *p, const char *line, size_t len, size_t pos)
{
    word_t none = {NULL, 0};
    const char *why;
    if (next_word(line, len, &pos).len > 0) {
        no_line(p->out, "keep", none, "takes no words after it");
        return;
    }
    if (p->hooks->keep == NULL) {
        no_line(p->out, "keep", none, "this board cannot keep settings");
        return;
    }
    why = p->hooks->keep(p->ctx);
    if (why != NULL) {
        no_line(p->out, "keep", none, why);
        return;
    }
    pt_emit_begin(p->out);
    pt_emit_str(p->out, ">ok keep");
    pt_emit_end(p->out);
}

static void refuse_word(pt_cmd_t *p, word_t first, const char *reason)
{
    pt_emit_begin(p->out);
    pt_emit_str(p->out, ">no ");
    if (first.len > 0) {
        emit_word(p->out, first);
    } else {
        pt_emit_char(p->out, '?');
    }
    pt_emit_str(p->out, ": ");
    pt_emit_str(p->out, reason);
}

static void run(pt_cmd_t *p, const char *line, size_t len)
{
    size_t pos = 0;
    word_t first = next_word(line, len, &pos);
    if (first.len == 0) {
        return; /* a blank line: nothing asked */
    }
    if (word_is(first, "?") && p->hooks->info != NULL) {
        p->hooks->info(p->ctx);
    } else if (word_is(first, "get")) {
        run_get(p, line, len, pos);
    } else if (word_is(first, "set")) {
        run_set(p, line, len, pos);
    } else if (word_is(first, "keep")) {
        run_keep(p, line, len, pos);
    } else if (p->hooks->other == NULL || !p->hooks->other(p->ctx, line, len)) {
        refuse_word(p, first, "unknown command");
        pt_emit_end(p->out);
    }
}

void pt_cmd_line(pt_cmd_t *p, const char *line, size_t len)
{
    size_t i;
    size_t pos = 0;
    for (i = 0; i < len; i++) {
        if (!is_blank(line[i]) && (line[i] < 0x20 || line[i] > 0x7E)) {
            refuse_word(p, next_word(line, len, &pos), "not ASCII text");
            pt_emit_end(p->out);
            return;
        }
    }
    run(p, line, len);
}

void pt_cmd_feed(pt_cmd_t *p, uint8_t byte)
{
    if (byte == '\n' || byte == '\r') {
        if (p->overlong) {
            size_t pos = 0;
            refuse_word(p, next_word(p->buf, p->len, &pos), "line too long (over ");
            pt_emit_uint(p->out, p->size);
            pt_emit_str(p->out, " characters)");
            pt_emit_end(p->out);
        } else if (p->binary) {
            size_t pos = 0;
            refuse_word(p, next_word(p->buf, p->len, &pos), "not ASCII text");
            pt_emit_end(p->out);
        } else {
            run(p, p->buf, p->len);
        }
        pt_cmd_reset(p);
        return;
    }
    if (!is_blank((char)byte) && (byte < 0x20u || byte > 0x7Eu)) {
        p->binary = 1;
    }
    if (p->len < p->size) {
        p->buf[p->len++] = (char)byte;
    } else {
        p->overlong = 1;
    }
}
