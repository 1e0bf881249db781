/* pt_cmd: section 7's host commands, parsed from a caller-owned line buffer (see pt_cmd.h).
 *
 * Written for flash: the rules are pt_settings_problem()'s (one statement of them in C, in the profile's
 * order), a refusal names the key and that key's rule from one table (`rules`, by key, not by sentence),
 * the setting names are one NUL-separated table read by the parser and its answers alike, and the
 * command words and the keys are found by one lookup (`find`). `set` writes the given values into a
 * copy of each channel's entry and checks the copy, so nothing is written before all pass. A value
 * its field cannot hold (300 for a debounce, a word that is no number) is stored as one the rules refuse
 * for that same key, so the first problem named is the profile's. No division, no <string.h> call. */
#include "pt_cmd.h"

#define ALL_CHANNELS (-1L) /* `*` */
#define NO_CHANNEL (-2L)   /* a channel word that names no channel: quoted as given */
#define MAX_WORD 16u       /* a command or channel word is quoted up to this many characters */
#define MAX_KEY 23u        /* a setting word up to this many: the longest key, release_debounce_frames */
#define NOT_A_NUMBER (-2147483647L - 1L) /* breaks the rule of every numeric key */

/* Kept out of line (GCC, Clang): inlined twice into the command runner it costs the Cortex-M0+ 8 bytes
 * more flash than the calls. Other compilers may inline as they like. */
#if defined(__GNUC__)
#define PT_OUTLINE __attribute__((noinline))
#else
#define PT_OUTLINE
#endif

/* The setting keys as the wire names them, in enum pt_setting_key's order from 1, NUL-separated, an
 * empty string after the last. */
static const char key_names[] =
    "threshold_counts\0hysteresis_counts\0touch_debounce_frames\0release_debounce_frames\0"
    "baseline_slow_shift\0baseline_fast_shift\0baseline_period_frames\0stuck_timeout_frames\0polarity\0";

/* The command words, found like the keys: CMD_* below. */
static const char commands[] = "?\0get\0set\0keep\0";
enum { CMD_INFO = 1, CMD_GET, CMD_SET, CMD_KEEP };

/* What each key must be: the rule pt_settings_problem() checks for it, same order. */
static const char rules[] =
    "1..16777216\0" "0..threshold_counts-1\0" "1..255\0" "1..255\0" "0..16\0" "0..baseline_slow_shift\0"
    "a power of two 1..256\0" "0..2147483647\0" "+ or -";

/* One command being answered. The line is in the caller's buffer with its blanks turned into NULs
 * (so every word is a C string) and a NUL after its end. */
typedef struct {
    pt_cmd_t *p;
    char *at;        /* the rest of the line */
    char *end;       /* the line's end */
    const char *cmd; /* the first word */
    const char *chw; /* the channel word of get / set, or NULL */
    int32_t ch;      /* its channel, ALL_CHANNELS or NO_CHANNEL */
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

/* The next word, or NULL at the line's end. */
static char *next(job_t *j)
{
    char *w;
    while (j->at < j->end && *j->at == '\0') {
        j->at++;
    }
    if (j->at == j->end) {
        return NULL;
    }
    w = j->at;
    while (*j->at != '\0') {
        j->at++;
    }
    return w;
}

static int same(const char *a, const char *b)
{
    while (*a != '\0' && *a == *b) {
        a++;
        b++;
    }
    return *a == *b;
}

/* Where `w` is in a NUL-separated list ended by an empty string: 1 for the first, ...; 0 when absent.
 * The command words and the setting keys are both found so. */
static unsigned find(const char *list, const char *w)
{
    unsigned k;
    for (k = 1; *list != '\0'; k++) {
        if (same(w, list)) {
            return k;
        }
        while (*list++ != '\0') {
        }
    }
    return 0;
}

/* Decimal with an optional '-' (only when `sign`), or NOT_A_NUMBER when `w` is none or outside int32
 * (NOT_A_NUMBER itself, -2147483648, reads back as itself). */
static int32_t parse_int(const char *w, int sign)
{
    uint32_t v = 0;
    uint32_t limit = 2147483647u;
    if (sign && *w == '-') {
        limit = 2147483648u;
        w++;
    }
    if (*w == '\0') {
        return NOT_A_NUMBER;
    }
    for (; *w != '\0'; w++) {
        uint32_t digit = (uint32_t)(unsigned char)*w - (uint32_t)'0';
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

/* Where each key's field is in pt_settings_t, in enum pt_setting_key's order from 1. */
static const uint8_t field_at[PT_KEY_POLARITY] = {
    offsetof(pt_settings_t, threshold_counts), offsetof(pt_settings_t, hysteresis_counts),
    offsetof(pt_settings_t, touch_debounce_frames), offsetof(pt_settings_t, release_debounce_frames),
    offsetof(pt_settings_t, baseline_slow_shift), offsetof(pt_settings_t, baseline_fast_shift),
    offsetof(pt_settings_t, baseline_period_frames), offsetof(pt_settings_t, stuck_timeout_frames),
    offsetof(pt_settings_t, polarity),
};

#define IS_BYTE(k) ((k) >= PT_KEY_TOUCH_DEBOUNCE_FRAMES && (k) <= PT_KEY_BASELINE_FAST_SHIFT)

static int32_t get(const pt_settings_t *s, unsigned k)
{
    const void *f = (const char *)s + field_at[k - 1u];
    return k == PT_KEY_BASELINE_PERIOD_FRAMES ? *(const uint16_t *)f
           : k == PT_KEY_POLARITY ? *(const int8_t *)f
           : IS_BYTE(k) ? *(const uint8_t *)f : *(const int32_t *)f;
}

/* Writes `v` into key k's field. A value the field cannot hold becomes one pt_settings_problem() refuses
 * for that key (a debounce 0, a shift 255, a period 0, a polarity 0); any value it holds is kept. */
static void put(pt_settings_t *s, unsigned k, int32_t v)
{
    void *f = (char *)s + field_at[k - 1u];
    if (k == PT_KEY_BASELINE_PERIOD_FRAMES) {
        *(uint16_t *)f = (v < 0 || v > 65535) ? 0u : (uint16_t)v;
    } else if (k == PT_KEY_POLARITY) {
        *(int8_t *)f = (v < -128 || v > 127) ? 0 : (int8_t)v;
    } else if (IS_BYTE(k)) {
        *(uint8_t *)f = (v < 0 || v > 255) ? (k <= PT_KEY_RELEASE_DEBOUNCE_FRAMES ? 0u : 255u) : (uint8_t)v;
    } else {
        *(int32_t *)f = v;
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

/* Begins an answer: `>ok ` or `>no `, then whom it is for (`get 3`, `set *`, `keep`, the word given,
 * at most MAX_WORD characters). */
static void head(const job_t *j, const char *kind)
{
    pt_emit_t *e = j->p->out;
    pt_emit_str(e, kind);
    pt_emit_strn(e, j->cmd, MAX_WORD);
    if (j->chw != NULL) {
        pt_emit_char(e, ' ');
        if (j->ch >= 0) {
            pt_emit_uint(e, (uint32_t)j->ch);
        } else {
            pt_emit_strn(e, j->chw, MAX_WORD);
        }
    }
}

/* `>no SUBJECT: [WORD: ]why`; a key's rule (`rule` not NO_CHANNEL) as `must be RULE`, and for
 * `set *` which channel broke it (`rule` >= 0): `>no set *: key: must be RULE (channel N)`. */
static void no(const job_t *j, const char *w, const char *why, int32_t rule)
{
    pt_emit_t *e = j->p->out;
    head(j, ">no ");
    pt_emit_str(e, ": ");
    if (w != NULL) {
        pt_emit_strn(e, w, MAX_KEY);
        pt_emit_str(e, ": ");
    }
    if (rule != NO_CHANNEL) {
        pt_emit_str(e, "must be ");
    }
    pt_emit_str(e, why);
    if (rule >= 0) {
        pt_emit_str(e, " (channel ");
        pt_emit_uint(e, (uint32_t)rule);
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
    unsigned c;
    unsigned k;
    for (c = 0; c < j->p->channels; c++) {
        if (j->ch < 0 || c == (unsigned)j->ch) {
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

/* `set` from the pairs on: read them all, check every channel asked, then write: all or none. Each
 * channel's entry is copied, the given values written into the copy and the copy checked; the second
 * pass writes it back. */
static void run_set(job_t *j)
{
    pt_cmd_t *p = j->p;
    pt_settings_t now;
    int32_t given[PT_KEY_POLARITY + 1];
    uint8_t order[PT_KEY_POLARITY];
    unsigned n = 0;
    unsigned have = 0;
    unsigned k;
    unsigned pass;
    unsigned c;
    char *w;
    char *v;
    const char *why;
    while ((w = next(j)) != NULL) {
        for (v = w; *v != '\0' && *v != '='; v++) {
        }
        why = "not key=value";
        k = PT_KEY_NONE;
        if (*v != '\0') {
            *v++ = '\0';
            k = find(key_names, w);
            why = k == PT_KEY_NONE ? "unknown setting" : ((have >> k) & 1u) != 0 ? "given twice" : NULL;
        }
        if (why != NULL) {
            no(j, w, why, NO_CHANNEL);
            return;
        }
        have |= 1u << k;
        order[n++] = (uint8_t)k;
        given[k] = k != PT_KEY_POLARITY ? parse_int(v, 1)
                   : v[0] != '\0' && v[1] == '\0' ? (v[0] == '+' ? 1 : v[0] == '-' ? -1 : 0) : 0;
    }
    if (n == 0) {
        no(j, NULL, "nothing to set", NO_CHANNEL);
        return;
    }
    for (pass = 0; pass < 2; pass++) {
        for (c = 0; c < p->channels; c++) {
            if (j->ch >= 0 && c != (unsigned)j->ch) {
                continue;
            }
            now = p->settings[c];
            for (k = 0; k < n; k++) {
                put(&now, order[k], given[order[k]]);
            }
            if (pass != 0) {
                p->settings[c] = now;
                if (p->hooks->changed != NULL) {
                    p->hooks->changed(p->ctx, (uint16_t)c);
                }
            } else if ((k = (unsigned)pt_settings_problem(&now)) != PT_KEY_NONE) {
                no(j, nth(key_names, k - 1u), nth(rules, k - 1u), j->ch < 0 ? (int32_t)c : ALL_CHANNELS);
                return;
            }
        }
    }
    head(j, ">ok ");
    for (k = 0; k < n; k++) {
        pair(p->out, order[k], get(&now, order[k]));
    }
    pt_emit_end(p->out);
}

/* Every `from` in [c, end) becomes `to`: the line's blanks (all spaces, see pt_cmd_feed) into word ends
 * and back. */
PT_OUTLINE static void swap(char *c, const char *end, char from, char to)
{
    for (; c < end; c++) {
        if (*c == from) {
            *c = to;
        }
    }
}

/* Runs the line held in the buffer, or refuses it with `refusal`. */
static void run(pt_cmd_t *p, const char *refusal)
{
    const pt_cmd_hooks_t *h = p->hooks;
    job_t j;
    const char *why = "unknown command";
    unsigned cmd;
    j.p = p;
    j.at = p->buf;
    j.end = p->buf + p->len;
    *j.end = '\0';
    swap(j.at, j.end, ' ', '\0');
    j.chw = NULL;
    j.ch = NO_CHANNEL;
    j.cmd = next(&j);
    if (refusal != NULL) {
        if (j.cmd == NULL) {
            j.cmd = "?";
        }
        why = refusal;
    } else if (j.cmd == NULL) {
        return; /* a blank line: nothing asked */
    } else if ((cmd = find(commands, j.cmd)) == CMD_INFO && h->info != NULL) {
        h->info(p->ctx);
        return;
    } else if (cmd >= CMD_GET) {
        why = h->keep == NULL ? "cannot keep settings" : NULL;
        if (cmd != CMD_KEEP) {
            j.chw = next(&j);
            why = "which channel?";
            if (j.chw != NULL) {
                j.ch = j.chw[0] == '*' && j.chw[1] == '\0' ? ALL_CHANNELS : parse_int(j.chw, 0);
                if (j.ch < ALL_CHANNELS || j.ch >= (int32_t)p->channels) {
                    j.ch = NO_CHANNEL;
                }
                why = j.ch == NO_CHANNEL ? "no such channel" : NULL;
            }
            if (why == NULL && cmd == CMD_SET) {
                run_set(&j);
                return;
            }
        }
        if (why == NULL && next(&j) != NULL) {
            why = "too many words";
        }
        if (why == NULL && cmd == CMD_GET) {
            run_get(&j);
            return;
        }
        if (why == NULL && (why = h->keep(p->ctx)) == NULL) {
            ok(&j);
            return;
        }
    } else if (h->other != NULL) {
        swap(p->buf, j.end, '\0', ' '); /* the line again, its blanks as spaces */
        if (h->other(p->ctx, p->buf, p->len)) {
            return;
        }
        swap(p->buf, j.end, ' ', '\0');
    }
    no(&j, NULL, why, NO_CHANNEL);
}

void pt_cmd_line(pt_cmd_t *p, const char *line, size_t len)
{
    while (len-- > 0) {
        pt_cmd_feed(p, (uint8_t)*line++);
    }
    pt_cmd_feed(p, '\n');
}

void pt_cmd_feed(pt_cmd_t *p, uint8_t byte)
{
    if (byte == '\n' || byte == '\r') {
        run(p, p->overlong ? "line too long" : p->binary ? "not ASCII text" : NULL);
        pt_cmd_reset(p);
        return;
    }
    if (byte == '\t') {
        byte = ' '; /* one kind of blank */
    } else if (byte < 0x20u || byte > 0x7Eu) {
        p->binary = 1;
        byte = '?'; /* kept printable: quoted as '?' in the refusal */
    }
    if (p->len + 1u < p->size) { /* room for the NUL after the line */
        p->buf[p->len++] = (char)byte;
    } else {
        p->overlong = 1;
    }
}
