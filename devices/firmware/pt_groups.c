/* pt_groups.c: exclusive groups, sliders and wheels (processing/ALGORITHM.md, version 1), bit for bit.
 *
 * The slider's intermediate values stay below 2^61 for up to 1024 pads, deltas up to 2^32 and a
 * resolution up to 65535 (ALGORITHM.md, "Integer rules"). Both divisions have non-negative operands and a
 * quotient below the resolution, so a 16-step division does them exactly (div_position); the wheel's
 * non-negative `num mod m` needs no division at all.
 */
#include "pt_groups.h"

#include <stddef.h>
#include <stdint.h>

void pt_groups_init(pt_group_state_t *state, uint16_t count)
{
    uint16_t g;
    for (g = 0; g < count; g++)
        state[g].winner = PT_NONE;
}

void pt_sliders_init(pt_slider_state_t *state, uint16_t count)
{
    uint16_t i;
    for (i = 0; i < count; i++) {
        state[i].position = PT_NONE;
        state[i].touched = 0;
    }
}

/* a / b, floored, for b > 0 and a quotient below 2^16 (a position is below the resolution, at most
 * 65535): sixteen steps of compare and subtract. No 64-bit division helper is linked (about 1 KB on a
 * Cortex-M0+, which has no divide instruction); b < 2^46 here, so b * 2^15 fits. */
static uint16_t div_position(uint64_t a, uint64_t b)
{
    uint64_t step = b << 15;
    uint16_t bit = 0x8000u;
    uint16_t q = 0;
    while (bit != 0) {
        if (a >= step) {
            a -= step;
            q = (uint16_t)(q | bit);
        }
        step >>= 1;
        bit = (uint16_t)(bit >> 1);
    }
    return q;
}

/* One frame of one group: the member to report now, or PT_NONE. */
static uint16_t pick_winner(const pt_detector_t *d, const pt_group_t *g, uint16_t current)
{
    uint16_t best = PT_NONE;
    int64_t best_delta = 0;
    int current_candidate = 0;
    uint16_t i;
    for (i = 0; i < g->count; i++) {
        uint16_t m = g->members[i];
        int64_t delta;
        if (!pt_detect_touched(d, m))
            continue;
        delta = pt_detect_delta(d, m);
        if (best == PT_NONE || delta > best_delta) {
            best = m;
            best_delta = delta;
        }
        if (m == current)
            current_candidate = 1;
    }
    if (best != PT_NONE && current_candidate
        && best_delta <= pt_detect_delta(d, current) + (int64_t)g->switch_margin_counts)
        return current;
    return best;
}

size_t pt_groups_frame(const pt_detector_t *d, const pt_group_t *groups, pt_group_state_t *state,
                       uint16_t count, pt_event_t *events)
{
    size_t n = 0;
    uint16_t g;
    for (g = 0; g < count; g++) {
        uint16_t winner = pick_winner(d, &groups[g], state[g].winner);
        if (winner == state[g].winner)
            continue;
        state[g].winner = winner;
        if (events != NULL) {
            events[n].kind = PT_EV_GROUP;
            events[n].source = g;
            events[n].value = winner;
            events[n].delta_counts = 0;
            events[n].held_frames = 0;
        }
        n++;
    }
    return n;
}

uint16_t pt_slider_position(const pt_detector_t *d, const pt_slider_t *slider)
{
    int32_t n = slider->count;
    int32_t i = 0;
    int32_t k;
    int64_t best = pt_detect_delta(d, slider->pads[0]);
    int64_t num = 0;
    int64_t den = 0;
    int64_t res = slider->resolution;
    for (k = 1; k < n; k++) {
        int64_t delta = pt_detect_delta(d, slider->pads[k]);
        if (delta > best) {
            best = delta;
            i = k;
        }
    }
    for (k = i - 1; k <= i + 1; k++) {
        int32_t pad = k;
        int64_t w;
        if (k < 0 || k >= n) {
            if (!slider->wheel)
                continue;
            pad = k < 0 ? n - 1 : 0; /* k mod n for k = -1 or n */
        }
        w = pt_detect_delta(d, slider->pads[pad]);
        if (w < 0)
            w = 0;
        num += (int64_t)k * w;
        den += w;
    }
    if (den == 0) {
        num = i;
        den = 1;
    }
    if (slider->wheel) {
        /* num lies in [-den, n * den] (positions -1 .. n, weights summing to den), so ALGORITHM.md's
         * non-negative num mod m is one addition or subtraction. */
        int64_t m = (int64_t)n * den;
        int64_t mod = num < 0 ? num + m : num >= m ? num - m : num;
        return div_position((uint64_t)(mod * res), (uint64_t)m);
    }
    if (n == 1)
        return 0;
    /* num <= (n - 1) * den: the quotient is at most res - 1. */
    return div_position((uint64_t)(num * (res - 1)), (uint64_t)(den * (int64_t)(n - 1)));
}

size_t pt_sliders_frame(const pt_detector_t *d, const pt_slider_t *sliders, pt_slider_state_t *state,
                        uint16_t count, pt_event_t *events)
{
    size_t n = 0;
    uint16_t s;
    for (s = 0; s < count; s++) {
        const pt_slider_t *sl = &sliders[s];
        uint8_t touched = 0;
        uint16_t position = PT_NONE;
        uint16_t k;
        for (k = 0; k < sl->count && !touched; k++)
            touched = (uint8_t)pt_detect_touched(d, sl->pads[k]);
        if (touched)
            position = pt_slider_position(d, sl);
        if (touched == state[s].touched && position == state[s].position)
            continue;
        state[s].touched = touched;
        state[s].position = position;
        if (events != NULL) {
            events[n].kind = PT_EV_SLIDER;
            events[n].source = s;
            events[n].value = position;
            events[n].delta_counts = 0;
            events[n].held_frames = 0;
        }
        n++;
    }
    return n;
}
