/* vector_runner.c: runs a detector test vector (tests/vectors/vectors.py describes the format) through the
 * firmware library and prints the `=` lines it produces, for the tests to compare with the vector's own.
 *
 * Host test tool, not firmware: it uses stdio. The library itself is linked in unchanged; the tests build
 * this with -std=c99 -Wall -Wextra -Werror -pedantic and -fsanitize=address,undefined.
 * Usage: vector_runner FILE (or stdin). Exit 0, or 2 for an unreadable vector (with the line on stderr).
 */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "pt_detect.h"
#include "pt_groups.h"

#define MAX_CH 1024
#define MAX_GROUPS 64
#define MAX_LINE 65536

static pt_settings_t settings[MAX_CH];
static pt_chan_t chans[MAX_CH];
static pt_detector_t det;
static uint16_t group_members[MAX_GROUPS][MAX_CH];
static uint16_t slider_pads[MAX_GROUPS][MAX_CH];
static pt_group_t groups[MAX_GROUPS];
static pt_slider_t sliders[MAX_GROUPS];
static pt_group_state_t group_state[MAX_GROUPS];
static pt_slider_state_t slider_state[MAX_GROUPS];
static pt_event_t events[MAX_CH + 2 * MAX_GROUPS];
static int32_t readings[MAX_CH];
static char line[MAX_LINE];
static uint64_t hash = 0xCBF29CE484222325ULL;

static void fail(const char *what, long lineno)
{
    fprintf(stderr, "vector_runner: line %ld: %s\n", lineno, what);
    exit(2);
}

static void fnv(uint8_t byte)
{
    hash = (hash ^ byte) * 0x100000001B3ULL;
}

/* Reads the next integer word; '+' and '-' alone read as +1 and -1. */
static long long word(char **p, long lineno)
{
    char *end;
    long long v;
    while (**p == ' ' || **p == '\t')
        (*p)++;
    if (((*p)[0] == '+' || (*p)[0] == '-') && ((*p)[1] == ' ' || (*p)[1] == '\0' || (*p)[1] == '\n')) {
        v = (*p)[0] == '+' ? 1 : -1;
        (*p)++;
        return v;
    }
    v = strtoll(*p, &end, 10);
    if (end == *p)
        fail("expected a number", lineno);
    *p = end;
    return v;
}

static int more(char *p)
{
    while (*p == ' ' || *p == '\t')
        p++;
    return *p != '\0' && *p != '\n' && *p != '\r';
}

static void read_settings(pt_settings_t *s, char **p, long lineno)
{
    s->polarity = (int8_t)word(p, lineno);
    s->threshold_counts = (int32_t)word(p, lineno);
    s->hysteresis_counts = (int32_t)word(p, lineno);
    s->touch_debounce_frames = (uint8_t)word(p, lineno);
    s->release_debounce_frames = (uint8_t)word(p, lineno);
    s->baseline_slow_shift = (uint8_t)word(p, lineno);
    s->baseline_fast_shift = (uint8_t)word(p, lineno);
    s->baseline_period_frames = (uint16_t)word(p, lineno);
    s->stuck_timeout_frames = (int32_t)word(p, lineno);
    if (pt_settings_problem(s) != PT_KEY_NONE)
        fail("settings refused by pt_settings_problem", lineno);
}

static void print_event(const pt_event_t *e, unsigned long frame)
{
    switch (e->kind) {
    case PT_EV_TOUCH:
        printf("= %lu touch %u %lld\n", frame, (unsigned)e->source, (long long)e->delta_counts);
        break;
    case PT_EV_RELEASE:
        printf("= %lu release %u %lu %lld\n", frame, (unsigned)e->source, (unsigned long)e->held_frames,
               (long long)e->delta_counts);
        break;
    case PT_EV_STUCK:
        printf("= %lu stuck %u %lu %lld\n", frame, (unsigned)e->source, (unsigned long)e->held_frames,
               (long long)e->delta_counts);
        break;
    case PT_EV_REBASELINED:
        printf("= %lu rebaselined %u %lu\n", frame, (unsigned)e->source, (unsigned long)e->value);
        break;
    case PT_EV_GROUP:
    case PT_EV_SLIDER:
        if (e->value == PT_NONE)
            printf("= %lu %s %u none\n", frame, e->kind == PT_EV_GROUP ? "group" : "slider", (unsigned)e->source);
        else
            printf("= %lu %s %u %lu\n", frame, e->kind == PT_EV_GROUP ? "group" : "slider", (unsigned)e->source,
                   (unsigned long)e->value);
        break;
    default:
        printf("= %lu unknown-event %u\n", frame, (unsigned)e->kind);
    }
}

int main(int argc, char **argv)
{
    FILE *in = argc > 1 ? fopen(argv[1], "r") : stdin;
    long lineno = 0;
    long channels = 0;
    long set_count = 0;
    uint16_t ngroups = 0;
    uint16_t nsliders = 0;
    int started = 0;
    unsigned long frame = 0;
    uint16_t c;
    if (in == NULL) {
        perror("vector_runner");
        return 2;
    }
    while (fgets(line, sizeof line, in) != NULL) {
        char *p = line;
        lineno++;
        if (strchr(line, '\n') == NULL && !feof(in))
            fail("line too long", lineno);
        if (line[0] == '#' || line[0] == '=' || !more(line))
            continue;
        if (strncmp(p, "channels ", 9) == 0) {
            p += 9;
            channels = (long)word(&p, lineno);
            if (channels < 1 || channels > MAX_CH)
                fail("channels out of range", lineno);
        } else if (strncmp(p, "settings ", 9) == 0) {
            long ch;
            p += 9;
            ch = (long)word(&p, lineno);
            if (ch < 0 || ch >= channels || started)
                fail("bad settings line", lineno);
            read_settings(&settings[ch], &p, lineno);
            set_count++;
        } else if (strncmp(p, "group ", 6) == 0 || strncmp(p, "slider ", 7) == 0) {
            int is_group = p[0] == 'g';
            uint16_t n = 0;
            uint16_t *list = is_group ? group_members[ngroups] : slider_pads[nsliders];
            long margin_or_wheel;
            long res = 0;
            p += is_group ? 6 : 7;
            if (started || (is_group ? ngroups : nsliders) >= MAX_GROUPS)
                fail("bad group or slider line", lineno);
            margin_or_wheel = (long)word(&p, lineno);
            if (!is_group)
                res = (long)word(&p, lineno);
            while (more(p) && n < MAX_CH) {
                long m = (long)word(&p, lineno);
                if (m < 0 || m >= channels)
                    fail("member out of range", lineno);
                list[n++] = (uint16_t)m;
            }
            if (n == 0)
                fail("no members", lineno);
            if (is_group) {
                groups[ngroups].members = list;
                groups[ngroups].count = n;
                groups[ngroups].switch_margin_counts = (int32_t)margin_or_wheel;
                ngroups++;
            } else {
                sliders[nsliders].pads = list;
                sliders[nsliders].count = n;
                sliders[nsliders].wheel = (uint8_t)margin_or_wheel;
                sliders[nsliders].resolution = (uint16_t)res;
                nsliders++;
            }
        } else {
            if (!started) {
                if (set_count != channels)
                    fail("need one settings line per channel", lineno);
                pt_detect_init(&det, settings, chans, (uint16_t)channels);
                pt_groups_init(group_state, ngroups);
                pt_sliders_init(slider_state, nsliders);
                started = 1;
            }
            if (strncmp(p, "frame ", 6) == 0) {
                size_t n;
                size_t i;
                p += 6;
                for (c = 0; c < channels; c++) {
                    long long v = word(&p, lineno);
                    if (v < INT32_MIN || v > INT32_MAX)
                        fail("reading beyond 32 bits", lineno);
                    readings[c] = (int32_t)v;
                }
                n = pt_detect_frame(&det, readings, events);
                n += pt_groups_frame(&det, groups, group_state, ngroups, events + n);
                n += pt_sliders_frame(&det, sliders, slider_state, nsliders, events + n);
                for (i = 0; i < n; i++)
                    print_event(&events[i], frame);
                for (c = 0; c < channels; c++) {
                    uint64_t d = (uint64_t)pt_detect_delta(&det, c);
                    int b;
                    for (b = 0; b < 8; b++)
                        fnv((uint8_t)((d >> (8 * b)) & 0xFFu));
                    fnv(pt_detect_state(&det, c));
                }
                frame++;
            } else if (strncmp(p, "rebaseline ", 11) == 0) {
                p += 11;
                while (*p == ' ')
                    p++;
                pt_detect_rebaseline(&det, *p == '*' ? (uint16_t)PT_NONE : (uint16_t)word(&p, lineno));
            } else if (strncmp(p, "set ", 4) == 0) {
                long ch;
                int8_t keep;
                p += 4;
                ch = (long)word(&p, lineno);
                if (ch < 0 || ch >= channels)
                    fail("bad channel", lineno);
                keep = settings[ch].polarity;
                read_settings(&settings[ch], &p, lineno);
                settings[ch].polarity = keep; /* `set` lines leave the polarity as it is */
                pt_detect_settings_changed(&det, (uint16_t)ch);
            } else if (strncmp(p, "polarity ", 9) == 0) {
                long ch;
                p += 9;
                ch = (long)word(&p, lineno);
                if (ch < 0 || ch >= channels)
                    fail("bad channel", lineno);
                settings[ch].polarity = (int8_t)word(&p, lineno);
                pt_detect_settings_changed(&det, (uint16_t)ch);
                pt_detect_rebaseline(&det, (uint16_t)ch);
            } else {
                fail("unknown line", lineno);
            }
        }
    }
    printf("= end frames %lu hash %016llx\n", frame, (unsigned long long)hash);
    printf("= end baseline_fp");
    for (c = 0; c < channels; c++)
        printf(" %lld", (long long)(started ? pt_detect_baseline_fp(&det, c) : 0));
    printf("\n");
    if (in != stdin)
        fclose(in);
    return 0;
}
