/*
 * The out-of-line 64-bit fixed-point helpers of a build for size (fixed.h, LD_FIXED_OUT_OF_LINE),
 * defined once for step.c and estimator.c; mirrored by algo/fixed.py. In a build for speed the
 * helpers are inline in fixed.h and this file compiles to nothing.
 */
#define LD_FIXED_DEFINE 1
#include "fixed.h"
