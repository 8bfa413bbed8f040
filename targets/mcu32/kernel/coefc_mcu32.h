/*
 * coefc reference kernel for the mcu32 target: 32-bit data words, 32-bit
 * coefficient words, accumulator of up to 64 bits (emulated exactly in uint64_t).
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
 * Second-order section layout in memory: b0 b1 b2 a1 a2, denominator
 * 1 + a1 z^-1 + a2 z^-2, the a terms subtracted from the accumulator.
 */
#ifndef COEFC_MCU32_H
#define COEFC_MCU32_H

#include <stddef.h>
#include <stdint.h>

#ifdef __cplusplus
extern "C" {
#endif

/* Kernel interface version: a generated header refuses any other.  Interface 2
   adds COEFC_MCU32_OP_FIR_SYM (symmetric FIR, half the taps stored, folded). */
#define COEFC_MCU32_ABI 2
#define COEFC_MCU32_DATA_CONTAINER_BITS 32
#define COEFC_MCU32_COEF_CONTAINER_BITS 32
#define COEFC_MCU32_MAX_ACC_BITS 64
/* 0 = a coefficients stored as in 1 + a1 z^-1 + a2 z^-2 and subtracted. */
#define COEFC_MCU32_SECTION_A_NEGATED 0

typedef int32_t coefc_mcu32_data_t;
typedef int32_t coefc_mcu32_coef_t;
/* One word of channel state: holds samples, accumulator-precision states and
   circular-buffer positions. */
typedef int64_t coefc_mcu32_state_t;

/* Operation kinds. */
#define COEFC_MCU32_OP_DF1 1   /* section, direct form I; 4 state words */
#define COEFC_MCU32_OP_TDF2 2  /* section, transposed direct form II; 2 state words */
#define COEFC_MCU32_OP_DF1EF 3 /* section, direct form I with error feedback; 5 state words */
#define COEFC_MCU32_OP_FIR 4   /* direct-form FIR of `count` taps; count + 1 state words */
#define COEFC_MCU32_OP_GAIN 5  /* one coefficient; no state */
#define COEFC_MCU32_OP_DELAY 6 /* `count` samples; count + 1 state words */
/* symmetric FIR of `count` taps (h[k] = h[count-1-k]); only the first
   (count + 1) / 2 taps are stored; count + 1 state words, as OP_FIR */
#define COEFC_MCU32_OP_FIR_SYM 7

/* Rounding of acc / 2^rshift. */
#define COEFC_MCU32_ROUND_ADD_HALF 0    /* ties towards +infinity */
#define COEFC_MCU32_ROUND_TRUNCATE 1      /* towards -infinity */
#define COEFC_MCU32_ROUND_HALF_EVEN 2 /* ties to even */
#define COEFC_MCU32_ROUND_TOWARD_ZERO 3       /* towards zero */

/* Bringing a result into the data word. */
#define COEFC_MCU32_OVERFLOW_SATURATE 0
#define COEFC_MCU32_OVERFLOW_WRAP 1

typedef struct {
    uint8_t kind;      /* COEFC_MCU32_OP_* */
    uint8_t rshift;    /* right shift of the accumulator: Fc - coefficient shift */
    uint32_t count;    /* taps (FIR, also the symmetric FIR), samples (delay), 1 otherwise */
    uint32_t coef_at;  /* index of the first coefficient in the channel's array */
    uint32_t state_at; /* index of the first state word */
} coefc_mcu32_op_t;

typedef struct {
    const coefc_mcu32_op_t *ops;
    uint32_t n_ops;
    const coefc_mcu32_coef_t *coefs;
    uint32_t state_words; /* length of the state array the caller provides */
    uint8_t data_bits;    /* width of the data word (<= container) */
    uint8_t acc_bits;     /* accumulator width */
    uint8_t rounding;     /* COEFC_MCU32_ROUND_* */
    uint8_t overflow;     /* COEFC_MCU32_OVERFLOW_* */
} coefc_mcu32_channel_t;

/* Zero the state (call once before the first block). */
void coefc_mcu32_reset(const coefc_mcu32_channel_t *ch, coefc_mcu32_state_t *state);

/* Filter n samples; `in` and `out` may be the same array. */
void coefc_mcu32_process(const coefc_mcu32_channel_t *ch, coefc_mcu32_state_t *state,
                         const coefc_mcu32_data_t *in, coefc_mcu32_data_t *out, size_t n);

/* Reset, run the golden input in blocks of irregular length and compare with
   the expected output.  Returns -1 when every sample matches, otherwise the
   index of the first sample that differs. */
long coefc_mcu32_selftest(const coefc_mcu32_channel_t *ch, coefc_mcu32_state_t *state,
                          const coefc_mcu32_data_t *in, const coefc_mcu32_data_t *expected,
                          size_t n);

#ifdef __cplusplus
}
#endif

#endif /* COEFC_MCU32_H */
