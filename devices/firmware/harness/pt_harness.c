/* pt_harness: the C library as a board on this computer (padtune's firmware twin, tested end to end).
 *
 * The part that a board's firmware would run is `board_*` below: readings in, the library's detector
 * (pt_detect, pt_groups) over them, frames out through the emitter (pt_emit) with the detector's states,
 * host commands through the parser (pt_cmd) onto the live settings the detector reads. Everything
 * around it stands in for the hardware: readings are simulated (a baseline per channel, noise, touches
 * scripted on the command line or pressed by the host with `+N` / `-N`) or read from a file, and the
 * "UART" is stdin/stdout or a pseudo-terminal whose path is printed on stdout.
 *
 * Host program: POSIX and the C library are fine here; only devices/firmware/pt_*.c are held to the
 * firmware rules. Usage: pt_harness --help.
 */
#define _XOPEN_SOURCE 600
#include <errno.h>
#include <fcntl.h>
#include <poll.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <termios.h>
#include <time.h>
#include <unistd.h>

#include "../pt_cmd.h"
#include "../pt_detect.h"
#include "../pt_emit.h"
#include "../pt_types.h"

#define MAX_CHANNELS 64
#define MAX_TOUCHES 32
#define MAX_NAME 32
#define OUT_CAP (1u << 16)      /* the "UART" transmit buffer of the host program */
#define OUT_DROP_BYTES 4096u    /* a port nobody reads: past this backlog, what waits is dropped */

typedef struct {
    unsigned channel;
    unsigned long start, length; /* frames */
} touch_t;

typedef struct {
    /* options */
    unsigned channels;
    char names_text[MAX_CHANNELS * (MAX_NAME + 1)];
    const char *board_name;
    unsigned long rate_mhz; /* 0: as fast as the output takes them */
    long frames;            /* -1: until stopped */
    int checksum, states, events, use_pty;
    const char *readings_path;
    const char *keep_path;
    unsigned long seed;
    int32_t noise, signal;
    touch_t touches[MAX_TOUCHES];
    unsigned n_touches;
    int deviate_channel; /* -1: never */
    unsigned long deviate_from, deviate_count;
    pt_settings_t start; /* settings every channel starts from */
} options_t;

/* ------------------------------------------------------------------ the board (what firmware runs) */

typedef struct {
    pt_detector_t det;
    pt_chan_t chans[MAX_CHANNELS];
    pt_settings_t settings[MAX_CHANNELS]; /* the live RAM copy: the detector reads it, `set` writes it */
    pt_event_t events[MAX_CHANNELS];
    uint8_t states[MAX_CHANNELS];
    pt_emit_t out;
    pt_cmd_t cmd;
    char line[PT_CMD_LINE_BYTES];
    pt_info_t info;
    const char *names[MAX_CHANNELS];
    int8_t polarity[MAX_CHANNELS];
    unsigned long frame;
    uint8_t pressed[MAX_CHANNELS]; /* simulated fingers, from the host's +N / -N */
    const options_t *opt;
} board_t;

/* The "UART": a host-side buffer flushed to the file descriptor between lines. */
static unsigned char out_buf[OUT_CAP];
static size_t out_len;
static unsigned long out_dropped_bytes;
static int out_fd = 1;

static void uart_put(void *ctx, char c)
{
    (void)ctx;
    if (out_len < OUT_CAP) {
        out_buf[out_len++] = (unsigned char)c;
    }
}

/* Writes what it can; returns -1 when the far end is gone. */
static int uart_flush(int blocking)
{
    size_t done = 0;
    while (done < out_len) {
        ssize_t n = write(out_fd, out_buf + done, out_len - done);
        if (n > 0) {
            done += (size_t)n;
        } else if (n < 0 && errno == EINTR) {
            continue;
        } else if (n < 0 && (errno == EAGAIN || errno == EWOULDBLOCK) && !blocking) {
            if (done == 0 && out_len > OUT_DROP_BYTES) {
                /* Nobody reads the port and its buffer is full: a UART's bytes would go out into the void.
                 * Dropped whole, so the backlog never grows; a host that opens the port later flushes
                 * what the terminal holds and reads on from a line start (a cut line at worst). */
                out_dropped_bytes += out_len;
                out_len = 0;
                return 0;
            }
            break;
        } else if (n < 0 && (errno == EAGAIN || errno == EWOULDBLOCK)) {
            struct pollfd p = {out_fd, POLLOUT, 0};
            (void)poll(&p, 1, 100);
        } else {
            return -1;
        }
    }
    memmove(out_buf, out_buf + done, out_len - done);
    out_len -= done;
    return 0;
}

static void board_info(void *ctx)
{
    board_t *b = ctx;
    unsigned c;
    for (c = 0; c < b->opt->channels; c++) { /* `set polarity=...` may have changed them */
        b->polarity[c] = b->settings[c].polarity;
    }
    pt_emit_info(&b->out, &b->info, 0);
}

static void board_changed(void *ctx, uint16_t channel)
{
    board_t *b = ctx;
    pt_detect_settings_changed(&b->det, channel);
}

/* `keep`: the harness's "flash" is a file, one line per channel, written whole then renamed. */
static const char *board_keep(void *ctx)
{
    board_t *b = ctx;
    char tmp[4096];
    FILE *f;
    unsigned c;
    if (b->opt->keep_path == NULL) {
        return "no storage on this board (start the harness with --keep-file PATH)";
    }
    if (snprintf(tmp, sizeof tmp, "%s.tmp", b->opt->keep_path) >= (int)sizeof tmp) {
        return "storage path too long";
    }
    f = fopen(tmp, "w");
    if (f == NULL) {
        return "storage cannot be written";
    }
    for (c = 0; c < b->opt->channels; c++) {
        const pt_settings_t *s = &b->settings[c];
        fprintf(f, "%ld %ld %u %u %u %u %u %ld %d\n", (long)s->threshold_counts, (long)s->hysteresis_counts,
                s->touch_debounce_frames, s->release_debounce_frames, s->baseline_slow_shift,
                s->baseline_fast_shift, s->baseline_period_frames, (long)s->stuck_timeout_frames, s->polarity);
    }
    if (fflush(f) != 0 || fsync(fileno(f)) != 0) {
        fclose(f);
        remove(tmp);
        return "storage write failed";
    }
    if (fclose(f) != 0 || rename(tmp, b->opt->keep_path) != 0) {
        remove(tmp);
        return "storage write failed";
    }
    return NULL;
}

/* Reads kept settings at power-up; 0 when there are none or they are unusable (then defaults stay). */
static int board_load_kept(board_t *b)
{
    FILE *f;
    pt_settings_t kept[MAX_CHANNELS];
    unsigned c;
    if (b->opt->keep_path == NULL || (f = fopen(b->opt->keep_path, "r")) == NULL) {
        return 0;
    }
    for (c = 0; c < b->opt->channels; c++) {
        long t, h, x;
        unsigned n, m, slow, fast, period;
        int pol;
        if (fscanf(f, "%ld %ld %u %u %u %u %u %ld %d", &t, &h, &n, &m, &slow, &fast, &period, &x, &pol) != 9
            || n > 255 || m > 255 || slow > 255 || fast > 255 || period > 65535 || t < INT32_MIN
            || t > INT32_MAX || h < INT32_MIN || h > INT32_MAX || x < INT32_MIN || x > INT32_MAX) {
            fclose(f);
            return -1;
        }
        kept[c].threshold_counts = (int32_t)t;
        kept[c].hysteresis_counts = (int32_t)h;
        kept[c].touch_debounce_frames = (uint8_t)n;
        kept[c].release_debounce_frames = (uint8_t)m;
        kept[c].baseline_slow_shift = (uint8_t)slow;
        kept[c].baseline_fast_shift = (uint8_t)fast;
        kept[c].baseline_period_frames = (uint16_t)period;
        kept[c].stuck_timeout_frames = (int32_t)x;
        kept[c].polarity = (int8_t)pol;
        if (pt_settings_problem(&kept[c]) != PT_KEY_NONE) {
            fclose(f);
            return -1;
        }
    }
    fclose(f);
    memcpy(b->settings, kept, sizeof(pt_settings_t) * b->opt->channels);
    return 1;
}

static int channel_by_word(const board_t *b, const char *w, size_t len)
{
    unsigned c;
    char *end;
    char text[MAX_NAME + 1];
    long n;
    if (len == 0 || len > MAX_NAME) {
        return -1;
    }
    memcpy(text, w, len);
    text[len] = '\0';
    for (c = 0; c < b->opt->channels; c++) {
        if (strcmp(b->names[c], text) == 0) {
            return (int)c;
        }
    }
    n = strtol(text, &end, 10);
    return *end == '\0' && n >= 0 && n < (long)b->opt->channels ? (int)n : -1;
}

/* The harness's own commands: `+N` / `-N` press and let go of a simulated key (index or name), as
 * padtune's simulated boards take them. Silent, like theirs; unknown keys get a `>no`. */
static int board_other(void *ctx, const char *line, size_t len)
{
    board_t *b = ctx;
    int c;
    size_t end = len;
    if (len < 2 || (line[0] != '+' && line[0] != '-')) {
        return 0;
    }
    while (end > 1 && (line[end - 1] == ' ' || line[end - 1] == '\t')) {
        end--;
    }
    c = channel_by_word(b, line + 1, end - 1);
    if (c < 0) {
        pt_emit_begin(&b->out);
        pt_emit_str(&b->out, ">no ");
        pt_emit_strn(&b->out, line, end < 17 ? end : 16);
        pt_emit_str(&b->out, ": no such key");
        pt_emit_end(&b->out);
        return 1;
    }
    b->pressed[c] = line[0] == '+';
    return 1;
}

static const pt_cmd_hooks_t board_hooks = {board_changed, board_keep, board_info, board_other};

static void board_init(board_t *b, const options_t *opt)
{
    unsigned c;
    char *name = (char *)opt->names_text;
    memset(b, 0, sizeof *b);
    b->opt = opt;
    for (c = 0; c < opt->channels; c++) {
        b->settings[c] = opt->start;
        b->names[c] = name;
        name += strlen(name) + 1;
    }
    if (board_load_kept(b) < 0) {
        fprintf(stderr, "pt_harness: %s: kept settings unreadable or breaking the rules; starting from defaults\n",
                opt->keep_path);
    }
    for (c = 0; c < opt->channels; c++) {
        b->polarity[c] = b->settings[c].polarity;
    }
    pt_detect_init(&b->det, b->settings, b->chans, (uint16_t)opt->channels);
    pt_emit_init(&b->out, uart_put, NULL, opt->checksum);
    pt_cmd_init(&b->cmd, &board_hooks, b, &b->out, b->settings, (uint16_t)opt->channels, b->line,
                (uint16_t)sizeof b->line);
    b->info.board = opt->board_name;
    b->info.channels = (uint16_t)opt->channels;
    b->info.rate_mhz = (uint32_t)opt->rate_mhz;
    b->info.names = b->names;
    b->info.method = "harness";
    b->info.polarity = b->polarity;
    b->info.fw = "pt-harness-1";
    b->info.settings = 1;
    b->info.states = opt->states ? 1 : 0;
}

static const char *event_word(uint8_t kind)
{
    switch (kind) {
    case PT_EV_TOUCH: return "touch";
    case PT_EV_RELEASE: return "release";
    case PT_EV_STUCK: return "stuck";
    case PT_EV_REBASELINED: return "rebaselined";
    default: return "event";
    }
}

/* One frame: detect, then send the readings with the states the board decided (deviated on purpose
 * when asked, for the twin test), then the events as comments when asked. */
static void board_frame(board_t *b, const int32_t *readings)
{
    const options_t *opt = b->opt;
    size_t n = pt_detect_frame(&b->det, readings, b->events);
    size_t i;
    unsigned c;
    for (c = 0; c < opt->channels; c++) {
        b->states[c] = pt_detect_state(&b->det, (uint16_t)c);
    }
    if (opt->deviate_channel >= 0 && b->frame >= opt->deviate_from
        && (opt->deviate_count == 0 || b->frame - opt->deviate_from < opt->deviate_count)) {
        b->states[opt->deviate_channel] ^= 2u; /* released <-> touched, confirming <-> releasing */
    }
    pt_emit_frame(&b->out, readings, (uint16_t)opt->channels, opt->states ? b->states : NULL);
    for (i = 0; opt->events && i < n; i++) {
        char text[96];
        const pt_event_t *ev = &b->events[i];
        snprintf(text, sizeof text, "%s %s frame=%lu delta=%lld", event_word(ev->kind), b->names[ev->source],
                 b->frame, (long long)ev->delta_counts);
        pt_emit_comment(&b->out, text);
    }
    b->frame++;
}

/* ------------------------------------------------------------------ readings */

static uint32_t lcg_next(unsigned long *state)
{
    *state = (*state * 1103515245ul + 12345ul) & 0x7FFFFFFFul;
    return (uint32_t)*state;
}

static void simulate(board_t *b, unsigned long *rng, int32_t *readings)
{
    const options_t *opt = b->opt;
    unsigned c, t;
    for (c = 0; c < opt->channels; c++) {
        int touched = b->pressed[c];
        int32_t noise = opt->noise > 0
            ? (int32_t)(lcg_next(rng) % (uint32_t)(2 * opt->noise + 1)) - opt->noise : 0;
        for (t = 0; t < opt->n_touches; t++) {
            const touch_t *tt = &opt->touches[t];
            if (tt->channel == c && b->frame >= tt->start && b->frame - tt->start < tt->length) {
                touched = 1;
            }
        }
        readings[c] = 20000 + 500 * (int32_t)c + noise + (touched ? b->settings[c].polarity * opt->signal : 0);
    }
}

/* One frame from a readings file: integers separated by blanks or commas; `#` lines and blank lines
 * are skipped. Returns 1, 0 at the end, -1 (after saying why) on a bad line. */
static int read_frame(FILE *f, unsigned channels, int32_t *readings, unsigned long *line_no)
{
    char line[8200];
    while (fgets(line, sizeof line, f) != NULL) {
        char *p = line;
        unsigned c = 0;
        (*line_no)++;
        while (*p == ' ' || *p == '\t') {
            p++;
        }
        if (*p == '#' || *p == '\n' || *p == '\r' || *p == '\0') {
            continue;
        }
        while (*p != '\0' && *p != '\n' && *p != '\r') {
            char *end;
            long long v;
            errno = 0;
            v = strtoll(p, &end, 10);
            if (end == p || errno != 0 || v < INT32_MIN || v > INT32_MAX || c == channels) {
                fprintf(stderr, "pt_harness: readings line %lu: want %u whole numbers (32-bit) per line\n",
                        *line_no, channels);
                return -1;
            }
            readings[c++] = (int32_t)v;
            p = end;
            while (*p == ' ' || *p == '\t' || *p == ',') {
                p++;
            }
        }
        if (c != channels) {
            fprintf(stderr, "pt_harness: readings line %lu: %u numbers, want %u\n", *line_no, c, channels);
            return -1;
        }
        return 1;
    }
    return 0;
}

/* ------------------------------------------------------------------ options */

static void usage(FILE *f)
{
    fputs("usage: pt_harness [options]\n"
          "A board running padtune's C library: detector, protocol v1 emitter, host commands.\n"
          "  --pty                 serve on a new pseudo-terminal; its path is the first line on stdout\n"
          "                        (default: frames on stdout, host commands from stdin)\n"
          "  --channels N          channels, 1..64 (default 4)\n"
          "  --names A,B,...       channel names (default ch0,ch1,...)\n"
          "  --board NAME          board name in the info line (default harness)\n"
          "  --rate HZ             frames per second, up to 3 decimals; 0 = as fast as possible (default 100)\n"
          "  --frames N            stop after N frames; 0 = only answer commands until stdin ends\n"
          "  --readings FILE       readings from FILE (- = stdin, with --pty), one frame a line;\n"
          "                        default: simulated (baseline, noise, touches)\n"
          "  --touch CH@START+LEN  simulated touch of channel CH from frame START for LEN frames (repeat)\n"
          "  --noise N             simulated noise, +-N counts (default 3)\n"
          "  --signal N            simulated touch signal in counts (default 400)\n"
          "  --polarity +|-        every channel's polarity at start (default +)\n"
          "  --set KEY=VALUE       a starting setting for every channel (profile keys; repeat)\n"
          "  --keep-file PATH      where `keep` stores the settings (read back at start)\n"
          "  --deviate CH@FROM[+COUNT]  send channel CH's state wrong from frame FROM (twin test)\n"
          "  --seed N              noise seed (default 1)\n"
          "  --no-checksum         lines without *HHHH\n"
          "  --no-states           frames without the ;ddd state field\n"
          "  --events              detections as # comment lines too\n",
          f);
}

static int bad(const char *what, const char *value)
{
    fprintf(stderr, "pt_harness: %s %s: see --help\n", what, value);
    return 2;
}

static int parse_ulong(const char *text, unsigned long *out)
{
    char *end;
    if (*text < '0' || *text > '9') {
        return 0;
    }
    errno = 0;
    *out = strtoul(text, &end, 10);
    return *end == '\0' && errno == 0;
}

static int parse_rate(const char *text, unsigned long *mhz)
{
    unsigned long whole = 0, frac = 0, scale = 100;
    const char *p = text;
    if (*p < '0' || *p > '9') {
        return 0;
    }
    for (; *p >= '0' && *p <= '9'; p++) {
        whole = whole * 10 + (unsigned long)(*p - '0');
        if (whole > 1000000ul) {
            return 0;
        }
    }
    if (*p == '.') {
        for (p++; *p >= '0' && *p <= '9' && scale > 0; p++, scale /= 10) {
            frac += (unsigned long)(*p - '0') * scale;
        }
    }
    *mhz = whole * 1000ul + frac;
    return *p == '\0';
}

static int set_start(pt_settings_t *s, const char *pair)
{
    static const char *const keys[] = {"threshold_counts", "hysteresis_counts", "touch_debounce_frames",
                                       "release_debounce_frames", "baseline_slow_shift", "baseline_fast_shift",
                                       "baseline_period_frames", "stuck_timeout_frames"};
    const char *eq = strchr(pair, '=');
    char *end;
    long v;
    unsigned k;
    if (eq == NULL) {
        return 0;
    }
    errno = 0;
    v = strtol(eq + 1, &end, 10);
    if (eq[1] == '\0' || *end != '\0' || errno != 0 || v < 0 || v > INT32_MAX) {
        return 0;
    }
    for (k = 0; k < 8; k++) {
        if (strlen(keys[k]) == (size_t)(eq - pair) && strncmp(pair, keys[k], (size_t)(eq - pair)) == 0) {
            break;
        }
    }
    switch (k) {
    case 0: s->threshold_counts = (int32_t)v; return 1;
    case 1: s->hysteresis_counts = (int32_t)v; return 1;
    case 2: s->touch_debounce_frames = (uint8_t)(v > 255 ? 0 : v); return 1;
    case 3: s->release_debounce_frames = (uint8_t)(v > 255 ? 0 : v); return 1;
    case 4: s->baseline_slow_shift = (uint8_t)(v > 255 ? 255 : v); return 1;
    case 5: s->baseline_fast_shift = (uint8_t)(v > 255 ? 255 : v); return 1;
    case 6: s->baseline_period_frames = (uint16_t)(v > 65535 ? 3 : v); return 1;
    case 7: s->stuck_timeout_frames = (int32_t)v; return 1;
    default: return 0;
    }
}

static int parse_names(options_t *o, const char *list)
{
    unsigned n = 0;
    size_t at = 0;
    const char *p = list;
    while (1) {
        size_t len = strcspn(p, ",");
        size_t i;
        if (len == 0 || len > MAX_NAME || n == MAX_CHANNELS) {
            return 0;
        }
        for (i = 0; i < len; i++) {
            char c = p[i];
            if (!((c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_'
                  || c == '-' || c == '.')) {
                return 0;
            }
        }
        memcpy(o->names_text + at, p, len);
        o->names_text[at + len] = '\0';
        at += len + 1;
        n++;
        if (p[len] == '\0') {
            break;
        }
        p += len + 1;
    }
    return (int)n;
}

static int parse_options(options_t *o, int argc, char **argv)
{
    int i, named = 0;
    unsigned long v;
    memset(o, 0, sizeof *o);
    o->channels = 4;
    o->board_name = "harness";
    o->rate_mhz = 100000;
    o->frames = -1;
    o->checksum = 1;
    o->states = 1;
    o->seed = 1;
    o->noise = 3;
    o->signal = 400;
    o->deviate_channel = -1;
    o->start.threshold_counts = 100; /* processing.settings.ChannelSettings' defaults */
    o->start.hysteresis_counts = 15;
    o->start.touch_debounce_frames = 3;
    o->start.release_debounce_frames = 3;
    o->start.baseline_slow_shift = 6;
    o->start.baseline_fast_shift = 2;
    o->start.baseline_period_frames = 16;
    o->start.stuck_timeout_frames = 0;
    o->start.polarity = 1;
    for (i = 1; i < argc; i++) {
        const char *a = argv[i];
        const char *val = i + 1 < argc ? argv[i + 1] : NULL;
        if (strcmp(a, "--help") == 0 || strcmp(a, "-h") == 0) {
            usage(stdout);
            exit(0);
        } else if (strcmp(a, "--pty") == 0) {
            o->use_pty = 1;
        } else if (strcmp(a, "--no-checksum") == 0) {
            o->checksum = 0;
        } else if (strcmp(a, "--no-states") == 0) {
            o->states = 0;
        } else if (strcmp(a, "--events") == 0) {
            o->events = 1;
        } else if (val == NULL) {
            return bad("missing value or unknown option", a);
        } else {
            i++;
            if (strcmp(a, "--channels") == 0) {
                if (!parse_ulong(val, &v) || v < 1 || v > MAX_CHANNELS) {
                    return bad("--channels", val);
                }
                o->channels = (unsigned)v;
            } else if (strcmp(a, "--names") == 0) {
                named = parse_names(o, val);
                if (named == 0) {
                    return bad("--names (1-32 of A-Z a-z 0-9 _ - . each, comma-separated)", val);
                }
            } else if (strcmp(a, "--board") == 0) {
                o->board_name = val;
                if (*val == '\0' || strpbrk(val, " \t\r\n") != NULL) {
                    return bad("--board", val);
                }
            } else if (strcmp(a, "--rate") == 0) {
                if (!parse_rate(val, &o->rate_mhz)) {
                    return bad("--rate", val);
                }
            } else if (strcmp(a, "--frames") == 0) {
                if (!parse_ulong(val, &v) || v > 0x7FFFFFFFul) {
                    return bad("--frames", val);
                }
                o->frames = (long)v;
            } else if (strcmp(a, "--readings") == 0) {
                o->readings_path = val;
            } else if (strcmp(a, "--keep-file") == 0) {
                o->keep_path = val;
            } else if (strcmp(a, "--seed") == 0) {
                if (!parse_ulong(val, &o->seed)) {
                    return bad("--seed", val);
                }
            } else if (strcmp(a, "--noise") == 0 || strcmp(a, "--signal") == 0) {
                if (!parse_ulong(val, &v) || v > 1000000ul) {
                    return bad(a, val);
                }
                *(a[2] == 'n' ? &o->noise : &o->signal) = (int32_t)v;
            } else if (strcmp(a, "--polarity") == 0) {
                if (strcmp(val, "+") != 0 && strcmp(val, "-") != 0) {
                    return bad("--polarity", val);
                }
                o->start.polarity = val[0] == '-' ? -1 : 1;
            } else if (strcmp(a, "--set") == 0) {
                if (!set_start(&o->start, val)) {
                    return bad("--set", val);
                }
            } else if (strcmp(a, "--touch") == 0) {
                unsigned ch;
                unsigned long start, len;
                char tail;
                if (o->n_touches == MAX_TOUCHES
                    || sscanf(val, "%u@%lu+%lu%c", &ch, &start, &len, &tail) != 3) {
                    return bad("--touch", val);
                }
                o->touches[o->n_touches].channel = ch;
                o->touches[o->n_touches].start = start;
                o->touches[o->n_touches].length = len;
                o->n_touches++;
            } else if (strcmp(a, "--deviate") == 0) {
                unsigned ch;
                char tail;
                o->deviate_count = 0;
                if (sscanf(val, "%u@%lu+%lu%c", &ch, &o->deviate_from, &o->deviate_count, &tail) != 3
                    && sscanf(val, "%u@%lu%c", &ch, &o->deviate_from, &tail) != 2) {
                    return bad("--deviate", val);
                }
                o->deviate_channel = (int)ch;
            } else {
                return bad("unknown option", a);
            }
        }
    }
    if (named == 0) {
        size_t at = 0;
        unsigned c;
        for (c = 0; c < o->channels; c++) {
            at += (size_t)sprintf(o->names_text + at, "ch%u", c) + 1u;
        }
    } else if ((unsigned)named != o->channels) {
        fprintf(stderr, "pt_harness: --names gives %d names for %u channels\n", named, o->channels);
        return 2;
    }
    if (pt_settings_problem(&o->start) != PT_KEY_NONE) {
        fprintf(stderr, "pt_harness: --set: %s breaks the rules of a profile\n",
                pt_cmd_key_name(pt_settings_problem(&o->start)));
        return 2;
    }
    if (o->deviate_channel >= (int)o->channels) {
        return bad("--deviate: no such channel", "");
    }
    for (i = 0; i < (int)o->n_touches; i++) {
        if (o->touches[i].channel >= o->channels) {
            return bad("--touch: no such channel", "");
        }
    }
    if (o->readings_path != NULL && strcmp(o->readings_path, "-") == 0 && !o->use_pty) {
        fprintf(stderr, "pt_harness: --readings - needs --pty (stdin carries the host's commands)\n");
        return 2;
    }
    return 0;
}

/* ------------------------------------------------------------------ the host side: pty, time, loop */

static int open_pty(int *keep_slave)
{
    int master = posix_openpt(O_RDWR | O_NOCTTY);
    const char *name;
    struct termios tio;
    if (master < 0 || grantpt(master) != 0 || unlockpt(master) != 0 || (name = ptsname(master)) == NULL) {
        perror("pt_harness: pseudo-terminal");
        return -1;
    }
    /* Hold the slave open too: a host that closes and reopens the port finds the board still there, and
     * reads on the master never fail with EIO meanwhile. Raw: no echo of host commands, no CRLF. */
    *keep_slave = open(name, O_RDWR | O_NOCTTY);
    if (*keep_slave < 0 || tcgetattr(*keep_slave, &tio) != 0) {
        perror("pt_harness: pseudo-terminal");
        return -1;
    }
    /* raw mode, spelled out (cfmakeraw is not POSIX) */
    tio.c_iflag &= ~(tcflag_t)(IGNBRK | BRKINT | PARMRK | ISTRIP | INLCR | IGNCR | ICRNL | IXON);
    tio.c_oflag &= ~(tcflag_t)OPOST;
    tio.c_lflag &= ~(tcflag_t)(ECHO | ECHONL | ICANON | ISIG | IEXTEN);
    tio.c_cflag &= ~(tcflag_t)(CSIZE | PARENB);
    tio.c_cflag |= CS8;
    tcsetattr(*keep_slave, TCSANOW, &tio);
    fcntl(master, F_SETFL, fcntl(master, F_GETFL) | O_NONBLOCK);
    printf("%s\n", name);
    fflush(stdout);
    return master;
}

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + (double)ts.tv_nsec * 1e-9;
}

static volatile sig_atomic_t stop_now;

static void on_signal(int sig)
{
    (void)sig;
    stop_now = 1;
}

int main(int argc, char **argv)
{
    static options_t opt;
    static board_t board;
    int rc = parse_options(&opt, argc, argv);
    int in_fd = 0, in_open = 1, slave = -1;
    FILE *readings = NULL;
    unsigned long line_no = 0, rng;
    double next_s, period_s;
    int32_t values[MAX_CHANNELS];
    if (rc != 0) {
        return rc;
    }
    rng = opt.seed;
    signal(SIGINT, on_signal);
    signal(SIGTERM, on_signal);
    signal(SIGPIPE, SIG_IGN);
    if (opt.readings_path != NULL) {
        readings = strcmp(opt.readings_path, "-") == 0 ? stdin : fopen(opt.readings_path, "r");
        if (readings == NULL) {
            fprintf(stderr, "pt_harness: %s: %s\n", opt.readings_path, strerror(errno));
            return 2;
        }
    }
    if (opt.use_pty) {
        int master = open_pty(&slave);
        if (master < 0) {
            return 1;
        }
        in_fd = out_fd = master;
    }
    board_init(&board, &opt);
    pt_emit_info(&board.out, &board.info, 1);
    if (uart_flush(!opt.use_pty) < 0) {
        return 1;
    }
    period_s = opt.rate_mhz > 0 ? 1000.0 / (double)opt.rate_mhz : 0.0;
    next_s = now_s();
    while (!stop_now) {
        int more_frames = opt.frames < 0 || (long)board.frame < opt.frames;
        int timeout_ms = 0;
        struct pollfd pfd = {in_fd, POLLIN, 0};
        if (!more_frames && !in_open) {
            break;
        }
        if (!more_frames) {
            timeout_ms = -1;
        } else if (period_s > 0.0) {
            double wait = next_s - now_s();
            timeout_ms = wait > 0.0 ? (int)(wait * 1000.0) + 1 : 0;
        }
        if (in_open && poll(&pfd, 1, timeout_ms) > 0) {
            unsigned char chunk[512];
            ssize_t n = read(in_fd, chunk, sizeof chunk);
            if (n > 0) {
                ssize_t k;
                for (k = 0; k < n; k++) {
                    pt_cmd_feed(&board.cmd, chunk[k]);
                }
            } else if (n == 0 || (errno != EAGAIN && errno != EINTR)) {
                in_open = 0; /* stdin ended (a pty never ends: we hold its slave) */
            }
        } else if (!in_open && more_frames && timeout_ms > 0) {
            struct timespec ts = {timeout_ms / 1000, (long)(timeout_ms % 1000) * 1000000L};
            nanosleep(&ts, NULL);
        }
        if (more_frames && (period_s <= 0.0 || now_s() >= next_s)) {
            int got = 1;
            if (readings != NULL) {
                got = read_frame(readings, opt.channels, values, &line_no);
                if (got < 0) {
                    return 2;
                }
            } else {
                simulate(&board, &rng, values);
            }
            if (got == 0) {
                opt.frames = (long)board.frame; /* the readings ended: no more frames */
                if (opt.use_pty) {
                    break;
                }
            } else {
                board_frame(&board, values);
                next_s += period_s;
                if (period_s > 0.0 && now_s() - next_s > 1.0) {
                    next_s = now_s(); /* suspended for a while: do not rush to catch up */
                }
            }
        }
        if (uart_flush(!opt.use_pty) < 0) {
            break;
        }
    }
    (void)uart_flush(!opt.use_pty); /* a pty nobody reads any more must not hold the exit up */
    if (out_dropped_bytes > 0 && !opt.use_pty) {
        fprintf(stderr, "pt_harness: %lu bytes dropped (nobody read the output)\n", out_dropped_bytes);
    }
    if (slave >= 0) {
        close(slave);
    }
    return 0;
}
