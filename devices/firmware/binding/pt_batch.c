/* pt_batch.c: host-only glue for the Python binding (devices/firmware/clib.py); not firmware.
 *
 * Runs the library over a block of frames in one call, as a board's main loop would (detector, then
 * groups, then sliders, each frame), and hands back every frame's deltas and states plus the events
 * with the row they belong to. One ctypes call per block instead of one per frame keeps a replay fast.
 */
#include <stddef.h>
#include <stdint.h>

#include "../pt_detect.h"
#include "../pt_groups.h"

/* Everything one board's library instance needs, in one struct the binding allocates. */
typedef struct pt_batch {
    pt_detector_t det;
    const pt_group_t *groups;
    pt_group_state_t *group_state;
    const pt_slider_t *sliders;
    pt_slider_state_t *slider_state;
    uint16_t group_count;
    uint16_t slider_count;
} pt_batch_t;

/* sizeof of every struct the binding mirrors, so it can refuse a library whose layout differs. */
void pt_batch_sizes(uint32_t *out)
{
    out[0] = (uint32_t)sizeof(pt_settings_t);
    out[1] = (uint32_t)sizeof(pt_chan_t);
    out[2] = (uint32_t)sizeof(pt_event_t);
    out[3] = (uint32_t)sizeof(pt_detector_t);
    out[4] = (uint32_t)sizeof(pt_group_t);
    out[5] = (uint32_t)sizeof(pt_slider_t);
    out[6] = (uint32_t)sizeof(pt_group_state_t);
    out[7] = (uint32_t)sizeof(pt_slider_state_t);
    out[8] = (uint32_t)sizeof(pt_batch_t);
}

/* Process up to `frames` frames of `readings` (frames x channels, row-major). Each frame's deltas and
 * states go to `deltas` / `states` (same shape); its events to `events` (with the frame's row in `rows`),
 * after the `*count` already there. Stops early, before a frame whose events might not fit in
 * `capacity`; returns the frames processed. */
uint32_t pt_batch_run(pt_batch_t *b, const int32_t *readings, uint32_t frames, int64_t *deltas, int8_t *states,
                      pt_event_t *events, uint32_t *rows, uint32_t capacity, uint32_t *count)
{
    uint16_t channels = b->det.channels;
    uint32_t most = (uint32_t)channels + b->group_count + b->slider_count;
    uint32_t f;
    for (f = 0; f < frames; f++) {
        size_t n;
        size_t i;
        uint16_t c;
        if (capacity - *count < most)
            break;
        n = pt_detect_frame(&b->det, readings + (size_t)f * channels, events + *count);
        n += pt_groups_frame(&b->det, b->groups, b->group_state, b->group_count, events + *count + n);
        n += pt_sliders_frame(&b->det, b->sliders, b->slider_state, b->slider_count, events + *count + n);
        for (i = 0; i < n; i++)
            rows[*count + i] = f;
        *count += (uint32_t)n;
        for (c = 0; c < channels; c++) {
            deltas[(size_t)f * channels + c] = pt_detect_delta(&b->det, c);
            states[(size_t)f * channels + c] = (int8_t)pt_detect_state(&b->det, c);
        }
    }
    return f;
}
