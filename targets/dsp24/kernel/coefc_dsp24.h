/*
 * coefc reference kernel for the dsp24 target: 24-bit data and coefficient words
 * held right-justified (sign-extended) in 32-bit containers, a 56-bit accumulator
 * (emulated exactly in uint64_t and sign-extended from bit 55).
 *
 * A header written by `coefc build` describes each channel as a list of
 * operations (second-order sections, FIR, gain, delay) over one coefficient array;
 * this kernel executes that list bit for bit as coefc's simulator does:
 *
 *   acc  = sum of exact products, kept modulo 2^acc_bits (two's complement)
 *   y    = fit_data(round_shift(acc, rshift))
 *
 * with the rounding and overflow modes named in the channel descriptor.  The
 * code is C99 with no undefined behaviour: sums are formed in unsigned
 * arithmetic and floor division by 2^k is written portably.
 *
 * Second-order section layout in memory: b0 b1 b2 -a1 -a2 for the denominator
 * 1 + a1 z^-1 + a2 z^-2: the a terms are stored negated and every product is
 * added, so the inner loop is multiply-accumulate only.
 */
#ifndef COEFC_DSP24_H
#define COEFC_DSP24_H

#include <stddef.h>
#include <stdint.h>

#ifdef __cplusplus
extern "C" {
#endif

/* Kernel interface version: a generated header refuses any other.  Interface 2
   adds COEFC_DSP24_OP_FIR_SYM (symmetric FIR, half the taps stored, folded). */
#define COEFC_DSP24_ABI 2
#define COEFC_DSP24_DATA_CONTAINER_BITS 32
#define COEFC_DSP24_COEF_CONTAINER_BITS 32
#define COEFC_DSP24_MAX_ACC_BITS 56
/* 1 = a coefficients stored negated (-a1, -a2) and added: every product is a
   plain multiply-accumulate, as on a MAC-only core. */
#define COEFC_DSP24_SECTION_A_NEGATED 1

typedef int32_t coefc_dsp24_data_t;
typedef int32_t coefc_dsp24_coef_t;
/* One word of channel state: holds samples, accumulator-precision states and
   circular-buffer positions. */
typedef int64_t coefc_dsp24_state_t;

/* Operation kinds. */
#define COEFC_DSP24_OP_DF1 1   /* section, direct form I; 4 state words */
#define COEFC_DSP24_OP_TDF2 2  /* section, transposed direct form II; 2 state words */
#define COEFC_DSP24_OP_DF1EF 3 /* section, direct form I with error feedback; 5 state words */
#define COEFC_DSP24_OP_FIR 4   /* direct-form FIR of `count` taps; count + 1 state words */
#define COEFC_DSP24_OP_GAIN 5  /* one coefficient; no state */
#define COEFC_DSP24_OP_DELAY 6 /* `count` samples; count + 1 state words */
/* symmetric FIR of `count` taps (h[k] = h[count-1-k]); only the first
   (count + 1) / 2 taps are stored; count + 1 state words, as OP_FIR */
#define COEFC_DSP24_OP_FIR_SYM 7

/* Rounding of acc / 2^rshift. */
#define COEFC_DSP24_ROUND_ADD_HALF 0    /* ties towards +infinity */
#define COEFC_DSP24_ROUND_TRUNCATE 1      /* towards -infinity */
#define COEFC_DSP24_ROUND_HALF_EVEN 2 /* ties to even */
#define COEFC_DSP24_ROUND_TOWARD_ZERO 3       /* towards zero */

/* Bringing a result into the data word. */
#define COEFC_DSP24_OVERFLOW_SATURATE 0
#define COEFC_DSP24_OVERFLOW_WRAP 1

typedef struct {
    uint8_t kind;      /* COEFC_DSP24_OP_* */
    uint8_t rshift;    /* right shift of the accumulator: Fc - coefficient shift */
    uint32_t count;    /* taps (FIR, also the symmetric FIR), samples (delay), 1 otherwise */
    uint32_t coef_at;  /* index of the first coefficient in the channel's array */
    uint32_t state_at; /* index of the first state word */
} coefc_dsp24_op_t;

typedef struct {
    const coefc_dsp24_op_t *ops;
    uint32_t n_ops;
    const coefc_dsp24_coef_t *coefs;
    uint32_t state_words; /* length of the state array the caller provides */
    uint8_t data_bits;    /* width of the data word (<= container) */
    uint8_t acc_bits;     /* accumulator width */
    uint8_t rounding;     /* COEFC_DSP24_ROUND_* */
    uint8_t overflow;     /* COEFC_DSP24_OVERFLOW_* */
} coefc_dsp24_channel_t;

/* Zero the state (call once before the first block). */
void coefc_dsp24_reset(const coefc_dsp24_channel_t *ch, coefc_dsp24_state_t *state);

/* Filter n samples; `in` and `out` may be the same array. */
void coefc_dsp24_process(const coefc_dsp24_channel_t *ch, coefc_dsp24_state_t *state,
                         const coefc_dsp24_data_t *in, coefc_dsp24_data_t *out, size_t n);

/* Reset, run the golden input in blocks of irregular length and compare with
   the expected output.  Returns -1 when every sample matches, otherwise the
   index of the first sample that differs. */
long coefc_dsp24_selftest(const coefc_dsp24_channel_t *ch, coefc_dsp24_state_t *state,
                          const coefc_dsp24_data_t *in, const coefc_dsp24_data_t *expected,
                          size_t n);

#ifdef __cplusplus
}
#endif

#endif /* COEFC_DSP24_H */
