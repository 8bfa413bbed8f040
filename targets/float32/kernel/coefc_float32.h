/*
 * coefc reference kernel for the float32 target: IEEE 754 single precision
 * data, coefficients and states.
 *
 * A header written by `coefc build` describes each channel as a list of
 * operations (second-order sections, FIR, gain, delay) over one coefficient
 * array; this kernel executes that list in exactly the operation order coefc
 * simulates, every step rounded to float:
 *
 *   df1    acc = b0*x0; acc += b1*x1; acc += b2*x2; acc -= a1*y1; acc -= a2*y2
 *   tdf2   y = b0*x + s1; s1 = (b1*x - a1*y) + s2; s2 = b2*x - a2*y
 *   fir    acc = t0*x[n]; acc += t_k*x[n-k] for k = 1, 2, ...
 *   gain   y = g*x
 *
 * Compile it without fused multiply-add contraction (gcc/clang:
 * -ffp-contract=off) and with float evaluated in float (FLT_EVAL_METHOD 0, as
 * on SSE or any single-precision FPU), or the results differ in the last bits.
 *
 * Second-order section layout in memory: b0 b1 b2 a1 a2, denominator
 * 1 + a1 z^-1 + a2 z^-2, the a terms subtracted.
 */
#ifndef COEFC_FLOAT32_H
#define COEFC_FLOAT32_H

#include <stddef.h>
#include <stdint.h>

#ifdef __cplusplus
extern "C" {
#endif

/* Kernel interface version: a generated header refuses any other.  float32
   stays at interface 1: it never folds symmetric FIRs (the fixed-point kernels'
   OP_FIR_SYM of interface 2), because x[n-k] + x[n-N+1-k] would be rounded to
   float before the multiply, which coefc's float32 engine does not do, so the
   results would differ.  A float32 header stores every tap. */
#define COEFC_FLOAT32_ABI 1
/* 0 = a coefficients stored as in 1 + a1 z^-1 + a2 z^-2 and subtracted. */
#define COEFC_FLOAT32_SECTION_A_NEGATED 0

typedef float coefc_float32_data_t;
typedef float coefc_float32_coef_t;
/* One word of channel state: a sample (f) or a circular-buffer position (i). */
typedef union {
    float f;
    uint32_t i;
} coefc_float32_state_t;

/* Operation kinds. */
#define COEFC_FLOAT32_OP_DF1 1   /* section, direct form I; 4 state words */
#define COEFC_FLOAT32_OP_TDF2 2  /* section, transposed direct form II; 2 state words */
#define COEFC_FLOAT32_OP_FIR 4   /* direct-form FIR of `count` taps, all stored, symmetric
                                    or not; count + 1 state words */
#define COEFC_FLOAT32_OP_GAIN 5  /* one coefficient; no state */
#define COEFC_FLOAT32_OP_DELAY 6 /* `count` samples; count + 1 state words */

typedef struct {
    uint8_t kind;      /* COEFC_FLOAT32_OP_* */
    uint8_t rshift;    /* always 0: float32 has no coefficient shift */
    uint32_t count;    /* taps (FIR), samples (delay), 1 otherwise */
    uint32_t coef_at;  /* index of the first coefficient in the channel's array */
    uint32_t state_at; /* index of the first state word */
} coefc_float32_op_t;

typedef struct {
    const coefc_float32_op_t *ops;
    uint32_t n_ops;
    const coefc_float32_coef_t *coefs;
    uint32_t state_words; /* length of the state array the caller provides */
} coefc_float32_channel_t;

/* Zero the state (call once before the first block). */
void coefc_float32_reset(const coefc_float32_channel_t *ch, coefc_float32_state_t *state);

/* Filter n samples; `in` and `out` may be the same array. */
void coefc_float32_process(const coefc_float32_channel_t *ch, coefc_float32_state_t *state,
                           const float *in, float *out, size_t n);

/* Reset, run the golden input in blocks of irregular length and compare the
   bit patterns with the expected output.  Returns -1 when every sample
   matches, otherwise the index of the first sample that differs. */
long coefc_float32_selftest(const coefc_float32_channel_t *ch, coefc_float32_state_t *state,
                            const float *in, const float *expected, size_t n);

#ifdef __cplusplus
}
#endif

#endif /* COEFC_FLOAT32_H */
