/* pt_cmd: section 7's host commands, parsed from a caller-owned line buffer (see pt_cmd.h).
 *
 * Written for flash: every answer is one template string expanded by one function (`say`), whose
 * control codes stand for the parts that vary (the channel, the word in question, a value, the reason),
 * so each refusal costs its text and one call. No division anywhere (the M0+ has none). */
#include "pt_cmd.h"

/* No <string.h> calls: the few loops below are smaller than newlib's optimised versions they would
 * pull into the image. */

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

#define ALL_CHANNELS (-1L) /* `*` */
#define MAX_WORD 16u       /* a word is quoted up to this many characters */

/* Template codes (see say()). */
#define A_CMD "\001"   /* the command word */
#define A_CH "\002"    /* the channel: its number, or * */
#define A_WORD "\003"  /* the word in question, as given (at most 16 characters, unprintable ones as ?) */
#define A_LAST "\004"  /* the last channel's number */
#define A_KEY "\005"   /* the setting in question */
#define A_WHY "\006"   /* the reason (a template itself) */
#define A_SIZE "\007"  /* the line buffer's size */
#define A_BAD "\010"   /* the channel `set *` failed on */
#define V_T "\020"     /* \020 + k: the value of setting k */
#define V_H "\021"
#define V_SLOW "\024"
#define V_FAST "\025"
#define V_P "\026"
#define V_X "\027"
#define V_KEY "\030"   /* the value of the setting in question */

static const char *const key_names[NKEYS] = {
    "threshold_counts", "hysteresis_counts", "touch_debounce_frames", "release_debounce_frames",
    "baseline_slow_shift", "baseline_fast_shift", "baseline_period_frames", "stuck_timeout_frames",
    "polarity",
};

typedef struct {
    const char *s;
    size_t len;
} word_t;

/* One command being answered. */
typedef struct {
    pt_cmd_t *p;
    const char *cmd;  /* "get", "set" */
    int32_t ch;       /* the channel, or ALL_CHANNELS */
    int32_t bad;      /* `set *`: the channel whose settings broke the rules */
    word_t word;      /* the word in question */
    unsigned key;     /* the setting in question */
    const char *why;  /* the reason's template */
    int32_t v[NKEYS]; /* settings being checked, or the values given */
} job_t;

const char *pt_cmd_key_name(int key)
{
    return key >= PT_KEY_THRESHOLD_COUNTS && key <= PT_KEY_POLARITY ? key_names[key - 1] : NULL;
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

static int word_is(word_t w, const char *text)
{
    size_t i = 0;
    while (i < w.len && text[i] == w.s[i]) {
        i++;
    }
    return i == w.len && text[i] == '\0';
}

/* How many characters of `w` come before its '=' (w.len when it has none). */
static size_t before_eq(word_t w)
{
    size_t i = 0;
    while (i < w.len && w.s[i] != '=') {
        i++;
    }
    return i;
}

/* The index of the setting named `w`, or NKEYS. */
static unsigned key_of(word_t w)
{
    unsigned k = 0;
    while (k < NKEYS && !word_is(w, key_names[k])) {
        k++;
    }
    return k;
}

/* Decimal (a leading '-' when `sign`) into *out; 0 when not a number or outside int32. */
static int parse_int(word_t w, int sign, int32_t *out)
{
    size_t i = 0;
    uint32_t v = 0;
    uint32_t limit = 2147483647u;
    int negative = sign && w.len > 0 && w.s[0] == '-';
    if (negative) {
        limit = 2147483648u;
        i = 1;
    }
    if (i == w.len) {
        return 0;
    }
    for (; i < w.len; i++) {
        uint32_t digit = (uint32_t)(unsigned char)w.s[i] - (uint32_t)'0';
        if (digit > 9u || v > 214748364u) {
            return 0;
        }
        v = v * 10u + digit; /* at most 2147483649: no overflow */
        if (v > limit) {
            return 0;
        }
    }
    *out = !negative ? (int32_t)v : v == 0u ? 0 : -(int32_t)(v - 1u) - 1;
    return 1;
}

/* --- answers ----------------------------------------------------------------------------------- */

static void emit_value(pt_emit_t *e, unsigned key, int32_t v)
{
    if (key == K_POLARITY) {
        pt_emit_char(e, v < 0 ? '-' : '+');
    } else {
        pt_emit_int(e, v);
    }
}

static void expand(const job_t *j, const char *t)
{
    pt_emit_t *e = j->p->out;
    char c;
    size_t i;
    while ((c = *t++) != '\0') {
        if (c >= 0x10 && c <= 0x18) {
            unsigned k = c == 0x18 ? j->key : (unsigned)(c - 0x10);
            emit_value(e, k, j->v[k]);
            continue;
        }
        switch (c) {
        case 1:
            pt_emit_str(e, j->cmd);
            break;
        case 2:
            if (j->ch == ALL_CHANNELS) {
                pt_emit_char(e, '*');
            } else {
                pt_emit_int(e, j->ch);
            }
            break;
        case 3:
            for (i = 0; i < j->word.len && i < MAX_WORD; i++) {
                char w = j->word.s[i];
                pt_emit_char(e, (w > 0x20 && w < 0x7F) ? w : '?');
            }
            break;
        case 4:
            pt_emit_uint(e, (uint32_t)j->p->channels - 1u);
            break;
        case 5:
            pt_emit_str(e, key_names[j->key]);
            break;
        case 6:
            expand(j, j->why);
            break;
        case 7:
            pt_emit_uint(e, j->p->size);
            break;
        case 8:
            pt_emit_int(e, j->bad);
            break;
        default:
            pt_emit_char(e, c);
            break;
        }
    }
}

/* One whole answer line from a template. */
static void say(const job_t *j, const char *t)
{
    pt_emit_begin(j->p->out);
    expand(j, t);
    pt_emit_end(j->p->out);
}

/* --- the rules of a profile (processing/settings.py), in pt_settings_problem's order ------------- */

static int out_of(int32_t v, int32_t lo, int32_t hi)
{
    return v < lo || v > hi;
}

/* Sets j->key and j->why to the first value of j->v that breaks the rules; 0 when none does. */
static int problem(job_t *j)
{
    const int32_t *v = j->v;
    int32_t period = v[K_PERIOD];
    unsigned k;
    j->why = NULL;
    if (out_of(v[K_THRESHOLD], 1, 16777216L)) {
        j->key = K_THRESHOLD;
        j->why = "must be between 1 and 16777216, not " V_T;
    } else if (v[K_HYSTERESIS] < 0) {
        j->key = K_HYSTERESIS;
        j->why = "must not be negative (" V_H ")";
    } else if (v[K_HYSTERESIS] >= v[K_THRESHOLD]) {
        j->key = K_HYSTERESIS;
        j->why = V_H " must be below the threshold (" V_T "), or the key could never release";
    } else {
        for (k = K_TOUCH_DEBOUNCE; k <= K_FAST_SHIFT && j->why == NULL; k++) {
            int debounce = k <= K_RELEASE_DEBOUNCE;
            if (out_of(v[k], debounce ? 1 : 0, debounce ? 255 : 16)) {
                j->key = k;
                j->why = debounce ? "must be between 1 (react on the first frame) and 255, not " V_KEY
                                  : "must be between 0 and 16, not " V_KEY;
            }
        }
        if (j->why != NULL) {
            return 1;
        }
        if (v[K_FAST_SHIFT] > v[K_SLOW_SHIFT]) {
            j->key = K_FAST_SHIFT;
            j->why = V_FAST " is slower than baseline_slow_shift (" V_SLOW
                     "); the baseline must recover faster than it drifts";
        } else if (out_of(period, 1, 256) || (period & (period - 1)) != 0) {
            j->key = K_PERIOD;
            j->why = "must be a power of two from 1 to 256, not " V_P;
        } else if (v[K_STUCK] < 0) {
            j->key = K_STUCK;
            j->why = "must be 0 (never) or a positive frame count, not " V_X;
        }
    }
    return j->why != NULL;
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

/* Only for values that passed problem(): every one fits its field. */
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

/* --- commands ---------------------------------------------------------------------------------- */

/* Reads the channel word into j->ch; answers and returns 0 when there is none or it is wrong. */
static int channel_of(job_t *j, word_t arg)
{
    j->word = arg;
    if (arg.len == 0) {
        say(j, j->cmd[0] == 'g' ? ">no get: which channel? (get N, or get * for all)"
                                : ">no set: which channel? (set N key=value ..., or set * key=value ...)");
        return 0;
    }
    if (word_is(arg, "*")) {
        j->ch = ALL_CHANNELS;
        return 1;
    }
    if (!parse_int(arg, 0, &j->ch) || j->ch >= (int32_t)j->p->channels) {
        say(j, ">no " A_CMD " " A_WORD ": no such channel (0 to " A_LAST ", or *)");
        return 0;
    }
    return 1;
}

static void run_get(job_t *j, const char *line, size_t len, size_t pos)
{
    pt_emit_t *e = j->p->out;
    uint16_t c;
    unsigned k;
    if (!channel_of(j, next_word(line, len, &pos))) {
        return;
    }
    if (next_word(line, len, &pos).len > 0) {
        say(j, ">no get " A_CH ": one channel at a time (get N, or get * for all)");
        return;
    }
    for (c = 0; c < j->p->channels; c++) {
        if (j->ch != ALL_CHANNELS && c != j->ch) {
            continue;
        }
        to_values(&j->p->settings[c], j->v);
        pt_emit_begin(e);
        pt_emit_str(e, ">val ");
        pt_emit_uint(e, c);
        for (k = 0; k < NKEYS; k++) {
            pt_emit_char(e, ' ');
            pt_emit_str(e, key_names[k]);
            pt_emit_char(e, '=');
            emit_value(e, k, j->v[k]);
        }
        pt_emit_end(e);
    }
    say(j, ">ok get " A_CH);
}

/* `set` from the pairs on: parse all, check all channels, then write. */
static void run_set(job_t *j, const char *line, size_t len, size_t pos)
{
    pt_emit_t *e = j->p->out;
    int32_t given[NKEYS];
    uint16_t have = 0;
    uint16_t c;
    size_t pairs;
    word_t w;
    unsigned k;
    if (!channel_of(j, next_word(line, len, &pos))) {
        return;
    }
    pairs = pos;
    for (w = next_word(line, len, &pos); w.len > 0; w = next_word(line, len, &pos)) {
        size_t eq = before_eq(w);
        word_t value;
        j->word = w;
        if (eq == w.len) {
            say(j, ">no set " A_CH ": " A_WORD ": not key=value");
            return;
        }
        j->word.len = eq;
        value.s = w.s + eq + 1;
        value.len = w.len - eq - 1u;
        k = key_of(j->word);
        if (k == NKEYS) {
            say(j, ">no set " A_CH ": " A_WORD ": unknown setting");
            return;
        }
        if (have & (1u << k)) {
            say(j, ">no set " A_CH ": " A_WORD ": given twice");
            return;
        }
        if (k == K_POLARITY && (word_is(value, "+") || word_is(value, "-"))) {
            given[k] = value.s[0] == '-' ? -1 : 1;
        } else if (k == K_POLARITY || !parse_int(value, 1, &given[k])) {
            j->key = k;
            j->word = value;
            say(j, k == K_POLARITY ? ">no set " A_CH ": " A_KEY ": must be + or -, not '" A_WORD "'"
                                   : ">no set " A_CH ": " A_KEY ": must be a whole number that fits in 32 bits, "
                                     "not '" A_WORD "'");
            return;
        }
        have = (uint16_t)(have | (1u << k));
    }
    if (have == 0) {
        say(j, ">no set " A_CH ": nothing to set (key=value ...)");
        return;
    }
    for (pos = 0; pos < 2; pos++) { /* first check every channel asked, then write them: all or none */
        for (c = 0; c < j->p->channels; c++) {
            if (j->ch != ALL_CHANNELS && c != j->ch) {
                continue;
            }
            to_values(&j->p->settings[c], j->v);
            for (k = 0; k < NKEYS; k++) {
                if (have & (1u << k)) {
                    j->v[k] = given[k];
                }
            }
            if (pos == 1) {
                from_values(&j->p->settings[c], j->v);
                if (j->p->hooks->changed != NULL) {
                    j->p->hooks->changed(j->p->ctx, c);
                }
            } else if (problem(j)) {
                j->bad = c;
                say(j, j->ch == ALL_CHANNELS ? ">no set *: " A_KEY ": " A_WHY " (channel " A_BAD ")"
                                             : ">no set " A_CH ": " A_KEY ": " A_WHY);
                return;
            }
        }
    }
    pt_emit_begin(e);
    expand(j, ">ok set " A_CH);
    for (w = next_word(line, len, &pairs); w.len > 0; w = next_word(line, len, &pairs)) {
        w.len = before_eq(w);
        k = key_of(w);
        pt_emit_char(e, ' ');
        pt_emit_str(e, key_names[k]);
        pt_emit_char(e, '=');
        emit_value(e, k, given[k]);
    }
    pt_emit_end(e);
}

static void run_keep(job_t *j, const char *line, size_t len, size_t pos)
{
    const pt_cmd_hooks_t *h = j->p->hooks;
    if (next_word(line, len, &pos).len > 0) {
        say(j, ">no keep: takes no words after it");
    } else if (h->keep == NULL) {
        say(j, ">no keep: this board cannot keep settings");
    } else if ((j->why = h->keep(j->p->ctx)) != NULL) {
        say(j, ">no keep: " A_WHY);
    } else {
        say(j, ">ok keep");
    }
}

static void run(pt_cmd_t *p, const char *line, size_t len, const char *refusal)
{
    job_t j; /* fields set as they come into use (no memset: it would pull in newlib's) */
    size_t pos = 0;
    j.p = p;
    j.cmd = "";
    j.ch = 0;
    j.bad = 0;
    j.key = 0;
    j.why = "";
    j.word = next_word(line, len, &pos);
    if (refusal != NULL) {
        if (j.word.len == 0) {
            j.word.s = "?";
            j.word.len = 1;
        }
        say(&j, refusal);
    } else if (j.word.len == 0) {
        return; /* a blank line: nothing asked */
    } else if (word_is(j.word, "?") && p->hooks->info != NULL) {
        p->hooks->info(p->ctx);
    } else if (word_is(j.word, "get") || word_is(j.word, "set")) {
        j.cmd = j.word.s[0] == 'g' ? "get" : "set";
        (j.cmd[0] == 'g' ? run_get : run_set)(&j, line, len, pos);
    } else if (word_is(j.word, "keep")) {
        run_keep(&j, line, len, pos);
    } else if (p->hooks->other == NULL || !p->hooks->other(p->ctx, line, len)) {
        say(&j, ">no " A_WORD ": unknown command");
    }
}

static const char not_ascii[] = ">no " A_WORD ": not ASCII text";

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
        run(p, p->buf, p->len,
            p->overlong ? ">no " A_WORD ": line too long (over " A_SIZE " characters)"
                        : p->binary ? not_ascii : NULL);
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
