/*
 * coefc reference kernel for the float32 target (see coefc_float32.h).  Every
 * product and sum is stored in a float variable, in the order coefc simulates.
 */
#include "coefc_float32.h"

typedef coefc_float32_state_t state_t;

static float step(const coefc_float32_channel_t *ch, const coefc_float32_op_t *op,
                  state_t *s, float x)
{
    /* a channel of delays only has no coefficient array: no arithmetic on a null pointer */
    const float *c = ch->coefs != 0 ? ch->coefs + op->coef_at : 0;
    float acc, p, y;
    uint32_t i, j, n;

    switch (op->kind) {
    case COEFC_FLOAT32_OP_DF1:
        /* s: x[n-1], x[n-2], y[n-1], y[n-2] */
        acc = c[0] * x;
        p = c[1] * s[0].f;
        acc = acc + p;
        p = c[2] * s[1].f;
        acc = acc + p;
        p = c[3] * s[2].f;
        acc = acc - p;
        p = c[4] * s[3].f;
        acc = acc - p;
        s[1].f = s[0].f;
        s[0].f = x;
        s[3].f = s[2].f;
        s[2].f = acc;
        return acc;
    case COEFC_FLOAT32_OP_TDF2:
        /* s: s1, s2 */
        p = c[0] * x;
        y = p + s[0].f;
        p = c[1] * x;
        acc = c[3] * y;
        acc = p - acc;
        s[0].f = acc + s[1].f;
        p = c[2] * x;
        acc = c[4] * y;
        s[1].f = p - acc;
        return y;
    case COEFC_FLOAT32_OP_FIR:
        /* s[0].i: position of the newest sample; s[1..count]: circular history */
        n = op->count;
        j = s[0].i;
        j = (j + 1u == n) ? 0u : j + 1u;
        s[0].i = j;
        s[1 + j].f = x;
        acc = c[0] * x;
        for (i = 1u; i < n; i++) {
            j = (j == 0u) ? n - 1u : j - 1u;
            p = c[i] * s[1 + j].f;
            acc = acc + p;
        }
        return acc;
    case COEFC_FLOAT32_OP_GAIN:
        y = c[0] * x;
        return y;
    case COEFC_FLOAT32_OP_DELAY:
        /* s[0].i: position; s[1..count]: the last `count` inputs */
        n = op->count;
        if (n == 0u) {
            return x;
        }
        j = s[0].i;
        y = s[1 + j].f;
        s[1 + j].f = x;
        s[0].i = (j + 1u == n) ? 0u : j + 1u;
        return y;
    default:
        return x;
    }
}

void coefc_float32_reset(const coefc_float32_channel_t *ch, coefc_float32_state_t *state)
{
    uint32_t i;
    for (i = 0u; i < ch->state_words; i++) {
        state[i].i = 0u; /* all-zero bits: position 0 and +0.0f */
    }
}

void coefc_float32_process(const coefc_float32_channel_t *ch, coefc_float32_state_t *state,
                           const float *in, float *out, size_t n)
{
    size_t t;
    uint32_t o;
    for (t = 0u; t < n; t++) {
        float v = in[t];
        for (o = 0u; o < ch->n_ops; o++) {
            v = step(ch, &ch->ops[o], state + ch->ops[o].state_at, v);
        }
        out[t] = v;
    }
}

long coefc_float32_selftest(const coefc_float32_channel_t *ch, coefc_float32_state_t *state,
                            const float *in, const float *expected, size_t n)
{
    float buf[8];
    size_t t = 0u, len = 1u, i;
    coefc_float32_reset(ch, state);
    while (t < n) {
        size_t m = (n - t < len) ? n - t : len;
        coefc_float32_process(ch, state, in + t, buf, m);
        for (i = 0u; i < m; i++) {
            state_t got, want;
            got.f = buf[i];
            want.f = expected[t + i];
            if (got.i != want.i) { /* bit patterns: -0.0f differs from +0.0f */
                return (long)(t + i);
            }
        }
        t += m;
        len = (len == 8u) ? 1u : len + 1u; /* blocks of 1..8: state must carry over */
    }
    return -1;
}
