/*
 * Fixed-point primitives, mirrored one for one by algo/fixed.py.
 *
 * Right shifts of negative values are arithmetic (floor) on every target
 * linedrop supports (two's complement; gcc and clang document it).
 */
#ifndef LINEDROP_FIXED_H
#define LINEDROP_FIXED_H

#include <stdint.h>

/* In a build for size (gcc/clang -Os) the 64-bit helpers below stay out of line and are defined
 * once, in fixed.c: they serve the once-per-period and once-per-window code, and inlined at each
 * of their dozen call sites they cost about 570 bytes of flash on Cortex-M (a static copy in each
 * of step.c and estimator.c another 140). A build for speed (-O2) inlines them: out of line they
 * add about 45 % to the window-end sample's instructions. Same results either way. */
#if defined(__GNUC__) && defined(__OPTIMIZE_SIZE__)
#define LD_FIXED_OUT_OF_LINE 1
int64_t ld_sat64(int64_t x, int64_t lo, int64_t hi);
int32_t ld_sat_s32(int64_t x);
int64_t ld_rshift_round64(int64_t x, unsigned s);
#define LD_COLD __attribute__((noinline))
#else
#define LD_COLD static inline
#endif

static inline int32_t ld_sat(int32_t x, int32_t lo, int32_t hi)
{
    return (x < lo) ? lo : ((x > hi) ? hi : x);
}

/* Scaling and overflow: x + 2**(s-1) must fit int32; callers keep
 * |x| < 2**31 - 2**(s-1) by range analysis. */
static inline int32_t ld_rshift_round(int32_t x, unsigned s)
{
    int32_t r = x;
    if (s != 0u) {
        uint32_t half = (uint32_t)1u << (s - 1u);  /* 2**(s-1), formed without a signed shift */
        r = (x + (int32_t)half) >> s;
    }
    return r;
}

/* fixed.c defines LD_FIXED_DEFINE: there, and in a build for speed everywhere, the bodies. */
#if !defined(LD_FIXED_OUT_OF_LINE) || defined(LD_FIXED_DEFINE)
LD_COLD int64_t ld_sat64(int64_t x, int64_t lo, int64_t hi)
{
    return (x < lo) ? lo : ((x > hi) ? hi : x);
}

LD_COLD int32_t ld_sat_s32(int64_t x)
{
    return (int32_t)ld_sat64(x, INT32_MIN, INT32_MAX);
}

/* As ld_rshift_round, in int64, written ((x >> (s-1)) + 1) >> 1: the same integer as
 * (x + 2**(s-1)) >> s (with x = q 2**(s-1) + r, 0 <= r < 2**(s-1), both are floor((q+1)/2)), in two
 * shifts and an increment instead of forming 2**(s-1) in 64 bits (about 40 % fewer instructions
 * on a 32-bit core). Scaling and overflow: none for any int64 x (x >> (s-1) <= 2**62 for s >= 2;
 * s = 1 needs x < 2**63 - 1, which every caller's range analysis leaves by far). */
LD_COLD int64_t ld_rshift_round64(int64_t x, unsigned s)
{
    return (s == 0u) ? x : (((x >> (s - 1u)) + 1) >> 1);
}
#endif

/* C99 '/' truncates toward zero; algo/fixed.py div_trunc mirrors it. */
static inline int64_t ld_div_trunc(int64_t a, int64_t b)
{
    return a / b;
}

/* Number of significant bits of u (0 for 0), by binary search: at most
 * five compare-and-shift steps instead of a loop over every bit. */
static inline unsigned ld_bit_length(uint32_t u)
{
    uint32_t r = u;
    unsigned n = 0u;
    if (r >= 0x10000u) { r >>= 16; n += 16u; }
    if (r >= 0x100u) { r >>= 8; n += 8u; }
    if (r >= 0x10u) { r >>= 4; n += 4u; }
    if (r >= 0x4u) { r >>= 2; n += 2u; }
    if (r >= 0x2u) { r >>= 1; n += 1u; }
    return n + r;
}

/* Same value as ld_rshift_round(x, s) but without forming x + 2**(s-1), so it
 * cannot overflow for any int32 x: the rounding bit is bit s-1 of x. */
static inline int32_t ld_rshift_round_safe(int32_t x, unsigned s)
{
    return (s == 0u) ? x : ((x >> s) + ((x >> (s - 1u)) & 1));
}

static inline int32_t ld_abs32(int32_t x)
{
    /* Callers never pass INT32_MIN (accumulators are bounded below 2**31 - 1). */
    return (x < 0) ? -x : x;
}

/* Move x a fraction 2**-s of the way to target, at least 1 LSB; no dead band.
 * Scaling and overflow: callers keep x and target in [0, 2**31), so their
 * difference fits int32 and is rounded without forming difference + half. */
static inline int32_t ld_step_toward(int32_t x, int32_t target, unsigned s)
{
    int32_t d = ld_rshift_round_safe(target - x, s);
    if ((d == 0) && (target != x)) {
        if (target > x) {
            d = 1;
        } else {
            d = -1;
        }
    }
    return x + d;
}

#endif /* LINEDROP_FIXED_H */
