/* pt_types.h: the configuration types of the padtune firmware library (C99).
 *
 * One set of names, shared by the library and by the header `padtune export --c-header` writes: the
 * export includes this file and fills these structs with designated initialisers, so a renamed or
 * missing field, or a different PT_TYPES_VERSION, stops the firmware build at compile time.
 *
 * Everything here is plain data, `const`-qualifiable and placeable in flash. Units and ranges are those
 * of padtune's processing/ALGORITHM.md ("Per-channel settings"); pt_settings_problem() checks them.
 * Only <stdint.h> and <stddef.h>; no function here allocates or keeps a pointer.
 */
#ifndef PT_TYPES_H
#define PT_TYPES_H

#include <stddef.h>
#include <stdint.h>

/* Bumped whenever a struct below changes shape; the exported header refuses any other value. */
#define PT_TYPES_VERSION 1
/* ALGORITHM.md's version: the detection rules this library implements bit for bit. */
#define PT_ALGORITHM_VERSION 1
/* Fractional bits of the fixed-point baseline: 1 count = 256 units. */
#define PT_FRAC_BITS 8

/* Limits of the settings (ALGORITHM.md; processing/settings.py). */
#define PT_MAX_COUNTS (1L << 24)         /* threshold_counts, switch_margin_counts */
#define PT_MAX_DEBOUNCE_FRAMES 255
#define PT_MAX_SHIFT 16
#define PT_MAX_PERIOD_FRAMES 256
#define PT_MAX_STUCK_FRAMES 2147483647L  /* 2^31 - 1 */
#define PT_MAX_CHANNELS 1024
#define PT_MIN_RESOLUTION 2
#define PT_MAX_RESOLUTION 65535

/* "Nobody" for a group winner or a slider position (never a valid channel or position). */
#define PT_NONE 0xFFFFu

/* One channel's detection settings, exactly the profile's setting keys plus its polarity.
 * 20 bytes. A board that takes live `set` commands keeps an array of these in RAM (copied from the
 * const table at start-up) and edits it; others point the detector at the const table in flash. */
typedef struct pt_settings {
    int32_t threshold_counts;        /* T: delta needed for a touch, 1 .. 2^24 */
    int32_t hysteresis_counts;       /* H: release level is T - H, 0 .. T-1 */
    int32_t stuck_timeout_frames;    /* X: release and re-baseline a key held this long; 0 = never */
    uint16_t baseline_period_frames; /* P: frames per baseline update, a power of two 1 .. 256 */
    uint8_t touch_debounce_frames;   /* N: 1 .. 255 */
    uint8_t release_debounce_frames; /* M: 1 .. 255 */
    uint8_t baseline_slow_shift;     /* step toward touch: 1/2^S_slow of the gap, 0 .. 16 */
    uint8_t baseline_fast_shift;     /* step away from touch, 0 .. baseline_slow_shift */
    int8_t polarity;                 /* +1: a touch raises the reading; -1: a touch lowers it */
} pt_settings_t;

/* An exclusive group: of its members reported touched, only the strongest is reported. */
typedef struct pt_group {
    const uint16_t *members;      /* channel indices, in priority order for ties (not owned) */
    uint16_t count;               /* number of members, >= 1 */
    int32_t switch_margin_counts; /* a rival must beat the winner's delta by more than this, 0 .. 2^24 */
} pt_group_t;

/* A slider (pads in a row) or a wheel (pads in a ring), with a position 0 .. resolution-1. */
typedef struct pt_slider {
    const uint16_t *pads;    /* channel indices in physical order (not owned) */
    uint16_t count;          /* number of pads, 1 .. 1024 */
    uint16_t resolution;     /* positions 0 .. resolution-1, 2 .. 65535 */
    uint8_t wheel;           /* 1: the last pad neighbours the first */
} pt_slider_t;

/* Detection state of a channel; the values are padtune's KeyState (and the wire's state digits). */
enum pt_key_state {
    PT_RELEASED = 0,   /* idle */
    PT_CONFIRMING = 1, /* delta reached the threshold; counting the touch debounce */
    PT_TOUCHED = 2,
    PT_RELEASING = 3   /* delta fell below T - H; counting the release debounce */
};

/* The settings, in the order the profile lists them and pt_settings_problem() checks them. */
enum pt_setting_key {
    PT_KEY_NONE = 0, /* no problem */
    PT_KEY_THRESHOLD_COUNTS,
    PT_KEY_HYSTERESIS_COUNTS,
    PT_KEY_TOUCH_DEBOUNCE_FRAMES,
    PT_KEY_RELEASE_DEBOUNCE_FRAMES,
    PT_KEY_BASELINE_SLOW_SHIFT,
    PT_KEY_BASELINE_FAST_SHIFT,
    PT_KEY_BASELINE_PERIOD_FRAMES,
    PT_KEY_STUCK_TIMEOUT_FRAMES,
    PT_KEY_POLARITY
};

/* The first setting of `s` that breaks the rules (the enum above, in that order: threshold range,
 * hysteresis 0 .. T-1, debounces 1 .. 255, shifts 0 .. 16, fast shift at most slow shift, period a
 * power of two 1 .. 256, stuck timeout 0 .. 2^31-1, polarity +1 or -1), or PT_KEY_NONE (0) when all
 * are allowed. The same rules, in the same order, as a profile (processing/settings.py). A command
 * parser checks a candidate copy with it before writing the live settings. Pure; about 40 cycles;
 * no stack beyond a few words. Defined in pt_detect.c. */
int pt_settings_problem(const pt_settings_t *s);

#endif /* PT_TYPES_H */
