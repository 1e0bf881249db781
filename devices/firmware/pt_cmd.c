/* pt_cmd: section 7's host commands, parsed from a caller-owned line buffer (see pt_cmd.h).
 *
 * Written for flash: the rules are pt_settings_problem()'s (one statement of them in C, in the profile's
 * order), a refusal names the key and that key's rule from one table (`rules`, by key, not by sentence),
 * and the setting names are one NUL-separated table read by the parser and its answers alike. A value
 * its field cannot hold (300 for a debounce, a word that is no number) is stored as one the rules refuse
 * for that same key, so the first problem named is the profile's. No division, no <string.h> call. */
#include "pt_cmd.h"

#define ALL_CHANNELS (-1L) /* `*` */
#define NO_CHANNEL (-2L)   /* a channel word that names no channel: quoted as given */
#define MAX_WORD 16u       /* a word is quoted up to this many characters */
#define NOT_A_NUMBER (-2147483647L - 1L) /* breaks the rule of every numeric key */

/* The setting keys as the wire names them, in enum pt_setting_key's order from 1, NUL-separated. */
static const char key_names[] =
    "threshold_counts\0hysteresis_counts\0touch_debounce_frames\0release_debounce_frames\0"
    "baseline_slow_shift\0baseline_fast_shift\0baseline_period_frames\0stuck_timeout_frames\0polarity";

/* What each key must be: the rule pt_settings_problem() checks for it, same order. */
static const char rules[] =
    "1..16777216\0" "0..threshold_counts-1\0" "1..255\0" "1..255\0" "0..16\0" "0..baseline_slow_shift\0"
    "a power of two 1..256\0" "0..2147483647\0" "+ or -";

typedef struct {
    const char *s;
    size_t len;
} word_t;

/* One command being answered: its first word and channel word say whom an answer is for. */
typedef struct {
    pt_cmd_t *p;
    word_t cmd;  /* the first word */
    word_t chw;  /* the channel word of get / set (len 0: none) */
    int32_t ch;  /* its channel, ALL_CHANNELS or NO_CHANNEL */
} job_t;

/* The n-th (from 0) string of a NUL-separated list. */
static const char *nth(const char *list, unsigned n)
{
    while (n-- > 0) {
        while (*list++ != '\0') {
        }
    }
    return list;
}

const char *pt_cmd_key_name(int key)
{
    return key >= PT_KEY_THRESHOLD_COUNTS && key <= PT_KEY_POLARITY ? nth(key_names, (unsigned)key - 1u) : NULL;
}

void pt_cmd_init(pt_cmd_t *p, const pt_cmd_hooks_t *hooks, void *ctx, pt_emit_t *out,
                 pt_settings_t *settings, uint16_t channels, char *buf, uint16_t size)
{
    p->hooks = hooks;
    p->ctx = ctx;
    p->out = out;
    p->settings = settings;
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

/* 1 when `w` is exactly the NUL-terminated `text`. */
static int word_is(word_t w, const char *text)
{
    size_t i = 0;
    while (i < w.len && text[i] == w.s[i]) {
        i++;
    }
    return i == w.len && text[i] == '\0';
}

/* The key (enum pt_setting_key) named `w`, or PT_KEY_NONE. */
static unsigned key_of(word_t w)
{
    unsigned k;
    for (k = PT_KEY_THRESHOLD_COUNTS; k <= PT_KEY_POLARITY; k++) {
        if (word_is(w, nth(key_names, k - 1u))) {
            return k;
        }
    }
    return PT_KEY_NONE;
}

/* Decimal with an optional '-' (only when `sign`), or NOT_A_NUMBER when `w` is none or outside int32
 * (NOT_A_NUMBER itself, -2147483648, reads back as itself). */
static int32_t parse_int(word_t w, int sign)
{
    size_t i = 0;
    uint32_t v = 0;
    uint32_t limit = 2147483647u;
    if (sign && w.len > 0 && w.s[0] == '-') {
        limit = 2147483648u;
        i = 1;
    }
    if (i == w.len) {
        return NOT_A_NUMBER;
    }
    for (; i < w.len; i++) {
        uint32_t digit = (uint32_t)(unsigned char)w.s[i] - (uint32_t)'0';
        if (digit > 9u || v > 214748364u) {
            return NOT_A_NUMBER;
        }
        v = v * 10u + digit; /* at most 2147483649: no overflow */
        if (v > limit) {
            return NOT_A_NUMBER;
        }
    }
    return limit == 2147483647u ? (int32_t)v : v == 0u ? 0 : -(int32_t)(v - 1u) - 1;
}

/* --- settings by key --------------------------------------------------------------------------- */

static int32_t get(const pt_settings_t *s, unsigned k)
{
    switch (k) {
    case PT_KEY_THRESHOLD_COUNTS: return s->threshold_counts;
    case PT_KEY_HYSTERESIS_COUNTS: return s->hysteresis_counts;
    case PT_KEY_TOUCH_DEBOUNCE_FRAMES: return s->touch_debounce_frames;
    case PT_KEY_RELEASE_DEBOUNCE_FRAMES: return s->release_debounce_frames;
    case PT_KEY_BASELINE_SLOW_SHIFT: return s->baseline_slow_shift;
    case PT_KEY_BASELINE_FAST_SHIFT: return s->baseline_fast_shift;
    case PT_KEY_BASELINE_PERIOD_FRAMES: return s->baseline_period_frames;
    case PT_KEY_STUCK_TIMEOUT_FRAMES: return s->stuck_timeout_frames;
    default: return s->polarity;
    }
}

/* Writes `v` into key k's field. A value the field cannot hold becomes one pt_settings_problem() refuses
 * for that key (a debounce 0, a shift 255, a period 0); any value the field holds is kept as it is. */
static void put(pt_settings_t *s, unsigned k, int32_t v)
{
    uint8_t small = (v < 0 || v > 255) ? (k <= PT_KEY_RELEASE_DEBOUNCE_FRAMES ? 0u : 255u) : (uint8_t)v;
    switch (k) {
    case PT_KEY_THRESHOLD_COUNTS: s->threshold_counts = v; break;
    case PT_KEY_HYSTERESIS_COUNTS: s->hysteresis_counts = v; break;
    case PT_KEY_TOUCH_DEBOUNCE_FRAMES: s->touch_debounce_frames = small; break;
    case PT_KEY_RELEASE_DEBOUNCE_FRAMES: s->release_debounce_frames = small; break;
    case PT_KEY_BASELINE_SLOW_SHIFT: s->baseline_slow_shift = small; break;
    case PT_KEY_BASELINE_FAST_SHIFT: s->baseline_fast_shift = small; break;
    case PT_KEY_BASELINE_PERIOD_FRAMES: s->baseline_period_frames = (v < 0 || v > 65535) ? 0u : (uint16_t)v; break;
    case PT_KEY_STUCK_TIMEOUT_FRAMES: s->stuck_timeout_frames = v; break;
    default: s->polarity = (v < -128 || v > 127) ? 0 : (int8_t)v; break;
    }
}

/* ` key=value` (polarity as + or -). */
static void pair(pt_emit_t *e, unsigned k, int32_t v)
{
    pt_emit_char(e, ' ');
    pt_emit_str(e, nth(key_names, k - 1u));
    pt_emit_char(e, '=');
    if (k == PT_KEY_POLARITY) {
        pt_emit_char(e, v < 0 ? '-' : '+');
    } else {
        pt_emit_int(e, v);
    }
}

/* --- answers ----------------------------------------------------------------------------------- */

/* A word as given, at most MAX_WORD characters, anything unprintable as '?'. */
static void quote(pt_emit_t *e, word_t w)
{
    size_t i;
    for (i = 0; i < w.len && i < MAX_WORD; i++) {
        pt_emit_char(e, (w.s[i] > 0x20 && w.s[i] < 0x7F) ? w.s[i] : '?');
    }
}

/* Begins an answer: `>ok ` or `>no `, then whom it is for (`get 3`, `set *`, `keep`, the word). */
static void head(const job_t *j, const char *kind)
{
    pt_emit_t *e = j->p->out;
    pt_emit_str(e, kind);
    quote(e, j->cmd);
    if (j->chw.len > 0) {
        pt_emit_char(e, ' ');
        if (j->ch == ALL_CHANNELS) {
            pt_emit_char(e, '*');
        } else if (j->ch == NO_CHANNEL) {
            quote(e, j->chw);
        } else {
            pt_emit_uint(e, (uint32_t)j->ch);
        }
    }
}

/* `>no SUBJECT: [WORD: ]why`, or for a broken rule (key != 0) `>no SUBJECT: key: must be RULE`
 * ` (channel N)` after it when `set *` found it on channel `bad`. */
static void no(const job_t *j, const word_t *w, const char *why, unsigned key, int32_t bad)
{
    pt_emit_t *e = j->p->out;
    head(j, ">no ");
    pt_emit_str(e, ": ");
    if (w != NULL) {
        quote(e, *w);
        pt_emit_str(e, ": ");
    }
    if (key != PT_KEY_NONE) {
        pt_emit_str(e, nth(key_names, key - 1u));
        pt_emit_str(e, ": must be ");
        why = nth(rules, key - 1u);
    }
    pt_emit_str(e, why);
    if (bad >= 0) {
        pt_emit_str(e, " (channel ");
        pt_emit_uint(e, (uint32_t)bad);
        pt_emit_char(e, ')');
    }
    pt_emit_end(e);
}

static void ok(const job_t *j)
{
    head(j, ">ok ");
    pt_emit_end(j->p->out);
}

/* --- commands ---------------------------------------------------------------------------------- */

static void run_get(job_t *j)
{
    pt_emit_t *e = j->p->out;
    uint16_t c;
    unsigned k;
    for (c = 0; c < j->p->channels; c++) {
        if (j->ch == ALL_CHANNELS || c == j->ch) {
            pt_emit_str(e, ">val ");
            pt_emit_uint(e, c);
            for (k = PT_KEY_THRESHOLD_COUNTS; k <= PT_KEY_POLARITY; k++) {
                pair(e, k, get(&j->p->settings[c], k));
            }
            pt_emit_end(e);
        }
    }
    ok(j);
}

/* `set` from the pairs on: read them all, check every channel asked, then write: all or none. */
static void run_set(job_t *j, const char *line, size_t len, size_t pos)
{
    pt_cmd_t *p = j->p;
    pt_settings_t given;
    pt_settings_t now;
    uint8_t order[PT_KEY_POLARITY];
    unsigned n = 0;
    unsigned have = 0;
    unsigned k;
    unsigned pass;
    uint16_t c;
    word_t w;
    for (w = next_word(line, len, &pos); w.len > 0; w = next_word(line, len, &pos)) {
        word_t name = w;
        word_t value;
        name.len = 0;
        while (name.len < w.len && w.s[name.len] != '=') {
            name.len++;
        }
        value.s = w.s + name.len + 1;
        value.len = w.len - name.len - 1u;
        k = key_of(name);
        if (name.len == w.len || k == PT_KEY_NONE || (have & (1u << k)) != 0) {
            no(j, name.len == w.len ? &w : &name,
               name.len == w.len ? "not key=value" : k == PT_KEY_NONE ? "unknown setting" : "given twice",
               PT_KEY_NONE, -1);
            return;
        }
        have |= 1u << k;
        order[n++] = (uint8_t)k;
        put(&given, k, k != PT_KEY_POLARITY ? parse_int(value, 1)
                       : word_is(value, "+") ? 1 : word_is(value, "-") ? -1 : 0);
    }
    if (n == 0) {
        no(j, NULL, "nothing to set", PT_KEY_NONE, -1);
        return;
    }
    for (pass = 0; pass < 2; pass++) {
        for (c = 0; c < p->channels; c++) {
            if (j->ch != ALL_CHANNELS && c != j->ch) {
                continue;
            }
            for (k = PT_KEY_THRESHOLD_COUNTS; k <= PT_KEY_POLARITY; k++) {
                put(pass ? &p->settings[c] : &now, k, get((have & (1u << k)) ? &given : &p->settings[c], k));
            }
            if (pass != 0) {
                if (p->hooks->changed != NULL) {
                    p->hooks->changed(p->ctx, c);
                }
            } else if ((k = (unsigned)pt_settings_problem(&now)) != PT_KEY_NONE) {
                no(j, NULL, NULL, k, j->ch == ALL_CHANNELS ? (int32_t)c : -1);
                return;
            }
        }
    }
    head(j, ">ok ");
    for (k = 0; k < n; k++) {
        pair(p->out, order[k], get(&given, order[k]));
    }
    pt_emit_end(p->out);
}

static void run(pt_cmd_t *p, const char *line, size_t len, const char *refusal)
{
    job_t j;
    size_t pos = 0;
    const char *why = "unknown command";
    int getset;
    j.p = p;
    j.cmd = next_word(line, len, &pos);
    j.chw.len = 0;
    j.ch = NO_CHANNEL;
    if (refusal != NULL) {
        if (j.cmd.len == 0) {
            j.cmd.s = "?";
            j.cmd.len = 1;
        }
        why = refusal;
    } else if (j.cmd.len == 0) {
        return; /* a blank line: nothing asked */
    } else if (word_is(j.cmd, "?") && p->hooks->info != NULL) {
        p->hooks->info(p->ctx);
        return;
    } else if ((getset = word_is(j.cmd, "get") || word_is(j.cmd, "set")) != 0 || word_is(j.cmd, "keep")) {
        if (getset) {
            j.chw = next_word(line, len, &pos);
            j.ch = word_is(j.chw, "*") ? ALL_CHANNELS : parse_int(j.chw, 0);
            if (j.ch < ALL_CHANNELS || j.ch >= (int32_t)p->channels) {
                j.ch = NO_CHANNEL;
            }
            why = j.chw.len == 0 ? "which channel?" : j.ch == NO_CHANNEL ? "no such channel" : NULL;
            if (why == NULL && j.cmd.s[0] == 's') {
                run_set(&j, line, len, pos);
                return;
            }
        } else {
            why = p->hooks->keep == NULL ? "cannot keep settings" : NULL;
        }
        if (why == NULL && next_word(line, len, &pos).len > 0) {
            why = "too many words";
        }
        if (why == NULL && getset) {
            run_get(&j);
            return;
        }
        if (why == NULL && (why = p->hooks->keep(p->ctx)) == NULL) {
            ok(&j);
            return;
        }
    } else if (p->hooks->other != NULL && p->hooks->other(p->ctx, line, len)) {
        return;
    }
    no(&j, NULL, why, PT_KEY_NONE, -1);
}

static const char not_ascii[] = "not ASCII text";

void pt_cmd_line(pt_cmd_t *p, const char *line, size_t len)
{
    size_t i;
    for (i = 0; i < len && (is_blank(line[i]) || (line[i] >= 0x20 && line[i] < 0x7F)); i++) {
    }
    run(p, line, len, i < len ? not_ascii : NULL);
}

void pt_cmd_feed(pt_cmd_t *p, uint8_t byte)
{
    if (byte == '\n' || byte == '\r') {
        run(p, p->buf, p->len, p->overlong ? "line too long" : p->binary ? not_ascii : NULL);
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
