/* pt_detect.h: padtune's per-channel touch detector (processing/ALGORITHM.md, version 1), in C99.
 *
 * Bit for bit the detector padtune runs on the host: baseline in fixed point, polarity, touch and release
 * debounce, hysteresis, stuck timeout, re-baseline on demand. Integers only (a frame in 32-bit arithmetic;
 * int64_t only at a baseline period's end and in the event's delta), no floating point, no malloc, no globals: every byte of state is in
 * structs the caller owns, so several detectors can run side by side (one per sensor block, say) and each
 * call touches only the instance it is given. Functions on one instance must not run concurrently (call
 * pt_detect_rebaseline() from an interrupt only if it cannot preempt pt_detect_frame()).
 *
 * RAM: sizeof(pt_chan_t) = 20 bytes per channel plus sizeof(pt_detector_t) (16 bytes on a 32-bit MCU).
 * Cycle counts in these headers are estimates from the code arm-none-eabi-gcc -Os makes for a Cortex-M0+,
 * not measurements on silicon; flash figures are `make firmware-size`'s.
 * The settings are read through a pointer: a const table in flash, or a RAM copy a board edits live.
 *
 *   static pt_chan_t chans[PADTUNE_CHANNELS];
 *   static pt_detector_t det;
 *   static pt_event_t events[PADTUNE_CHANNELS];
 *   pt_detect_init(&det, padtune_settings, chans, PADTUNE_CHANNELS);
 *   for (;;) {                              // one frame: every channel measured once
 *       measure(readings);
 *       size_t n = pt_detect_frame(&det, readings, events);
 *       for (size_t i = 0; i < n; i++) act_on(&events[i]);
 *   }
 */
#ifndef PT_DETECT_H
#define PT_DETECT_H

#include <stddef.h>
#include <stdint.h>

#include "pt_types.h"

/* What an event says. Channel events come from pt_detect_frame(), group and slider events from
 * pt_groups_frame() / pt_sliders_frame() (pt_groups.h). */
enum pt_event_kind {
    PT_EV_TOUCH = 1,       /* channel touched: delta_counts */
    PT_EV_RELEASE = 2,     /* channel released: held_frames, delta_counts */
    PT_EV_STUCK = 3,       /* held for stuck_timeout_frames: released and re-baselined at this frame */
    PT_EV_REBASELINED = 4, /* baseline taken from this frame's reading; value = 1 if it was touched */
    PT_EV_GROUP = 5,       /* group `source` now reports channel `value`, or PT_NONE for nobody */
    PT_EV_SLIDER = 6       /* slider `source` moved or was touched or released: value = position, or
                              PT_NONE when untouched */
};

/* One detection. Plain data the caller owns (an array it passes in); nothing points into the library. */
typedef struct pt_event {
    int64_t delta_counts; /* TOUCH, RELEASE, STUCK: the channel's delta at this frame, whole counts */
    uint32_t held_frames; /* RELEASE, STUCK: frames since the touch was reported */
    uint32_t value;       /* GROUP: channel or PT_NONE; SLIDER: position or PT_NONE; REBASELINED: 0/1 */
    uint16_t source;      /* channel (TOUCH .. REBASELINED), group index or slider index */
    uint8_t kind;         /* enum pt_event_kind */
} pt_event_t;

/* One channel's state: 20 bytes. Opaque: read it with the accessors below. The baseline is kept as
 * whole counts and a fraction, the 40-bit period sum split in two, so that no int64_t sits in RAM per
 * channel and a frame needs no 64-bit shift. */
typedef struct pt_chan {
    int32_t base;        /* baseline_fp (counts * 256) / 256, rounded down: whole counts */
    uint32_t acc_lo;     /* sum of the period's released readings, low 32 bits */
    uint32_t held;       /* frames since the touch was reported (saturates at 2^32-1) */
    uint32_t delta_mag;  /* |delta| of the last frame (up to 2^32-1 for readings at the int32 limits) */
    uint8_t frac;        /* baseline_fp mod 256: the fraction, 0..255 */
    uint8_t acc_hi;      /* period sum, bits 32..39 (two's complement of the 40-bit sum) */
    uint8_t count;       /* frames counted toward the pending touch or release */
    uint8_t flags;       /* state (2 bits), clean, pending, running polarity, sign of delta */
} pt_chan_t;

/* One detector: the channels, their settings and the frame counter. Caller-owned; fill it with
 * pt_detect_init() and leave the fields alone. */
typedef struct pt_detector {
    const pt_settings_t *settings; /* channels entries, read every frame (not owned) */
    pt_chan_t *chans;              /* channels entries of state (not owned) */
    uint32_t frame;                /* frames processed (the period clock); wraps harmlessly */
    uint16_t channels;
} pt_detector_t;

/* Per-channel RAM of the detector, for sizing tables. */
#define PT_DETECT_BYTES_PER_CHANNEL (sizeof(pt_chan_t))

/* Set up a detector over `channels` channels (1 .. 1024): every channel starts pending (its first
 * reading becomes its baseline), released, with the polarity of its settings. `settings` and `chans`
 * must each have `channels` entries and outlive the detector; the library keeps both pointers and never
 * frees either. `settings` may be const data in flash. Cost: about 10 cycles per channel. */
void pt_detect_init(pt_detector_t *d, const pt_settings_t *settings, pt_chan_t *chans, uint16_t channels);

/* Process one frame: `readings[c]` for every channel c (signed 32-bit counts, as measured). Runs
 * ALGORITHM.md steps 1-5 for each channel, then advances the frame counter. Writes the frame's events,
 * in channel order, to `events` (room for `channels` entries: a channel reports at most one event per
 * frame; entries past the returned count are used as scratch) and returns how many it wrote; `events`
 * may be NULL when the caller only reads states.
 * Neither array is kept. Cost: on a Cortex-M0+ roughly 80-120 cycles per channel and frame when
 * nothing happens (32-bit arithmetic, no division; an estimate from the compiled code, not measured on
 * silicon), about 150 more at a baseline period's end; about 120 B of stack. The whole detector is
 * 1088 B of flash and needs no libgcc helper. */
size_t pt_detect_frame(pt_detector_t *d, const int32_t *readings, pt_event_t *events);

/* Take channel `channel`'s next reading as its baseline (ALGORITHM.md, "Re-baseline triggers"), or every
 * channel's when `channel` is PT_NONE. A key that was touched is released by it without a release event
 * (the re-baselined event says it was touched). Cost: a few cycles per channel. */
void pt_detect_rebaseline(pt_detector_t *d, uint16_t channel);

/* Tell the detector that the application changed channel `channel`'s settings in place (the array
 * given to pt_detect_init(), in RAM). The baseline period under way is discarded (clean = false); if
 * the polarity changed, the channel re-baselines on its next frame (a state reached under the other
 * direction means nothing under the new one). Check the new values with pt_settings_problem() first:
 * the detector trusts them. Call between frames. Cost: a few cycles. */
void pt_detect_settings_changed(pt_detector_t *d, uint16_t channel);

/* The state of channel `channel` after the last frame (enum pt_key_state). */
uint8_t pt_detect_state(const pt_detector_t *d, uint16_t channel);

/* 1 if channel `channel` is reported touched (state TOUCHED or RELEASING), else 0. */
int pt_detect_touched(const pt_detector_t *d, uint16_t channel);

/* Channel `channel`'s delta at the last frame, whole counts, positive toward touch. */
int64_t pt_detect_delta(const pt_detector_t *d, uint16_t channel);

/* Channel `channel`'s baseline in fixed point (counts * 256), as ALGORITHM.md's baseline_fp. */
int64_t pt_detect_baseline_fp(const pt_detector_t *d, uint16_t channel);

#endif /* PT_DETECT_H */
