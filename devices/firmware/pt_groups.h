/* pt_groups.h: exclusive groups, sliders and wheels over a pt_detector_t (ALGORITHM.md, version 1).
 *
 * Run after pt_detect_frame() on the same frame: they read the detector's states and deltas of that
 * frame. Configuration (pt_group_t, pt_slider_t in pt_types.h) is const and may sit in flash; the state
 * is one small struct per group or slider, owned by the caller. No malloc, no floats, no globals.
 *
 *   static pt_group_state_t gstate[PADTUNE_GROUPS];
 *   static pt_slider_state_t sstate[PADTUNE_SLIDERS];
 *   pt_groups_init(gstate, PADTUNE_GROUPS);
 *   pt_sliders_init(sstate, PADTUNE_SLIDERS);
 *   ... each frame, after pt_detect_frame(&det, readings, events):
 *   n += pt_groups_frame(&det, padtune_groups, gstate, PADTUNE_GROUPS, events + n);
 *   n += pt_sliders_frame(&det, padtune_sliders, sstate, PADTUNE_SLIDERS, events + n);
 *
 * Events of one frame then come in padtune's order: channels, groups, sliders, each in index order.
 */
#ifndef PT_GROUPS_H
#define PT_GROUPS_H

#include <stddef.h>
#include <stdint.h>

#include "pt_detect.h"
#include "pt_types.h"

/* The member an exclusive group reports now (a channel index), or PT_NONE. 2 bytes. */
typedef struct pt_group_state {
    uint16_t winner;
} pt_group_state_t;

/* A slider's reported position (0 .. resolution-1, or PT_NONE while untouched). 4 bytes. */
typedef struct pt_slider_state {
    uint16_t position;
    uint8_t touched;
} pt_slider_state_t;

/* Nobody reported in any of the `count` groups (start-up, or after the detector is set up anew). */
void pt_groups_init(pt_group_state_t *state, uint16_t count);

/* Untouched, no position, for all `count` sliders. */
void pt_sliders_init(pt_slider_state_t *state, uint16_t count);

/* One frame of every group (ALGORITHM.md, "Exclusive groups"): candidates are the members reported
 * touched; the winner keeps its place unless a candidate's delta beats it by more than the group's
 * margin; else the largest delta wins, the member listed first among equals. Writes one PT_EV_GROUP
 * event per group whose reported member changed (to `events`, room for `count` entries, or NULL) and
 * returns how many. `groups` and `state` have `count` entries; nothing is kept.
 * Cost: about 30 cycles per member and frame. */
size_t pt_groups_frame(const pt_detector_t *d, const pt_group_t *groups, pt_group_state_t *state,
                       uint16_t count, pt_event_t *events);

/* One frame of every slider and wheel (ALGORITHM.md, "Sliders and wheels"): touched when any pad is
 * reported touched; the position is the centroid of the strongest pad and its two neighbours, in
 * integers. Writes one PT_EV_SLIDER event per slider whose touch or position changed (to `events`, room
 * for `count` entries, or NULL) and returns how many. `sliders` and `state` have `count` entries.
 * Cost: about 20 cycles per pad (finding the strongest) plus, per touched slider, a few 64-bit
 * multiplies and a 16-step division of the library's own (a few hundred cycles on a Cortex-M0+). */
size_t pt_sliders_frame(const pt_detector_t *d, const pt_slider_t *sliders, pt_slider_state_t *state,
                        uint16_t count, pt_event_t *events);

/* The position of one slider for the detector's current frame, whether or not it is touched (the
 * centroid rule above; the strongest pad's own position when its neighbourhood has no positive delta). */
uint16_t pt_slider_position(const pt_detector_t *d, const pt_slider_t *slider);

#endif /* PT_GROUPS_H */
