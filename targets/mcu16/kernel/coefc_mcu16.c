/*
 * coefc reference kernel for the mcu16 target (see coefc_mcu16.h).
 *
 * Arithmetic, exactly as coefc simulates it:
 *   products      exact (a 16 x 16-bit product fits in int32_t)
 *   accumulator   sum modulo 2^acc_bits, two's complement (formed in uint32_t,
 *                 then sign-extended from bit acc_bits - 1)
 *   round_shift   acc / 2^k rounded by the channel's mode, computed as
 *                 floor(acc / 2^k) plus a correction from the k low bits, so
 *                 no intermediate can overflow
 *   fit_data      saturate to the data word, or wrap (keep the low bits)
 *   folded FIR    symmetric taps: pre-add and product formed in the unsigned
 *                 container (wrapping), which equals the unfolded sum there
 */
#include "coefc_mcu16.h"

typedef uint32_t uacc_t; /* accumulator container, unsigned (wraps) */
typedef int32_t sacc_t;  /* accumulator value, signed */
typedef int32_t prod_t;  /* a product of a data word and a coefficient */
#define ACC_CONTAINER_BITS 32u

typedef coefc_mcu16_data_t data_t;
typedef coefc_mcu16_coef_t coef_t;
typedef coefc_mcu16_state_t state_t;

/* The signed value of the low `bits` bits of u (two's complement). */
static sacc_t sign_extend(uacc_t u, unsigned bits)
{
    if (bits < ACC_CONTAINER_BITS) {
        uacc_t m = (uacc_t)1 << (bits - 1u);
        u &= ((uacc_t)1 << bits) - 1u;
        return (sacc_t)(u ^ m) - (sacc_t)m;
    }
    if (u >> (ACC_CONTAINER_BITS - 1u)) {
        return -(sacc_t)(~u) - 1; /* negative: no implementation-defined conversion */
    }
    return (sacc_t)u;
}

/* floor(v / 2^k) for 0 < k < container bits, without shifting a negative value. */
static sacc_t floor_shift(sacc_t v, unsigned k)
{
    return v >= 0 ? v >> k : ~(~v >> k);
}

static sacc_t round_shift(sacc_t v, unsigned k, unsigned mode)
{
    sacc_t q;
    uacc_t r, half;
    if (k == 0u) {
        return v;
    }
    if (k >= ACC_CONTAINER_BITS) {
        /* |v| <= 2^(k-1): every mode gives 0, except floor of a negative value */
        return (mode == COEFC_MCU16_ROUND_TRUNCATE && v < 0) ? -1 : 0;
    }
    q = floor_shift(v, k);
    r = (uacc_t)v & (((uacc_t)1 << k) - 1u); /* v - q * 2^k */
    half = (uacc_t)1 << (k - 1u);
    switch (mode) {
    case COEFC_MCU16_ROUND_TRUNCATE:
        return q;
    case COEFC_MCU16_ROUND_HALF_EVEN:
        return q + ((r > half || (r == half && ((uacc_t)q & 1u))) ? 1 : 0);
    case COEFC_MCU16_ROUND_TOWARD_ZERO:
        return q + ((v < 0 && r != 0u) ? 1 : 0);
    default: /* COEFC_MCU16_ROUND_ADD_HALF */
        return q + (r >= half ? 1 : 0);
    }
}

static data_t fit_data(sacc_t v, unsigned bits, unsigned mode)
{
    sacc_t hi = ((sacc_t)1 << (bits - 1u)) - 1;
    sacc_t lo = -hi - 1;
    if (mode == COEFC_MCU16_OVERFLOW_WRAP) {
        return (data_t)sign_extend((uacc_t)v, bits);
    }
    return (data_t)(v > hi ? hi : v < lo ? lo : v);
}

/* acc + c * x, modulo the container. */
static uacc_t mac(uacc_t acc, coef_t c, sacc_t x)
{
    return acc + (uacc_t)((prod_t)c * (prod_t)x);
}

static uacc_t msub(uacc_t acc, coef_t c, sacc_t x)
{
    return acc - (uacc_t)((prod_t)c * (prod_t)x);
}

static data_t finish(const coefc_mcu16_channel_t *ch, unsigned k, uacc_t acc)
{
    sacc_t v = sign_extend(acc, ch->acc_bits);
    return fit_data(round_shift(v, k, ch->rounding), ch->data_bits, ch->overflow);
}

static data_t step(const coefc_mcu16_channel_t *ch, const coefc_mcu16_op_t *op,
                   state_t *s, data_t x)
{
    /* a channel of delays only has no coefficient array: no arithmetic on a null pointer */
    const coef_t *c = ch->coefs != 0 ? ch->coefs + op->coef_at : 0;
    unsigned k = op->rshift;
    uacc_t acc;
    data_t y;
    uint32_t i, j, m, n;

    switch (op->kind) {
    case COEFC_MCU16_OP_DF1:
        /* s: x[n-1], x[n-2], y[n-1], y[n-2] */
        acc = (uacc_t)((prod_t)c[0] * (prod_t)x);
        acc = mac(acc, c[1], s[0]);
        acc = mac(acc, c[2], s[1]);
        acc = msub(acc, c[3], s[2]);
        acc = msub(acc, c[4], s[3]);
        y = finish(ch, k, acc);
        s[1] = s[0];
        s[0] = x;
        s[3] = s[2];
        s[2] = y;
        return y;
    case COEFC_MCU16_OP_TDF2:
        /* s: S1, S2 at accumulator precision (unrounded) */
        y = finish(ch, k, mac((uacc_t)s[0], c[0], x));
        acc = msub(mac((uacc_t)s[1], c[1], x), c[3], y);
        s[0] = sign_extend(acc, ch->acc_bits);
        s[1] = sign_extend(msub((uacc_t)((prod_t)c[2] * (prod_t)x), c[4], y), ch->acc_bits);
        return y;
    case COEFC_MCU16_OP_DF1EF:
        /* s: x[n-1], x[n-2], y[n-1], y[n-2], E (the previous rounding residual) */
        acc = (uacc_t)((prod_t)c[0] * (prod_t)x);
        acc = mac(acc, c[1], s[0]);
        acc = mac(acc, c[2], s[1]);
        acc = msub(acc, c[3], s[2]);
        acc = msub(acc, c[4], s[3]);
        acc += (uacc_t)s[4];
        {
            sacc_t a = sign_extend(acc, ch->acc_bits);
            sacc_t v = round_shift(a, k, ch->rounding);
            /* E = acc - v * 2^k, |E| < 2^k: exact when formed modulo the container */
            s[4] = sign_extend((uacc_t)a - ((uacc_t)v << k), ACC_CONTAINER_BITS);
            y = fit_data(v, ch->data_bits, ch->overflow);
        }
        s[1] = s[0];
        s[0] = x;
        s[3] = s[2];
        s[2] = y;
        return y;
    case COEFC_MCU16_OP_FIR:
        /* s[0]: position of the newest sample; s[1..count]: circular history */
        n = op->count;
        j = (uint32_t)s[0];
        j = (j + 1u == n) ? 0u : j + 1u;
        s[0] = (state_t)j;
        s[1 + j] = x;
        acc = 0u;
        for (i = 0u; i < n; i++) {
            acc = mac(acc, c[i], s[1 + j]);
            j = (j == 0u) ? n - 1u : j - 1u;
        }
        return finish(ch, k, acc);
    case COEFC_MCU16_OP_FIR_SYM:
        /* As OP_FIR, with c[0 .. (count+1)/2 - 1] stored and c[i] = c[count-1-i]:
           acc = sum c[i] * (x[n-i] + x[n-count+1+i]) for i < count/2, plus the
           middle tap for odd count.  The pre-add needs one bit more than a data
           word and the product may exceed the signed container, so both are
           formed in uacc_t, modulo 2^32; the unfolded sum is the same modulo
           2^32, hence after the reduction to acc_bits in finish() too. */
        n = op->count;
        j = (uint32_t)s[0];
        j = (j + 1u == n) ? 0u : j + 1u;
        s[0] = (state_t)j;
        s[1 + j] = x;
        m = (j + 1u == n) ? 0u : j + 1u; /* the oldest sample, x[n-count+1] */
        acc = 0u;
        for (i = 0u; i < n / 2u; i++) {
            acc += (uacc_t)c[i] * ((uacc_t)s[1 + j] + (uacc_t)s[1 + m]);
            j = (j == 0u) ? n - 1u : j - 1u;
            m = (m + 1u == n) ? 0u : m + 1u;
        }
        if (n & 1u) {
            acc = mac(acc, c[i], s[1 + j]); /* the middle tap; here j == m */
        }
        return finish(ch, k, acc);
    case COEFC_MCU16_OP_GAIN:
        return finish(ch, k, (uacc_t)((prod_t)c[0] * (prod_t)x));
    case COEFC_MCU16_OP_DELAY:
        /* s[0]: position; s[1..count]: the last `count` inputs */
        n = op->count;
        if (n == 0u) {
            return x;
        }
        j = (uint32_t)s[0];
        y = (data_t)s[1 + j];
        s[1 + j] = x;
        s[0] = (state_t)((j + 1u == n) ? 0u : j + 1u);
        return y;
    default:
        return x;
    }
}

void coefc_mcu16_reset(const coefc_mcu16_channel_t *ch, coefc_mcu16_state_t *state)
{
    uint32_t i;
    for (i = 0u; i < ch->state_words; i++) {
        state[i] = 0;
    }
}

void coefc_mcu16_process(const coefc_mcu16_channel_t *ch, coefc_mcu16_state_t *state,
                         const coefc_mcu16_data_t *in, coefc_mcu16_data_t *out, size_t n)
{
    size_t t;
    uint32_t o;
    for (t = 0u; t < n; t++) {
        data_t v = in[t];
        for (o = 0u; o < ch->n_ops; o++) {
            v = step(ch, &ch->ops[o], state + ch->ops[o].state_at, v);
        }
        out[t] = v;
    }
}

long coefc_mcu16_selftest(const coefc_mcu16_channel_t *ch, coefc_mcu16_state_t *state,
                          const coefc_mcu16_data_t *in, const coefc_mcu16_data_t *expected,
                          size_t n)
{
    data_t buf[8];
    size_t t = 0u, len = 1u, i;
    coefc_mcu16_reset(ch, state);
    while (t < n) {
        size_t m = (n - t < len) ? n - t : len;
        coefc_mcu16_process(ch, state, in + t, buf, m);
        for (i = 0u; i < m; i++) {
            if (buf[i] != expected[t + i]) {
                return (long)(t + i);
            }
        }
        t += m;
        len = (len == 8u) ? 1u : len + 1u; /* blocks of 1..8: state must carry over */
    }
    return -1;
}
