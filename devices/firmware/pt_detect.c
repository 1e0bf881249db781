/* pt_detect.c: the per-channel detector of processing/ALGORITHM.md (version 1), bit for bit.
 *
 * Integer rules (ALGORITHM.md, "Integer rules"): arithmetic on int64_t; division truncates toward zero;
 * no negative number is ever shifted (C leaves >> of a negative value implementation-defined): a
 * division by 2^k is done on the magnitude in uint64_t and the sign put back.
 *
 * RAM per channel is 20 bytes: the 40-bit baseline and period sum are kept as a 32-bit and an 8-bit
 * part and joined into int64_t only in registers. Splitting goes through uint64_t (conversions to
 * unsigned types are defined modulo 2^n), and joining multiplies, so nothing depends on how a compiler
 * shifts or converts negative values.
 */
#include "pt_detect.h"

#include <stddef.h>
#include <stdint.h>

#define F_STATE 0x03u   /* enum pt_key_state */
#define F_CLEAN 0x04u   /* every frame of the current baseline period so far ended released */
#define F_PENDING 0x08u /* take the next reading as the baseline */
#define F_NEG 0x10u     /* the channel runs with polarity -1 */
#define F_DNEG 0x20u    /* the last delta was negative */

#define ONE_FP 256 /* 1 << PT_FRAC_BITS */

/* Kept out of line (GCC, Clang): inlined into their one caller they cost the Cortex-M0+ more flash than
 * the call (fewer registers than live values: spills). Other compilers may inline as they like. */
#if defined(__GNUC__)
#define PT_OUTLINE __attribute__((noinline))
#else
#define PT_OUTLINE
#endif

/* a / 2^k, truncated toward zero, for |a| < 2^63 (ALGORITHM.md's tdiv_pow2): on the magnitude, one
 * bit at a time (k <= 16, only at a baseline period's end), so no 64-bit shift helper is linked. */
PT_OUTLINE static int64_t tdiv_pow2(int64_t a, unsigned k)
{
    uint64_t mag = a < 0 ? (uint64_t)0 - (uint64_t)a : (uint64_t)a;
    while (k-- > 0)
        mag >>= 1;
    return a < 0 ? -(int64_t)mag : (int64_t)mag;
}

/* The period sum, 40 bits signed (at most 256 readings), kept as its low 32 bits and the next 8 (two's
 * complement; step() adds a reading with carry): joined by a multiplication. */
static int64_t get_acc(const pt_chan_t *c)
{
    int32_t h = c->acc_hi >= 128u ? (int32_t)c->acc_hi - 256 : (int32_t)c->acc_hi;
    return (int64_t)h * 4294967296LL + (int64_t)c->acc_lo;
}

/* baseline_fp = base * 256 + frac: the whole counts (floor) and the fraction 0..255. baseline_fp stays
 * within 256 x the readings' range (each update moves it toward a period mean, never past it), so
 * `base` fits int32. */
static int64_t get_base_fp(const pt_chan_t *c)
{
    return (int64_t)c->base * ONE_FP + c->frac;
}

static void set_base(pt_chan_t *c, int32_t reading)
{
    c->base = reading;
    c->frac = 0;
}

static uint8_t polarity_flag(const pt_settings_t *s)
{
    return s->polarity < 0 ? (uint8_t)F_NEG : (uint8_t)0;
}

int pt_settings_problem(const pt_settings_t *s)
{
    uint16_t p = s->baseline_period_frames;
    if (s->threshold_counts < 1 || s->threshold_counts > PT_MAX_COUNTS)
        return PT_KEY_THRESHOLD_COUNTS;
    if (s->hysteresis_counts < 0 || s->hysteresis_counts >= s->threshold_counts)
        return PT_KEY_HYSTERESIS_COUNTS;
    if (s->touch_debounce_frames < 1)
        return PT_KEY_TOUCH_DEBOUNCE_FRAMES; /* at most 255 by its type */
    if (s->release_debounce_frames < 1)
        return PT_KEY_RELEASE_DEBOUNCE_FRAMES;
    if (s->baseline_slow_shift > PT_MAX_SHIFT)
        return PT_KEY_BASELINE_SLOW_SHIFT;
    if (s->baseline_fast_shift > PT_MAX_SHIFT || s->baseline_fast_shift > s->baseline_slow_shift)
        return PT_KEY_BASELINE_FAST_SHIFT;
    if (p < 1 || p > PT_MAX_PERIOD_FRAMES || (p & (p - 1u)) != 0)
        return PT_KEY_BASELINE_PERIOD_FRAMES;
    if (s->stuck_timeout_frames < 0)
        return PT_KEY_STUCK_TIMEOUT_FRAMES; /* at most 2^31-1 by its type */
    if (s->polarity != 1 && s->polarity != -1)
        return PT_KEY_POLARITY;
    return PT_KEY_NONE;
}

void pt_detect_init(pt_detector_t *d, const pt_settings_t *settings, pt_chan_t *chans, uint16_t channels)
{
    uint16_t c;
    d->settings = settings;
    d->chans = chans;
    d->channels = channels;
    d->frame = 0;
    for (c = 0; c < channels; c++) {
        pt_chan_t *ch = &chans[c];
        ch->base = 0;
        ch->frac = 0;
        ch->acc_lo = 0;
        ch->acc_hi = 0;
        ch->held = 0;
        ch->delta_mag = 0;
        ch->count = 0;
        ch->flags = (uint8_t)(PT_RELEASED | F_PENDING | polarity_flag(&settings[c]));
    }
}

/* The period mean in fixed point, acc * 2^(8 - p) for a period P = 2^p <= 256 (ALGORITHM.md step 5),
 * exactly: doubled by additions (defined for negative sums too), no multiply helper on a Cortex-M0+. */
static int64_t mean_fp(int64_t acc, uint16_t period_frames)
{
    uint16_t q;
    for (q = period_frames; q != 0 && q < (uint16_t)ONE_FP; q = (uint16_t)(q * 2u))
        acc += acc;
    return acc;
}

/* Steps 1-4 of ALGORITHM.md for one channel; returns the event kind (0 for none). 32-bit arithmetic
 * only: the delta is a sign (F_DNEG) and a magnitude up to 2^32 - 1, compared with the levels, which
 * valid settings keep positive (threshold 1 .. 2^24, hysteresis 0 .. threshold - 1). */
PT_OUTLINE static unsigned step(pt_chan_t *ch, const pt_settings_t *s, int32_t reading, pt_event_t *ev)
{
    unsigned kind = 0;
    unsigned f = ch->flags;
    unsigned st;
    uint32_t mag;
    int neg;
    if (f & F_PENDING) {
        ev->value = (f & F_STATE) >= PT_TOUCHED ? 1u : 0u; /* TOUCHED or RELEASING */
        set_base(ch, reading);
        f = ((f & ~(F_STATE | F_CLEAN | F_PENDING)) | PT_RELEASED);
        ch->count = 0;
        ch->held = 0;
        ch->acc_lo = 0;
        ch->acc_hi = 0;
        kind = PT_EV_REBASELINED;
    }
    /* delta = tdiv_pow2(polarity * (reading * 256 - baseline_fp), 8), exactly, without 64 bits: with
     * baseline_fp = base * 256 + frac and d = reading - base (|d| < 2^32, its magnitude exact modulo
     * 2^32), the quotient is d, less one when d > 0 and frac > 0 (the fraction pulls it below the next
     * whole count), times the polarity. */
    neg = reading < ch->base;
    mag = neg ? (uint32_t)ch->base - (uint32_t)reading : (uint32_t)reading - (uint32_t)ch->base;
    if (!neg && mag != 0 && ch->frac != 0)
        mag--;
    if (f & F_NEG)
        neg = !neg;
    if (mag == 0)
        neg = 0;
    f = (neg ? f | F_DNEG : f & ~F_DNEG);
    ch->delta_mag = mag;
    st = f & F_STATE;
    if (st == PT_RELEASED || st == PT_CONFIRMING) {
        if (!neg && mag >= (uint32_t)s->threshold_counts) {
            unsigned count = (st == PT_CONFIRMING) ? ch->count + 1u : 1u;
            if (count >= s->touch_debounce_frames) {
                st = PT_TOUCHED;
                ch->count = 0;
                ch->held = 0;
                kind = PT_EV_TOUCH;
            } else {
                st = PT_CONFIRMING;
                ch->count = (uint8_t)count;
            }
        } else {
            st = PT_RELEASED;
            ch->count = 0;
        }
    } else {
        if (ch->held != UINT32_MAX)
            ch->held++;
        if (neg || mag < (uint32_t)(s->threshold_counts - s->hysteresis_counts)) {
            unsigned count = (st == PT_RELEASING) ? ch->count + 1u : 1u;
            if (count >= s->release_debounce_frames) {
                st = PT_RELEASED;
                ch->count = 0;
                kind = PT_EV_RELEASE;
            } else {
                st = PT_RELEASING;
                ch->count = (uint8_t)count;
            }
        } else {
            st = PT_TOUCHED;
            ch->count = 0;
        }
        if (st != PT_RELEASED && s->stuck_timeout_frames > 0 && ch->held >= (uint32_t)s->stuck_timeout_frames) {
            kind = PT_EV_STUCK;
            set_base(ch, reading);
            st = PT_RELEASED;
            ch->count = 0;
            f = (f & ~F_CLEAN);
        }
        if (kind == PT_EV_RELEASE || kind == PT_EV_STUCK)
            ev->held_frames = ch->held;
    }
    f = ((f & ~F_STATE) | st);
    if (st == PT_RELEASED) {
        /* the 40-bit period sum plus the reading sign-extended: carry and sign into the high byte */
        uint32_t lo = ch->acc_lo + (uint32_t)reading;
        ch->acc_hi = (uint8_t)(ch->acc_hi + (lo < ch->acc_lo ? 1u : 0u) + (reading < 0 ? 0xFFu : 0u));
        ch->acc_lo = lo;
    } else {
        f = (f & ~F_CLEAN);
    }
    ch->flags = (uint8_t)f;
    return kind;
}

/* The channel's last delta, whole counts, positive toward touch. */
PT_OUTLINE static int64_t delta_of(const pt_chan_t *ch)
{
    int64_t mag = (int64_t)ch->delta_mag;
    return (ch->flags & F_DNEG) ? -mag : mag;
}

/* Step 5: the end of a baseline period. */
PT_OUTLINE static void period_end(pt_chan_t *ch, const pt_settings_t *s)
{
    if (ch->flags & F_CLEAN) {
        int64_t bfp = get_base_fp(ch);
        int64_t diff = mean_fp(get_acc(ch), s->baseline_period_frames) - bfp;
        int toward = (ch->flags & F_NEG) ? diff < 0 : diff > 0;
        unsigned shift = toward ? s->baseline_slow_shift : s->baseline_fast_shift;
        bfp += tdiv_pow2(diff, shift);
        ch->frac = (uint8_t)((uint64_t)bfp & 0xFFu);
        ch->base = (int32_t)((bfp - ch->frac) / ONE_FP); /* exact: a multiple of 256 */
    }
    ch->acc_lo = 0;
    ch->acc_hi = 0;
    ch->flags = (uint8_t)(ch->flags | F_CLEAN);
}

size_t pt_detect_frame(pt_detector_t *d, const int32_t *readings, pt_event_t *events)
{
    size_t n = 0;
    uint32_t clock = d->frame;
    unsigned c;
    for (c = 0; c < d->channels; c++) {
        const pt_settings_t *s = &d->settings[c];
        pt_chan_t *ch = &d->chans[c];
        pt_event_t scratch;
        pt_event_t *ev = events != NULL ? &events[n] : &scratch; /* filled in place; kept if kind != 0 */
        unsigned kind;
        uint32_t mask = (uint32_t)s->baseline_period_frames - 1u;
        ev->held_frames = 0;
        ev->value = 0;
        kind = step(ch, s, readings[c], ev);
        if ((clock & mask) == mask)
            period_end(ch, s);
        if (kind != 0) {
            ev->kind = (uint8_t)kind;
            ev->source = (uint16_t)c;
            ev->delta_counts = kind == PT_EV_REBASELINED ? 0 : delta_of(ch);
            n++;
        }
    }
    d->frame = clock + 1u;
    return n;
}

void pt_detect_rebaseline(pt_detector_t *d, uint16_t channel)
{
    uint16_t c;
    for (c = 0; c < d->channels; c++)
        if (channel == PT_NONE || channel == c)
            d->chans[c].flags = (uint8_t)(d->chans[c].flags | F_PENDING);
}

void pt_detect_settings_changed(pt_detector_t *d, uint16_t channel)
{
    pt_chan_t *ch;
    uint8_t pol;
    if (channel >= d->channels)
        return;
    ch = &d->chans[channel];
    pol = polarity_flag(&d->settings[channel]);
    ch->flags = (uint8_t)(ch->flags & ~F_CLEAN);
    if ((ch->flags & F_NEG) != pol)
        ch->flags = (uint8_t)((ch->flags & ~F_NEG) | pol | F_PENDING);
}

uint8_t pt_detect_state(const pt_detector_t *d, uint16_t channel)
{
    return (uint8_t)(d->chans[channel].flags & F_STATE);
}

int pt_detect_touched(const pt_detector_t *d, uint16_t channel)
{
    return (d->chans[channel].flags & F_STATE) >= PT_TOUCHED; /* TOUCHED or RELEASING */
}

int64_t pt_detect_delta(const pt_detector_t *d, uint16_t channel)
{
    return delta_of(&d->chans[channel]);
}

int64_t pt_detect_baseline_fp(const pt_detector_t *d, uint16_t channel)
{
    return get_base_fp(&d->chans[channel]);
}
