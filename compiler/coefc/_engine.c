/*
 * coefc._engine: compiled core of the bit-true engine (coefc.simulate).
 *
 * In:  a contiguous int64 (or float32) input buffer, writable output buffer(s) of
 *      the same length and type, the ops' integer coefficients and arithmetic.
 * Out: the output buffers filled; for fixed point the (data overflow count,
 *      accumulator overflow count) of each op.
 *
 *   cascade(x, ys, coefs, structure, acc_bits, rounding, overflow, data_width)
 *       consecutive second-order sections, fused sample by sample
 *   coupled(x, y, coefs, acc_bits, rounding, overflow, data_width)
 *       one coupled-form section (engine code 3; exact wide sums)
 *   fir(x, y, taps, k, acc_bits, rounding, overflow, data_width)
 *   fir_rate(x, y, taps, down, up, k, ...): polyphase decimating / interpolating FIR
 *   gain(x, y, C, k, acc_bits, rounding, overflow, data_width)
 *   cic(x, y, R, N, D, register_bits, C, k, ...): CIC decimator (integrators, keep every R-th, combs)
 *   sos_wide(x, y, B0..A2H, A1L, A2L, L, k, ..., ef): one df1-wide-fb section
 *       (ef = 1: df1ef-wide-fb, the same with first-order error feedback)
 *   sos_f32 / fir_f32 / gain_f32: float32 in the stated operation order
 *   zero_input(y1, y2, e, big, A1, A2, k, ...): the zero-input recursion of one
 *       section on many states at once (the overflow-oscillation and sampled
 *       limit-cycle searches of coefc.analyse.limitcycles)
 *   cycle_region / whole_cycles: exhaustive zero-input cycle searches (every state
 *       of a candidate region, or of the whole state space, visited once)
 *   coupled_cycles: the exhaustive zero-input cycle search of a coupled-form section
 *   walk: the cycle one zero-input state runs into (Brent's cycle detection)
 *
 * The arithmetic is the one stated in the docstring of coefc/program.py.
 * Accumulators: products of two words (together at most 64 bits wide, so every
 * product fits in int64) are summed exactly -- in int64 where bounds on the
 * coefficients prove it exact, else in __int128 (or, without it, in a 64-bit word
 * plus a count of carries out of it) -- so the exact sum is known to lie inside or
 * outside the acc_bits range.  The wrapped accumulator is the low acc_bits of the
 * exact sum, sign-extended.  Signed overflow is never relied upon: additions that
 * may wrap are done in uint64_t.  Right shifts of negative values and uint64 ->
 * int64 conversions assume two's complement with arithmetic shift (gcc, clang,
 * MSVC).  Define COEFC_NO_INT128 to build the portable carry-counting sums.
 *
 * float32 ops use float arithmetic in the stated order; build with
 * -ffp-contract=off so no multiply-add is fused.
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <stdint.h>
#include <string.h>
#include <math.h>

/* ------------------------------------------------------------ integer arithmetic */

typedef struct {
    int acc_bits, rounding, overflow, width, k;
    int64_t acc_lo, acc_hi, lo, hi;
    uint64_t kmask, khalf;
} arith_t;

static int arith_init(arith_t *ar, int k, int acc_bits, int rounding, int overflow, int width)
{
    if (acc_bits < 2 || acc_bits > 64 || width < 2 || width > 64 || k < 1 || k > 62 ||
        rounding < 0 || rounding > 3 || overflow < 0 || overflow > 1) {
        PyErr_SetString(PyExc_ValueError, "engine: arithmetic out of range (acc_bits 2..64, width 2..64, k 1..62)");
        return -1;
    }
    ar->acc_bits = acc_bits; ar->rounding = rounding; ar->overflow = overflow; ar->width = width; ar->k = k;
    ar->acc_hi = acc_bits == 64 ? INT64_MAX : (int64_t)((UINT64_C(1) << (acc_bits - 1)) - 1);
    ar->acc_lo = -ar->acc_hi - 1;
    ar->hi = width == 64 ? INT64_MAX : (int64_t)((UINT64_C(1) << (width - 1)) - 1);
    ar->lo = -ar->hi - 1;
    ar->kmask = (UINT64_C(1) << k) - 1;
    ar->khalf = UINT64_C(1) << (k - 1);
    return 0;
}

/* sign-extend the low `bits` bits of v */
static inline int64_t sext(uint64_t v, int bits)
{
    if (bits >= 64) return (int64_t)v;
    return (int64_t)(v << (64 - bits)) >> (64 - bits);
}

/* exact sum: value = (int64)s + c * 2^64 */
typedef struct { uint64_t s; int64_t c; } wide_t;

static inline void wadd(wide_t *w, int64_t p)
{
    uint64_t r = w->s + (uint64_t)p;
    int64_t sr = (int64_t)r, ss = (int64_t)w->s;
    if (((ss ^ sr) & (p ^ sr)) < 0) w->c += p < 0 ? -1 : 1;
    w->s = r;
}

/* wrap an exact sum into the accumulator; count it when it did not fit */
static inline int64_t wfinish(const wide_t *w, const arith_t *ar, long long *acc_ovf)
{
    int64_t v = (int64_t)w->s;
    if (w->c != 0 || v < ar->acc_lo || v > ar->acc_hi) {
        (*acc_ovf)++;
        return sext(w->s, ar->acc_bits);
    }
    return v;
}

/* an int64 sum known exact: wrap into the accumulator */
static inline int64_t afinish(int64_t v, const arith_t *ar, long long *acc_ovf)
{
    if (v < ar->acc_lo || v > ar->acc_hi) {
        (*acc_ovf)++;
        return sext((uint64_t)v, ar->acc_bits);
    }
    return v;
}

static inline int64_t rshift(int64_t v, const arith_t *ar)
{
    int64_t q = v >> ar->k;
    uint64_t rem = (uint64_t)v & ar->kmask;
    switch (ar->rounding) {
    case 0: return q + (rem >= ar->khalf);                                    /* add-half */
    case 1: return q;                                                         /* truncate */
    case 2: return q + (rem > ar->khalf || (rem == ar->khalf && (q & 1)));    /* half-even */
    default: return q + (v < 0 && rem != 0);                                  /* toward-zero */
    }
}

static inline int64_t fit(int64_t v, const arith_t *ar, long long *ovf)
{
    if (v > ar->hi || v < ar->lo) {
        (*ovf)++;
        if (ar->overflow == 0) return v > ar->hi ? ar->hi : ar->lo;
        return sext((uint64_t)v, ar->width);
    }
    return v;
}

static inline uint64_t uabs64(int64_t v) { return v < 0 ? (uint64_t)0 - (uint64_t)v : (uint64_t)v; }

/* is sum(|c_i|) * 2^(width-1) + extra below 2^63?  Then every partial sum of the
   terms (each |c_i * word| <= |c_i| 2^(width-1)) is exact in int64. */
static int sum_bound_ok(const int64_t *c, Py_ssize_t n, int width, uint64_t extra)
{
    uint64_t s = 0;
    if (width > 62 || extra >= (UINT64_C(1) << 62)) return 0;
    for (Py_ssize_t i = 0; i < n; i++) {
        s += uabs64(c[i]);
        if (s >= (UINT64_C(1) << (64 - width))) return 0;
    }
    /* s < 2^(64-width) so s * 2^(width-1) < 2^63 and the sum below cannot wrap */
    return (s << (width - 1)) + extra < (UINT64_C(1) << 63);
}

/* ------------------------------------------------------------ buffers */

static int get_buf(PyObject *o, Py_buffer *v, int writable, char kind, const char *name)
{
    int flags = PyBUF_C_CONTIGUOUS | PyBUF_FORMAT | (writable ? PyBUF_WRITABLE : 0);
    if (PyObject_GetBuffer(o, v, flags) < 0) return -1;
    const char *f = v->format ? v->format : "B";
    if (*f == '@' || *f == '=' || *f == '<') f++;
    int ok = kind == 'i' ? (v->itemsize == 8 && (*f == 'q' || *f == 'l') && f[1] == 0)
           : kind == 'd' ? (v->itemsize == 8 && *f == 'd' && f[1] == 0)
                         : (v->itemsize == 4 && *f == 'f' && f[1] == 0);
    if (!ok || v->ndim > 1) {
        PyErr_Format(PyExc_TypeError, "engine: %s must be a contiguous 1-D %s buffer", name,
                     kind == 'i' ? "int64" : kind == 'd' ? "float64" : "float32");
        PyBuffer_Release(v);
        return -1;
    }
    return 0;
}

static int get_xy(PyObject *xo, PyObject *yo, Py_buffer *xb, Py_buffer *yb, char kind)
{
    if (get_buf(xo, xb, 0, kind, "x") < 0) return -1;
    if (get_buf(yo, yb, 1, kind, "y") < 0) { PyBuffer_Release(xb); return -1; }
    if (xb->len != yb->len) {
        PyErr_SetString(PyExc_ValueError, "engine: x and y differ in length");
        PyBuffer_Release(xb); PyBuffer_Release(yb);
        return -1;
    }
    return 0;
}

/* ------------------------------------------------------------ fixed-point ops */

/* The indices of the non-zero taps, grouped by phase (index modulo up) and ascending within a
   phase: phase p's are idx[start[p] .. start[p+1]-1].  Zero taps (every other tap of a half-band
   filter, taps quantised to zero) are skipped: a zero product adds exactly zero to the sum.
   Returns NULL (with a Python error set) when memory runs out; free both with PyMem_Free. */
static Py_ssize_t *nonzero_taps(const int64_t *t, Py_ssize_t nt, Py_ssize_t up, Py_ssize_t **start)
{
    Py_ssize_t *idx = PyMem_Malloc(sizeof(Py_ssize_t) * (nt ? nt : 1));
    Py_ssize_t *st = PyMem_Malloc(sizeof(Py_ssize_t) * (up + 1));
    if (!idx || !st) {
        PyMem_Free(idx); PyMem_Free(st);
        PyErr_NoMemory();
        return NULL;
    }
    Py_ssize_t q = 0;
    for (Py_ssize_t p = 0; p < up; p++) {
        st[p] = q;
        for (Py_ssize_t kk = p; kk < nt; kk += up)
            if (t[kk] != 0) idx[q++] = kk;
    }
    st[up] = q;
    *start = st;
    return idx;
}

static PyObject *py_fir(PyObject *self, PyObject *args)
{
    PyObject *xo, *yo, *to;
    int k, acc_bits, rounding, overflow, width;
    if (!PyArg_ParseTuple(args, "OOOiiiii", &xo, &yo, &to, &k, &acc_bits, &rounding, &overflow, &width))
        return NULL;
    arith_t ar;
    if (arith_init(&ar, k, acc_bits, rounding, overflow, width) < 0) return NULL;
    Py_buffer xb, yb, tb;
    if (get_xy(xo, yo, &xb, &yb, 'i') < 0) return NULL;
    if (get_buf(to, &tb, 0, 'i', "taps") < 0) { PyBuffer_Release(&xb); PyBuffer_Release(&yb); return NULL; }
    Py_ssize_t n = xb.len / 8, nt = tb.len / 8;
    const int64_t *x = (const int64_t *)xb.buf, *t = (const int64_t *)tb.buf;
    int64_t *y = (int64_t *)yb.buf;
    long long ovf = 0, aovf = 0;
    int fast = width <= 62 && sum_bound_ok(t, nt, width, 0);
    Py_ssize_t *st, *idx = nonzero_taps(t, nt, 1, &st);
    if (!idx) { PyBuffer_Release(&xb); PyBuffer_Release(&yb); PyBuffer_Release(&tb); return NULL; }
    const Py_ssize_t nnz = st[1];
    Py_BEGIN_ALLOW_THREADS
    if (fast && nnz == nt) { /* no zero tap: the plain loop (no index table) */
        for (Py_ssize_t i = 0; i < n; i++) {
            Py_ssize_t m = i + 1 < nt ? i + 1 : nt;
            int64_t s = 0;
            const int64_t *xp = x + i;
            for (Py_ssize_t j = 0; j < m; j++) s += t[j] * xp[-j];
            y[i] = fit(rshift(afinish(s, &ar, &aovf), &ar), &ar, &ovf);
        }
    } else for (Py_ssize_t i = 0; i < n; i++) {
        int64_t acc;
        if (fast) {
            int64_t s = 0;
            for (Py_ssize_t q = 0; q < nnz && idx[q] <= i; q++) s += t[idx[q]] * x[i - idx[q]];
            acc = afinish(s, &ar, &aovf);
        } else {
            wide_t w = {0, 0};
            for (Py_ssize_t q = 0; q < nnz && idx[q] <= i; q++) wadd(&w, t[idx[q]] * x[i - idx[q]]);
            acc = wfinish(&w, &ar, &aovf);
        }
        y[i] = fit(rshift(acc, &ar), &ar, &ovf);
    }
    Py_END_ALLOW_THREADS
    PyMem_Free(idx); PyMem_Free(st);
    PyBuffer_Release(&xb); PyBuffer_Release(&yb); PyBuffer_Release(&tb);
    return Py_BuildValue("LL", ovf, aovf);
}

/* polyphase FIR (coefc.program, "polyfir"): y[i] = fit(round(wrap(sum over k with L | (i*M - k),
   i*M - k >= 0 of t[k] * x[(i*M - k) / L]))), for i < ny; exactly one of M, L above 1 (or both 1).
   Only the kept outputs (M > 1), the non-zero products (L > 1) and the non-zero taps are computed. */
static PyObject *py_fir_rate(PyObject *self, PyObject *args)
{
    PyObject *xo, *yo, *to;
    int k, acc_bits, rounding, overflow, width, down, up;
    if (!PyArg_ParseTuple(args, "OOOiiiiiii", &xo, &yo, &to, &down, &up, &k, &acc_bits, &rounding, &overflow,
                          &width))
        return NULL;
    if (down < 1 || up < 1 || (down > 1 && up > 1)) {
        PyErr_SetString(PyExc_ValueError, "engine: fir_rate needs down >= 1, up >= 1, not both above 1");
        return NULL;
    }
    arith_t ar;
    if (arith_init(&ar, k, acc_bits, rounding, overflow, width) < 0) return NULL;
    Py_buffer xb, yb, tb;
    if (get_buf(xo, &xb, 0, 'i', "x") < 0) return NULL;
    if (get_buf(yo, &yb, 1, 'i', "y") < 0) { PyBuffer_Release(&xb); return NULL; }
    if (get_buf(to, &tb, 0, 'i', "taps") < 0) { PyBuffer_Release(&xb); PyBuffer_Release(&yb); return NULL; }
    Py_ssize_t n = xb.len / 8, ny = yb.len / 8, nt = tb.len / 8;
    if (ny != (n * up + down - 1) / down) {
        PyErr_SetString(PyExc_ValueError, "engine: fir_rate output length must be ceil(n * up / down)");
        PyBuffer_Release(&xb); PyBuffer_Release(&yb); PyBuffer_Release(&tb);
        return NULL;
    }
    const int64_t *x = (const int64_t *)xb.buf, *t = (const int64_t *)tb.buf;
    int64_t *y = (int64_t *)yb.buf;
    long long ovf = 0, aovf = 0;
    int fast = width <= 62 && sum_bound_ok(t, nt, width, 0);
    Py_ssize_t *st, *idx = nonzero_taps(t, nt, up, &st);
    if (!idx) { PyBuffer_Release(&xb); PyBuffer_Release(&yb); PyBuffer_Release(&tb); return NULL; }
    Py_BEGIN_ALLOW_THREADS
    for (Py_ssize_t i = 0; i < ny; i++) {
        Py_ssize_t r = i * (Py_ssize_t)down;       /* index into the upsampled input u */
        Py_ssize_t ph = r % up;                    /* the taps meeting a non-zero u sample: kk = ph mod up */
        Py_ssize_t q0 = st[ph], q1 = st[ph + 1];
        int64_t acc;
        if (fast && up == 1 && q1 == nt) { /* decimation, no zero tap: the plain FIR sum at the kept sample */
            int64_t s = 0;
            const int64_t *xp = x + r;
            Py_ssize_t m = r + 1 < nt ? r + 1 : nt;
            for (Py_ssize_t j = 0; j < m; j++) s += t[j] * xp[-j];
            acc = afinish(s, &ar, &aovf);
        } else if (fast && up == 1) { /* decimation: the non-zero taps' sum at the kept sample */
            int64_t s = 0;
            const int64_t *xp = x + r;
            for (Py_ssize_t q = q0; q < q1 && idx[q] <= r; q++) s += t[idx[q]] * xp[-idx[q]];
            acc = afinish(s, &ar, &aovf);
        } else if (fast) {
            int64_t s = 0;
            for (Py_ssize_t q = q0; q < q1 && idx[q] <= r; q++) s += t[idx[q]] * x[(r - idx[q]) / up];
            acc = afinish(s, &ar, &aovf);
        } else {
            wide_t w = {0, 0};
            for (Py_ssize_t q = q0; q < q1 && idx[q] <= r; q++) wadd(&w, t[idx[q]] * x[(r - idx[q]) / up]);
            acc = wfinish(&w, &ar, &aovf);
        }
        y[i] = fit(rshift(acc, &ar), &ar, &ovf);
    }
    Py_END_ALLOW_THREADS
    PyMem_Free(idx); PyMem_Free(st);
    PyBuffer_Release(&xb); PyBuffer_Release(&yb); PyBuffer_Release(&tb);
    return Py_BuildValue("LL", ovf, aovf);
}

/* CIC decimator (coefc.program, "cic"; Hogenauer 1981): N integrators at the input rate, every R-th
   sample kept (from the first), N combs of differential delay D at the output rate, all modulo 2^64;
   v = the result sign-extended from B = reg_bits bits, which is the exact FIR sum (the modulo property:
   the exact sum fits B bits, so its residue modulo 2^64 or 2^B is itself); y = fit(round(C v / 2^k)),
   C v exact in int64 (the realiser keeps B + bits(C) <= 64). */
static PyObject *py_cic(PyObject *self, PyObject *args)
{
    PyObject *xo, *yo;
    int R, N, D, B, k, rounding, overflow, width;
    long long C;
    if (!PyArg_ParseTuple(args, "OOiiiiLiiii", &xo, &yo, &R, &N, &D, &B, &C, &k, &rounding, &overflow, &width))
        return NULL;
    if (R < 1 || N < 1 || N > 8 || D < 1 || D > 4 || B < 2 || B > 64 || C < 1) {
        PyErr_SetString(PyExc_ValueError, "engine: cic needs R >= 1, N 1..8, D 1..4, register 2..64 bits, C >= 1");
        return NULL;
    }
    {   /* C * v must be exact in int64: |v| <= 2^(B-1), so C < 2^(64 - B) */
        int cb = 0;
        for (unsigned long long c = (unsigned long long)C; c; c >>= 1) cb++;
        if (B + cb > 64) {
            PyErr_SetString(PyExc_ValueError, "engine: cic needs register bits + coefficient bits <= 64");
            return NULL;
        }
    }
    arith_t ar;
    if (arith_init(&ar, k, 64, rounding, overflow, width) < 0) return NULL;
    Py_buffer xb, yb;
    if (get_buf(xo, &xb, 0, 'i', "x") < 0) return NULL;
    if (get_buf(yo, &yb, 1, 'i', "y") < 0) { PyBuffer_Release(&xb); return NULL; }
    Py_ssize_t n = xb.len / 8, ny = yb.len / 8;
    if (ny != (n + R - 1) / R) {
        PyErr_SetString(PyExc_ValueError, "engine: cic output length must be ceil(n / R)");
        PyBuffer_Release(&xb); PyBuffer_Release(&yb);
        return NULL;
    }
    const int64_t *x = (const int64_t *)xb.buf;
    int64_t *y = (int64_t *)yb.buf;
    long long ovf = 0;
    Py_BEGIN_ALLOW_THREADS
    uint64_t integ[8] = {0}, comb[8][4];
    memset(comb, 0, sizeof comb);
    int cp = 0, ph = 0;
    Py_ssize_t o = 0;
    for (Py_ssize_t t = 0; t < n; t++) {
        integ[0] += (uint64_t)x[t];
        for (int j = 1; j < N; j++) integ[j] += integ[j - 1];
        if (ph == 0) {
            uint64_t c = integ[N - 1];
            for (int j = 0; j < N; j++) {
                uint64_t old = comb[j][cp];
                comb[j][cp] = c;
                c -= old;
            }
            cp = cp + 1 == D ? 0 : cp + 1;
            int64_t v = sext(c, B);
            y[o++] = fit(rshift((int64_t)C * v, &ar), &ar, &ovf);
        }
        ph = ph + 1 == R ? 0 : ph + 1;
    }
    Py_END_ALLOW_THREADS
    PyBuffer_Release(&xb); PyBuffer_Release(&yb);
    return Py_BuildValue("LL", ovf, 0LL);
}

static PyObject *py_gain(PyObject *self, PyObject *args)
{
    PyObject *xo, *yo;
    long long c;
    int k, acc_bits, rounding, overflow, width;
    if (!PyArg_ParseTuple(args, "OOLiiiii", &xo, &yo, &c, &k, &acc_bits, &rounding, &overflow, &width))
        return NULL;
    arith_t ar;
    if (arith_init(&ar, k, acc_bits, rounding, overflow, width) < 0) return NULL;
    Py_buffer xb, yb;
    if (get_xy(xo, yo, &xb, &yb, 'i') < 0) return NULL;
    Py_ssize_t n = xb.len / 8;
    const int64_t *x = (const int64_t *)xb.buf;
    int64_t *y = (int64_t *)yb.buf;
    long long ovf = 0, aovf = 0;
    Py_BEGIN_ALLOW_THREADS
    for (Py_ssize_t i = 0; i < n; i++) {
        wide_t w = {0, 0};
        wadd(&w, (int64_t)c * x[i]);  /* one product of two words: exact in int64 */
        y[i] = fit(rshift(wfinish(&w, &ar, &aovf), &ar), &ar, &ovf);
    }
    Py_END_ALLOW_THREADS
    PyBuffer_Release(&xb); PyBuffer_Release(&yb);
    return Py_BuildValue("LL", ovf, aovf);
}

/* ------------------------------------------------------------ fused cascade
 * Consecutive sections run sample by sample (section loop inside the sample
 * loop), so the recursions of different sections overlap in the processor;
 * every section still writes its own output buffer and counts its overflows.
 * Exact sums use __int128 where the compiler has it, else the carry-tracking
 * wide_t above.  Rounding mode and structure are compile-time constants of each
 * instantiated loop.
 */
#if defined(__GNUC__) || defined(__clang__)
#define ALWAYS_INLINE static inline __attribute__((always_inline))
#else
#define ALWAYS_INLINE static inline
#endif

#if defined(__SIZEOF_INT128__) && !defined(COEFC_NO_INT128)
typedef __int128 wsum_t;
#define WS_INIT(w) ((w) = 0)
#define WS_ADD(w, p) ((w) += (int64_t)(p))
ALWAYS_INLINE int64_t ws_finish(wsum_t w, const arith_t *ar, long long *aovf)
{
    if (w < (wsum_t)ar->acc_lo || w > (wsum_t)ar->acc_hi) {
        (*aovf)++;
        return sext((uint64_t)w, ar->acc_bits);
    }
    return (int64_t)w;
}
#define WS_FINISH(w, ar, aovf) ws_finish((w), (ar), (aovf))
#else
typedef wide_t wsum_t;
#define WS_INIT(w) ((w).s = 0, (w).c = 0)
#define WS_ADD(w, p) wadd(&(w), (int64_t)(p))
#define WS_FINISH(w, ar, aovf) wfinish(&(w), (ar), (aovf))
#endif

typedef struct {
    int64_t b0, b1, b2, a1, a2;
    int k;
    uint64_t kmask, khalf;
    int64_t x1, x2, y1, y2, e, s1, s2;
    long long ovf, aovf;
    int64_t *y;
    int split; /* b1 x1 + b2 x2 (+ e) and a1 y1 + a2 y2 each provably exact in int64 */
    int64_t t_lo, t_hi; /* acc range shifted by the rounding bias */
    int64_t r_max;      /* INT64_MAX - rounding bias */
} sec_t;

ALWAYS_INLINE int64_t rshift_m(int64_t v, const sec_t *c, const int mode)
{
    int64_t q = v >> c->k;
    uint64_t rem = (uint64_t)v & c->kmask;
    if (mode == 0) return q + (rem >= c->khalf);
    if (mode == 1) return q;
    if (mode == 2) return q + (rem > c->khalf || (rem == c->khalf && (q & 1)));
    return q + (v < 0 && rem != 0);
}

#if defined(__GNUC__) || defined(__clang__)
#define UNLIKELY(c) __builtin_expect(!!(c), 0)
#else
#define UNLIKELY(c) (c)
#endif

/* fit into the data word.  A (predicted) branch rather than a conditional move:
   overflow is rare, and a branch keeps the clamp off the data dependence chain
   from one section to the next. */
ALWAYS_INLINE int64_t fit_m(int64_t v, const arith_t *ar, long long *ovf, const int sat)
{
    if (UNLIKELY(v > ar->hi || v < ar->lo)) {
        (*ovf)++;
        if (sat) return v > ar->hi ? ar->hi : ar->lo;
        return sext((uint64_t)v, ar->width);
    }
    return v;
}

#if defined(__GNUC__) || defined(__clang__)
#define NOINLINE __attribute__((noinline))
#else
#define NOINLINE
#endif

/* the exact wide sum of a df1 / df1ef section, kept out of the hot loop */
static NOINLINE int64_t df1_wide_acc(sec_t *c, int64_t in, int64_t x1, int64_t x2, int64_t y1, int64_t y2,
                                     const arith_t *ar, int ef, int mode, int64_t *v)
{
    wsum_t w;
    WS_INIT(w);
    WS_ADD(w, c->b0 * in); WS_ADD(w, c->b1 * x1); WS_ADD(w, c->b2 * x2);
    WS_ADD(w, -(c->a1 * y1)); WS_ADD(w, -(c->a2 * y2));
    if (ef) WS_ADD(w, c->e);
    int64_t acc = WS_FINISH(w, ar, &c->aovf);
    *v = rshift_m(acc, c, mode);
    return acc;
}

ALWAYS_INLINE void cascade_body(const int64_t *restrict x, Py_ssize_t n, sec_t *restrict s, int ns,
                                const arith_t *ar_in, const int structure, const int mode, const int sat,
                                const int acc64)
{
    const arith_t A = *ar_in; /* a local copy: no store below can change it */
    const arith_t *ar = &A;
    /* DF1: a section's input history is the previous section's output history
       before this sample's update, so it is handed on in registers (px1, px2);
       the first section's comes from the channel input (ix1, ix2). */
    int64_t ix1 = 0, ix2 = 0;
    for (Py_ssize_t i = 0; i < n; i++) {
        int64_t in = x[i];
        int64_t px1 = ix1, px2 = ix2;
        ix2 = ix1;
        ix1 = in;
        for (int j = 0; j < ns; j++) {
            sec_t *restrict c = &s[j];
            int64_t *restrict yo = c->y;
            int64_t out;
            int tdone = 0;
            if (structure == 1 && c->split) {
                /* tdf2 fast path: the products pair up into int64-exact partial sums
                   (checked bounds); each addition of a state is sign-tested and
                   range-checked; any doubt falls through to the exact wide sums */
                const int64_t s1 = c->s1, s2 = c->s2;
                const int64_t bias = (mode == 0 || mode == 2) ? (int64_t)c->khalf : 0;
                int64_t p0 = c->b0 * in;
                int64_t sb = s1 + (s1 <= c->r_max ? bias : 0); /* the bias rides on the state */
                int64_t t = (int64_t)((uint64_t)p0 + (uint64_t)sb);
                if (s1 <= c->r_max && ((p0 ^ t) & (sb ^ t)) >= 0 && t >= c->t_lo && (acc64 || t <= c->t_hi)) {
                    int64_t v = t >> c->k, o;
                    if (mode == 2 && (((uint64_t)t & c->kmask) == 0) && (v & 1)) v -= 1;
                    if (mode == 3) v += (t < 0) & (((uint64_t)t & c->kmask) != 0);
                    o = v;
                    if (UNLIKELY(v > ar->hi || v < ar->lo))
                        o = sat ? (v > ar->hi ? ar->hi : ar->lo) : sext((uint64_t)v, ar->width);
                    int64_t q1 = c->b1 * in - c->a1 * o;
                    int64_t n1 = (int64_t)((uint64_t)q1 + (uint64_t)s2);
                    int64_t n2 = c->b2 * in - c->a2 * o;
                    if (((q1 ^ n1) & (s2 ^ n1)) >= 0 && n1 >= ar->acc_lo && n1 <= ar->acc_hi &&
                        n2 >= ar->acc_lo && n2 <= ar->acc_hi) {
                        if (o != v) c->ovf++;
                        c->s1 = n1;
                        c->s2 = n2;
                        out = o;
                        tdone = 1;
                    }
                }
            }
            if (tdone) {
                /* done above */
            } else if (structure == 1) { /* tdf2, exact wide sums */
                long long bad = 0;
                wsum_t w, w1, w2;
                WS_INIT(w); WS_ADD(w, c->b0 * in); WS_ADD(w, c->s1);
                int64_t acc = WS_FINISH(w, ar, &bad);
                out = fit_m(rshift_m(acc, c, mode), ar, &c->ovf, sat);
                WS_INIT(w1); WS_ADD(w1, c->b1 * in); WS_ADD(w1, -(c->a1 * out)); WS_ADD(w1, c->s2);
                WS_INIT(w2); WS_ADD(w2, c->b2 * in); WS_ADD(w2, -(c->a2 * out));
                c->s1 = WS_FINISH(w1, ar, &bad);
                c->s2 = WS_FINISH(w2, ar, &bad);
                c->aovf += bad != 0;
            } else {
                const int64_t x1 = px1, x2 = px2, y1 = c->y1, y2 = c->y2;
                int64_t acc, v;
                int done = 0;
                if (c->split) {
                    /* Fast exact path.  The terms that do not involve the current input
                       (ff' and fb, each provably exact in int64) are combined with the
                       rounding bias off the critical path; then t = acc + bias and the
                       quotient is one arithmetic shift.  Any int64 overflow or an acc
                       out of range falls through to the exact wide sum below. */
                    const int64_t bias = (mode == 0 || mode == 2) ? (int64_t)c->khalf : 0;
                    int64_t ffp = c->b1 * x1 + c->b2 * x2;
                    if (structure == 2) ffp += c->e;
                    int64_t fb = c->a1 * y1 + c->a2 * y2;
                    uint64_t ur = (uint64_t)ffp - (uint64_t)fb;
                    int64_t r = (int64_t)ur;
                    int64_t p0 = c->b0 * in;
                    if (((ffp ^ fb) & (ffp ^ r)) >= 0 && r <= c->r_max) {
                        int64_t pb = r + bias;
                        int64_t t = (int64_t)((uint64_t)pb + (uint64_t)p0);
                        /* with a 64-bit accumulator only t >= INT64_MIN + bias remains to check */
                        if (((pb ^ t) & (p0 ^ t)) >= 0 && t >= c->t_lo && (acc64 || t <= c->t_hi)) {
                            acc = t - bias;
                            v = t >> c->k;
                            if (mode == 2 && (((uint64_t)t & c->kmask) == 0) && (v & 1)) v -= 1;
                            if (mode == 3) v += (t < 0) & (((uint64_t)t & c->kmask) != 0);
                            done = 1;
                        }
                    }
                }
                if (!done) acc = df1_wide_acc(c, in, x1, x2, y1, y2, ar, structure == 2, mode, &v);
                if (structure == 2) c->e = (int64_t)((uint64_t)acc - ((uint64_t)v << c->k));
                out = fit_m(v, ar, &c->ovf, sat);
                px1 = y1; px2 = y2;
                c->y2 = y1; c->y1 = out;
            }
            yo[i] = out;
            in = out;
        }
    }
}

typedef void (*cascade_fn)(const int64_t *, Py_ssize_t, sec_t *, int, const arith_t *);
#define CASC(S, M, O, A) \
    static void casc_##S##_##M##_##O##_##A(const int64_t *x, Py_ssize_t n, sec_t *s, int ns, const arith_t *ar) \
    { cascade_body(x, n, s, ns, ar, S, M, O, A); }
#define CASC_A(S, O, A) CASC(S, 0, O, A) CASC(S, 1, O, A) CASC(S, 2, O, A) CASC(S, 3, O, A)
#define CASC_S(S) CASC_A(S, 1, 0) CASC_A(S, 0, 0) CASC_A(S, 1, 1) CASC_A(S, 0, 1)
CASC_S(0) CASC_S(1) CASC_S(2)
#define ROW_A(S, O, A) {casc_##S##_0_##O##_##A, casc_##S##_1_##O##_##A, casc_##S##_2_##O##_##A, casc_##S##_3_##O##_##A}
#define ROW(S) {{ROW_A(S, 1, 0), ROW_A(S, 0, 0)}, {ROW_A(S, 1, 1), ROW_A(S, 0, 1)}}
/* [structure][acc_bits == 64][overflow: 0 saturate, 1 wrap][rounding] */
static const cascade_fn cascade_table[3][2][2][4] = {ROW(0), ROW(1), ROW(2)};

/* ------------------------------------------------------------ skewed cascade on 512-bit lanes
 * Up to eight consecutive sections run at once, one per 64-bit lane, on a skewed schedule:
 * at step t, lane j (section j of the group) takes sample t - j, whose input is lane j-1's
 * output of step t-1 (lane 0: the group's input).  The lanes of one step are independent,
 * so one vector step advances eight sections.  Products are exact in int64 (data and
 * coefficient words together at most 64 bits wide, as for the scalar loops); every addition
 * is checked for int64 overflow (sign test) and, below 64-bit accumulators, the sums for the
 * accumulator range: a step where any lane fails is redone lane by lane with the exact wide
 * sums (lane_step), as are the first and last steps of the skew (lanes before their first
 * or after their last sample).  Outputs go through a small staging block to each section's
 * buffer; when every section writes the same buffer the last section's value still lands
 * last.  Rounding and overflow counts are those of the scalar loops, lane by lane.
 * Used where the processor has AVX-512F and -DQ (checked at run time); `lanes(0)` turns it
 * off (the tests run both paths against the exact model).
 */
#define LANES 8
typedef struct {
    int64_t b0[LANES], b1[LANES], b2[LANES], a1[LANES], a2[LANES];
    int64_t x1[LANES], x2[LANES], y1[LANES], y2[LANES], e[LANES], s1[LANES], s2[LANES], out[LANES];
    long long ovf[LANES], aovf[LANES];
    arith_t ar[LANES];
    int64_t *y[LANES];
    int L;
} lanes_t;

/* one sample of lane j with the exact wide sums (the arithmetic of the scalar loops) */
static void lane_step(lanes_t *g, int j, int64_t in, int structure)
{
    const arith_t *ar = &g->ar[j];
    int64_t out;
    if (structure == 1) {
        long long bad = 0;
        wsum_t w, w1, w2;
        WS_INIT(w); WS_ADD(w, g->b0[j] * in); WS_ADD(w, g->s1[j]);
        int64_t acc = WS_FINISH(w, ar, &bad);
        out = fit(rshift(acc, ar), ar, &g->ovf[j]);
        WS_INIT(w1); WS_ADD(w1, g->b1[j] * in); WS_ADD(w1, -(g->a1[j] * out)); WS_ADD(w1, g->s2[j]);
        WS_INIT(w2); WS_ADD(w2, g->b2[j] * in); WS_ADD(w2, -(g->a2[j] * out));
        g->s1[j] = WS_FINISH(w1, ar, &bad);
        g->s2[j] = WS_FINISH(w2, ar, &bad);
        g->aovf[j] += bad != 0;
    } else {
        wsum_t w;
        WS_INIT(w);
        WS_ADD(w, g->b0[j] * in); WS_ADD(w, g->b1[j] * g->x1[j]); WS_ADD(w, g->b2[j] * g->x2[j]);
        WS_ADD(w, -(g->a1[j] * g->y1[j])); WS_ADD(w, -(g->a2[j] * g->y2[j]));
        if (structure == 2) WS_ADD(w, g->e[j]);
        int64_t acc = WS_FINISH(w, ar, &g->aovf[j]);
        int64_t v = rshift(acc, ar);
        if (structure == 2) g->e[j] = (int64_t)((uint64_t)acc - ((uint64_t)v << ar->k));
        out = fit(v, ar, &g->ovf[j]);
        g->x2[j] = g->x1[j]; g->x1[j] = in;
        g->y2[j] = g->y1[j]; g->y1[j] = out;
    }
    g->out[j] = out;
}

/* step t of the skew, lane by lane, for the lanes whose sample t - j lies in [0, n) */
static void skew_step_scalar(lanes_t *g, const int64_t *xin, Py_ssize_t n, Py_ssize_t t, int structure, int store)
{
    for (int j = g->L - 1; j >= 0; j--) { /* from the last lane: lane j reads lane j-1's previous output */
        Py_ssize_t i = t - j;
        if (i < 0 || i >= n) continue;
        lane_step(g, j, j == 0 ? xin[t] : g->out[j - 1], structure);
        if (store) g->y[j][i] = g->out[j];
    }
}

#if defined(__x86_64__) && (defined(__GNUC__) || defined(__clang__)) && !defined(COEFC_NO_AVX512)
#define HAVE_LANES 1
#include <immintrin.h>
#define V512 __attribute__((target("avx512f,avx512dq")))
#define STAGE 64

V512 static inline __attribute__((always_inline)) void skew_body(lanes_t *g, const int64_t *xin, Py_ssize_t n,
                                                                 const int structure, const int mode, const int sat,
                                                                 const int acc64)
{
    const int L = g->L;
    int64_t kk[LANES], bias[LANES], kmask[LANES];
    for (int j = 0; j < LANES; j++) {
        kk[j] = g->ar[j].k;
        kmask[j] = (int64_t)g->ar[j].kmask;
        bias[j] = (mode == 0 || mode == 2) ? (int64_t)g->ar[j].khalf : 0;
    }
    const arith_t *a0 = &g->ar[0];
    const __m512i B0 = _mm512_loadu_si512(g->b0), B1 = _mm512_loadu_si512(g->b1), B2 = _mm512_loadu_si512(g->b2);
    const __m512i NA1 = _mm512_sub_epi64(_mm512_setzero_si512(), _mm512_loadu_si512(g->a1));
    const __m512i NA2 = _mm512_sub_epi64(_mm512_setzero_si512(), _mm512_loadu_si512(g->a2));
    const __m512i K = _mm512_loadu_si512(kk), BIAS = _mm512_loadu_si512(bias), KMASK = _mm512_loadu_si512(kmask);
    const __m512i ONE = _mm512_set1_epi64(1), HI = _mm512_set1_epi64(a0->hi), LO = _mm512_set1_epi64(a0->lo);
    const __m512i AHI = _mm512_set1_epi64(a0->acc_hi), ALO = _mm512_set1_epi64(a0->acc_lo);
    const __m512i TLO = _mm512_add_epi64(ALO, BIAS);
    const __m512i THI = acc64 ? AHI : _mm512_add_epi64(AHI, BIAS); /* unused at 64 bits */
    const __m512i WSH = _mm512_set1_epi64(64 - a0->width);
    int64_t stage[STAGE][LANES];
    Py_ssize_t t0 = L - 1, t1 = n; /* the vector steps: every lane has a sample */
    for (Py_ssize_t t = 0; t < t0 && t < n + L - 1; t++) skew_step_scalar(g, xin, n, t, structure, 1);
    __m512i X1 = _mm512_loadu_si512(g->x1), X2 = _mm512_loadu_si512(g->x2), Y1 = _mm512_loadu_si512(g->y1);
    __m512i Y2 = _mm512_loadu_si512(g->y2), E = _mm512_loadu_si512(g->e), S1 = _mm512_loadu_si512(g->s1);
    __m512i S2 = _mm512_loadu_si512(g->s2), OUT = _mm512_loadu_si512(g->out);
    __m512i OVF = _mm512_loadu_si512(g->ovf);
    /* tdf2: the vector S1 is s1 + bias (exact: the checked sum that made it, or checked here);
       a lane where s1 + bias leaves int64 makes the next step go lane by lane (s1bad) */
    __mmask8 s1bad = 0;
#define S1_IN() do { const __m512i s_ = _mm512_loadu_si512(g->s1); S1 = _mm512_add_epi64(s_, BIAS); \
        s1bad = _mm512_movepi64_mask(_mm512_ternarylogic_epi64(s_, BIAS, S1, 0x42)); } while (0)
#define S1_OUT() _mm512_storeu_si512(g->s1, _mm512_sub_epi64(S1, BIAS))
    if (structure == 1) S1_IN();
    Py_ssize_t tb = t0; /* first step of the staging block */
    for (Py_ssize_t t = t0; t < t1; t++) {
        const __m512i IN = _mm512_alignr_epi64(OUT, _mm512_set1_epi64(xin[t]), 7);
        __m512i F, T, r, V, O, N1 = S1, N2 = S2;
        __mmask8 bad;
        /* the sums are ordered so that the newest terms (the input, the last output) come last */
        if (structure == 1) { /* S1 holds the state plus the rounding bias (see below) */
            const __m512i P0 = _mm512_mullo_epi64(B0, IN);
            T = _mm512_add_epi64(S1, P0);
            F = _mm512_ternarylogic_epi64(S1, P0, T, 0x42);
        } else {
            const __m512i P1 = _mm512_mullo_epi64(B1, X1), P2 = _mm512_mullo_epi64(B2, X2);
            const __m512i Q1 = _mm512_mullo_epi64(NA1, Y1), Q2 = _mm512_mullo_epi64(NA2, Y2);
            const __m512i P0 = _mm512_mullo_epi64(B0, IN);
            __m512i r1 = _mm512_add_epi64(P1, P2);
            F = _mm512_ternarylogic_epi64(P1, P2, r1, 0x42);
            if (structure == 2) {
                __m512i r1e = _mm512_add_epi64(r1, E);
                F = _mm512_or_si512(F, _mm512_ternarylogic_epi64(r1, E, r1e, 0x42));
                r1 = r1e;
            }
            __m512i r1b = _mm512_add_epi64(r1, BIAS);
            F = _mm512_or_si512(F, _mm512_ternarylogic_epi64(r1, BIAS, r1b, 0x42));
            __m512i r2 = _mm512_add_epi64(r1b, Q2);
            F = _mm512_or_si512(F, _mm512_ternarylogic_epi64(r1b, Q2, r2, 0x42));
            r = _mm512_add_epi64(r2, Q1);
            F = _mm512_or_si512(F, _mm512_ternarylogic_epi64(r2, Q1, r, 0x42));
            T = _mm512_add_epi64(r, P0);
            F = _mm512_or_si512(F, _mm512_ternarylogic_epi64(r, P0, T, 0x42));
        }
        V = _mm512_srav_epi64(T, K);
        if (mode == 2) {
            __mmask8 m = _mm512_testn_epi64_mask(T, KMASK) & _mm512_test_epi64_mask(V, ONE);
            V = _mm512_mask_sub_epi64(V, m, V, ONE);
        } else if (mode == 3) {
            __mmask8 m = _mm512_movepi64_mask(T) & _mm512_test_epi64_mask(T, KMASK);
            V = _mm512_mask_add_epi64(V, m, V, ONE);
        }
        if (sat) O = _mm512_min_epi64(_mm512_max_epi64(V, LO), HI);
        else O = _mm512_srav_epi64(_mm512_sllv_epi64(V, WSH), WSH);
        /* T = acc + bias: below TLO the exact acc lies below the accumulator (also at 64 bits) */
        bad = _mm512_movepi64_mask(F) | _mm512_cmplt_epi64_mask(T, TLO);
        if (!acc64) bad |= _mm512_cmpgt_epi64_mask(T, THI);
        if (structure == 1) {
            const __m512i M1 = _mm512_mullo_epi64(B1, IN), M2 = _mm512_mullo_epi64(NA1, O);
            const __m512i M3 = _mm512_mullo_epi64(B2, IN), M4 = _mm512_mullo_epi64(NA2, O);
            /* N1 = s1' + bias = ((b1 in + s2) + bias) - a1 o: T of the next step is one addition */
            const __m512i q1 = _mm512_add_epi64(M1, S2), q1b = _mm512_add_epi64(q1, BIAS);
            N1 = _mm512_add_epi64(q1b, M2);
            N2 = _mm512_add_epi64(M3, M4);
            __m512i G = _mm512_or_si512(_mm512_ternarylogic_epi64(M1, S2, q1, 0x42),
                                        _mm512_ternarylogic_epi64(q1, BIAS, q1b, 0x42));
            G = _mm512_or_si512(G, _mm512_ternarylogic_epi64(q1b, M2, N1, 0x42));
            G = _mm512_or_si512(G, _mm512_ternarylogic_epi64(M3, M4, N2, 0x42));
            /* s1' = N1 - bias in the accumulator: N1 in [TLO, THI] (at 64 bits N1 >= TLO) */
            bad |= _mm512_movepi64_mask(G) | _mm512_cmplt_epi64_mask(N1, TLO) | s1bad;
            if (!acc64)
                bad |= _mm512_cmpgt_epi64_mask(N1, THI) | _mm512_cmplt_epi64_mask(N2, ALO) |
                       _mm512_cmpgt_epi64_mask(N2, AHI);
        }
        if (UNLIKELY(bad & ((1u << L) - 1))) {
            /* redo this step lane by lane with the exact sums */
            _mm512_storeu_si512(g->x1, X1); _mm512_storeu_si512(g->x2, X2); _mm512_storeu_si512(g->y1, Y1);
            _mm512_storeu_si512(g->y2, Y2); _mm512_storeu_si512(g->e, E); S1_OUT();
            _mm512_storeu_si512(g->s2, S2); _mm512_storeu_si512(g->out, OUT); _mm512_storeu_si512(g->ovf, OVF);
            skew_step_scalar(g, xin, n, t, structure, 0);
            X1 = _mm512_loadu_si512(g->x1); X2 = _mm512_loadu_si512(g->x2); Y1 = _mm512_loadu_si512(g->y1);
            Y2 = _mm512_loadu_si512(g->y2); E = _mm512_loadu_si512(g->e); S1_IN();
            S2 = _mm512_loadu_si512(g->s2); OUT = _mm512_loadu_si512(g->out); OVF = _mm512_loadu_si512(g->ovf);
        } else {
            OVF = _mm512_mask_add_epi64(OVF, _mm512_cmpneq_epi64_mask(O, V), OVF, ONE);
            if (structure == 1) { S1 = N1; S2 = N2; s1bad = 0; }
            else {
                if (structure == 2) /* E = acc - v 2^k with acc = T - bias, modulo 2^64 as the scalar loops */
                    E = _mm512_sub_epi64(_mm512_sub_epi64(T, BIAS), _mm512_sllv_epi64(V, K));
                X2 = X1; X1 = IN; Y2 = Y1; Y1 = O;
            }
            OUT = O;
        }
        _mm512_storeu_si512(stage[t - tb], OUT);
        if (t - tb == STAGE - 1 || t == t1 - 1) {
            for (int j = 0; j < L; j++) {
                int64_t *yj = g->y[j] - j;
                for (Py_ssize_t u = tb; u <= t; u++) yj[u] = stage[u - tb][j];
            }
            tb = t + 1;
        }
    }
    _mm512_storeu_si512(g->x1, X1); _mm512_storeu_si512(g->x2, X2); _mm512_storeu_si512(g->y1, Y1);
    _mm512_storeu_si512(g->y2, Y2); _mm512_storeu_si512(g->e, E); S1_OUT();
#undef S1_IN
#undef S1_OUT
    _mm512_storeu_si512(g->s2, S2); _mm512_storeu_si512(g->out, OUT); _mm512_storeu_si512(g->ovf, OVF);
    for (Py_ssize_t t = (t0 > n ? t0 : n); t < n + L - 1; t++) skew_step_scalar(g, xin, n, t, structure, 1);
}

typedef void (*skew_fn)(lanes_t *, const int64_t *, Py_ssize_t);
#define SKEW(S, M, O, A) \
    V512 static void skew_##S##_##M##_##O##_##A(lanes_t *g, const int64_t *x, Py_ssize_t n) \
    { skew_body(g, x, n, S, M, O, A); }
#define SKEW_A(S, O, A) SKEW(S, 0, O, A) SKEW(S, 1, O, A) SKEW(S, 2, O, A) SKEW(S, 3, O, A)
#define SKEW_S(S) SKEW_A(S, 1, 0) SKEW_A(S, 0, 0) SKEW_A(S, 1, 1) SKEW_A(S, 0, 1)
SKEW_S(0) SKEW_S(1) SKEW_S(2)
#define SROW_A(S, O, A) {skew_##S##_0_##O##_##A, skew_##S##_1_##O##_##A, skew_##S##_2_##O##_##A, skew_##S##_3_##O##_##A}
#define SROW(S) {{SROW_A(S, 1, 0), SROW_A(S, 0, 0)}, {SROW_A(S, 1, 1), SROW_A(S, 0, 1)}}
/* [structure][acc_bits == 64][overflow: 0 saturate, 1 wrap][rounding] */
static const skew_fn skew_table[3][2][2][4] = {SROW(0), SROW(1), SROW(2)};

static int lanes_on = -1; /* -1: not yet decided */
static int lanes_available(void)
{
    __builtin_cpu_init();
    return __builtin_cpu_supports("avx512f") && __builtin_cpu_supports("avx512dq");
}
#else
#define HAVE_LANES 0
static int lanes_on = 0;
static int lanes_available(void) { return 0; }
#endif

/* lanes([on]) -> whether the cascade runs on 512-bit lanes (on: 1 use them where the processor
   has them, 0 never; without an argument only the query) */
static PyObject *py_lanes(PyObject *self, PyObject *args)
{
    int on = -1;
    if (!PyArg_ParseTuple(args, "|i", &on)) return NULL;
    if (on >= 0) lanes_on = on && lanes_available();
    else if (lanes_on < 0) lanes_on = lanes_available();
    return PyBool_FromLong(lanes_on > 0);
}

/* ------------------------------------------------------------ df1-wide-fb, df1ef-wide-fb, df1ef-wide
 * sos_wide(x, y, B0, B1, B2, A1H, A2H, A1L, A2L, L, k, acc_bits, rounding, overflow, width[, ef[, B0L, B1L, B2L]])
 *     -> (ovf, acc_ovf)
 * DF1 with double-word feedback coefficients (coefc/program.py):
 *   P = A1L*y1 + A2L*y2;  acc = wrapA(B0 x + B1 x1 + B2 x2 - A1H y1 - A2H y2 - floor(P / 2^L) [+ E])
 * ef = 1 (df1ef-wide-fb): E, the residual acc - v 2^k of the previous sample's
 * accumulator (which holds the floored low products), is added; |E| < 2^k.
 * B0L, B1L, B2L (df1ef-wide: the numerator's low words, default 0):
 *   Q = B0L*x + B1L*x1 + B2L*x2;  acc += floor(Q / 2^L)   (before E is added)
 * The caller guarantees that P and Q are exact in int64 (coefficient and data words
 * together at most 63 bits wide); the sum of the accumulator is exact (wsum_t). */
static PyObject *py_sos_wide(PyObject *self, PyObject *args)
{
    PyObject *xo, *yo;
    long long b0, b1, b2, a1, a2, l1, l2, m0 = 0, m1 = 0, m2 = 0;
    int L, k, acc_bits, rounding, overflow, width, ef = 0;
    if (!PyArg_ParseTuple(args, "OOLLLLLLLiiiiii|pLLL", &xo, &yo, &b0, &b1, &b2, &a1, &a2, &l1, &l2, &L, &k, &acc_bits,
                          &rounding, &overflow, &width, &ef, &m0, &m1, &m2))
        return NULL;
    arith_t ar;
    if (arith_init(&ar, k, acc_bits, rounding, overflow, width) < 0) return NULL;
    if (L < 1 || L > 62) { PyErr_SetString(PyExc_ValueError, "engine: low-word weight L out of range"); return NULL; }
    Py_buffer xb, yb;
    if (get_xy(xo, yo, &xb, &yb, 'i') < 0) return NULL;
    Py_ssize_t n = xb.len / 8;
    const int64_t *x = (const int64_t *)xb.buf;
    int64_t *y = (int64_t *)yb.buf;
    long long ovf = 0, aovf = 0;
    int64_t x1 = 0, x2 = 0, y1 = 0, y2 = 0, e = 0;
    const int wide_b = (m0 | m1 | m2) != 0;
    Py_BEGIN_ALLOW_THREADS
    for (Py_ssize_t i = 0; i < n; i++) {
        const int64_t in = x[i];
        const int64_t p = (int64_t)((uint64_t)(l1 * y1) + (uint64_t)(l2 * y2)); /* exact: see above */
        const int64_t q = p >> L;                                                /* floor(P / 2^L) */
        wsum_t w;
        WS_INIT(w);
        WS_ADD(w, b0 * in); WS_ADD(w, b1 * x1); WS_ADD(w, b2 * x2);
        WS_ADD(w, -(a1 * y1)); WS_ADD(w, -(a2 * y2)); WS_ADD(w, -q);
        if (wide_b) {
            const int64_t pb = (int64_t)((uint64_t)(m0 * in) + (uint64_t)(m1 * x1) + (uint64_t)(m2 * x2));
            WS_ADD(w, pb >> L);                                                  /* floor(Q / 2^L) */
        }
        if (ef) WS_ADD(w, e);
        const int64_t acc = WS_FINISH(w, &ar, &aovf);
        const int64_t v = rshift(acc, &ar);
        if (ef) e = (int64_t)((uint64_t)acc - ((uint64_t)v << k)); /* the residual, |E| < 2^k */
        const int64_t out = fit(v, &ar, &ovf);
        y[i] = out;
        x2 = x1; x1 = in; y2 = y1; y1 = out;
    }
    Py_END_ALLOW_THREADS
    PyBuffer_Release(&xb); PyBuffer_Release(&yb);
    return Py_BuildValue("LL", ovf, aovf);
}

static PyObject *py_cascade(PyObject *self, PyObject *args)
{
    PyObject *xo, *yso, *co;
    int structure, acc_bits, rounding, overflow, width;
    if (!PyArg_ParseTuple(args, "OOOiiiii", &xo, &yso, &co, &structure, &acc_bits, &rounding, &overflow, &width))
        return NULL;
    if (structure < 0 || structure > 2) { PyErr_SetString(PyExc_ValueError, "engine: unknown structure"); return NULL; }
    arith_t ar;
    if (arith_init(&ar, 1, acc_bits, rounding, overflow, width) < 0) return NULL;
    PyObject *ys = PySequence_Fast(yso, "engine: ys must be a sequence of int64 buffers");
    if (!ys) return NULL;
    Py_ssize_t ns = PySequence_Fast_GET_SIZE(ys);
    Py_buffer xb, cb;
    Py_buffer *yb = PyMem_Calloc(ns ? ns : 1, sizeof(Py_buffer));
    sec_t *secs = PyMem_Calloc(ns ? ns : 1, sizeof(sec_t));
    Py_ssize_t got = 0;
    PyObject *result = NULL;
    int have_x = 0, have_c = 0;
    if (!yb || !secs) { PyErr_NoMemory(); goto done; }
    if (get_buf(xo, &xb, 0, 'i', "x") < 0) goto done;
    have_x = 1;
    if (get_buf(co, &cb, 0, 'i', "coefs") < 0) goto done;
    have_c = 1;
    if (cb.len / 8 != 6 * ns) { PyErr_SetString(PyExc_ValueError, "engine: coefs must hold 6 integers per section"); goto done; }
    for (; got < ns; got++) {
        if (get_buf(PySequence_Fast_GET_ITEM(ys, got), &yb[got], 1, 'i', "y") < 0) goto done;
        if (yb[got].len != xb.len) { got++; PyErr_SetString(PyExc_ValueError, "engine: x and y differ in length"); goto done; }
    }
    const int64_t *c = (const int64_t *)cb.buf;
    for (Py_ssize_t j = 0; j < ns; j++) {
        const int64_t *cj = c + 6 * j;
        int k = (int)cj[5];
        if (k < 1 || k > 62) { PyErr_SetString(PyExc_ValueError, "engine: rounding shift k must be 1..62"); goto done; }
        secs[j].b0 = cj[0]; secs[j].b1 = cj[1]; secs[j].b2 = cj[2]; secs[j].a1 = cj[3]; secs[j].a2 = cj[4];
        secs[j].k = k;
        secs[j].kmask = (UINT64_C(1) << k) - 1;
        secs[j].khalf = UINT64_C(1) << (k - 1);
        secs[j].y = (int64_t *)yb[j].buf;
        if (structure == 1) {
            int64_t p1[2] = {cj[1], cj[3]}, p2[2] = {cj[2], cj[4]};
            secs[j].split = sum_bound_ok(cj, 1, width, 0) && sum_bound_ok(p1, 2, width, 0) &&
                            sum_bound_ok(p2, 2, width, 0);
        } else {
            secs[j].split = sum_bound_ok(cj + 1, 2, width, structure == 2 ? (UINT64_C(1) << k) : 0) &&
                            sum_bound_ok(cj + 3, 2, width, 0) && sum_bound_ok(cj, 1, width, 0);
        }
        {
            int64_t bias = (rounding == 0 || rounding == 2) ? (int64_t)secs[j].khalf : 0;
            secs[j].t_lo = ar.acc_lo + bias;
            secs[j].t_hi = acc_bits == 64 ? INT64_MAX : ar.acc_hi + bias;
            secs[j].r_max = INT64_MAX - bias;
        }
    }
    if (lanes_on < 0) lanes_on = lanes_available();
#if HAVE_LANES
    if (lanes_on > 0 && ns > 0 && xb.len > 0) {
        Py_ssize_t n = xb.len / 8;
        lanes_t *g = PyMem_Calloc(1, sizeof(lanes_t));
        if (!g) { PyErr_NoMemory(); goto done; }
        for (Py_ssize_t j0 = 0; j0 < ns; j0 += LANES) {
            int L = ns - j0 < LANES ? (int)(ns - j0) : LANES;
            memset(g, 0, sizeof(lanes_t));
            g->L = L;
            for (int j = 0; j < LANES; j++) {
                const int64_t *cj = c + 6 * (j0 + j);
                /* lanes past the group: zero coefficients, so zero states stay zero */
                arith_init(&g->ar[j], j < L ? (int)cj[5] : 1, acc_bits, rounding, overflow, width);
                if (j >= L) continue;
                g->b0[j] = cj[0]; g->b1[j] = cj[1]; g->b2[j] = cj[2]; g->a1[j] = cj[3]; g->a2[j] = cj[4];
                g->y[j] = secs[j0 + j].y;
            }
            const int64_t *xin = j0 == 0 ? (const int64_t *)xb.buf : secs[j0 - 1].y;
            Py_BEGIN_ALLOW_THREADS
            skew_table[structure][acc_bits == 64][overflow][rounding](g, xin, n);
            Py_END_ALLOW_THREADS
            for (int j = 0; j < L; j++) { secs[j0 + j].ovf = g->ovf[j]; secs[j0 + j].aovf = g->aovf[j]; }
        }
        PyMem_Free(g);
    } else
#endif
    {
        Py_BEGIN_ALLOW_THREADS
        if (ns > 0) cascade_table[structure][acc_bits == 64][overflow][rounding]((const int64_t *)xb.buf, xb.len / 8, secs, (int)ns, &ar);
        Py_END_ALLOW_THREADS
    }
    result = PyList_New(ns);
    for (Py_ssize_t j = 0; result && j < ns; j++)
        PyList_SET_ITEM(result, j, Py_BuildValue("LL", secs[j].ovf, secs[j].aovf));
done:
    for (Py_ssize_t j = 0; j < got; j++) PyBuffer_Release(&yb[j]);
    if (have_x) PyBuffer_Release(&xb);
    if (have_c) PyBuffer_Release(&cb);
    PyMem_Free(yb);
    PyMem_Free(secs);
    Py_DECREF(ys);
    return result;
}

/* ------------------------------------------------------------ coupled form
 * coupled(x, y, coefs, acc_bits, rounding, overflow, width) -> (ovf, acc_ovf)
 * coefs = (D, C1, C2, G, A11, A12, A21, A22, k) (coefc/program.py, "coupled"):
 *   accY = wrapA(D x + C1 S1 + C2 S2);  y = fit(round_shift(accY, k))
 *   acc1 = wrapA(A11 S1 + A12 S2 + G x);  acc2 = wrapA(A21 S1 + A22 S2)
 *   S1 = fit(round_shift(acc1, k));  S2 = fit(round_shift(acc2, k))
 * Every product of two words fits int64; the sums are exact (wsum_t).  A sample
 * counts one data overflow when any of its three fits changed a value, one
 * accumulator overflow when any of its three sums left the accumulator. */
static PyObject *py_coupled(PyObject *self, PyObject *args)
{
    PyObject *xo, *yo, *co;
    int acc_bits, rounding, overflow, width;
    if (!PyArg_ParseTuple(args, "OOOiiii", &xo, &yo, &co, &acc_bits, &rounding, &overflow, &width))
        return NULL;
    Py_buffer xb, yb, cb;
    if (get_xy(xo, yo, &xb, &yb, 'i') < 0) return NULL;
    if (get_buf(co, &cb, 0, 'i', "coefs") < 0) { PyBuffer_Release(&xb); PyBuffer_Release(&yb); return NULL; }
    if (cb.len / 8 != 9) {
        PyErr_SetString(PyExc_ValueError, "engine: coupled coefs must hold 9 integers");
        PyBuffer_Release(&xb); PyBuffer_Release(&yb); PyBuffer_Release(&cb);
        return NULL;
    }
    const int64_t *c = (const int64_t *)cb.buf;
    arith_t ar;
    if (arith_init(&ar, (int)c[8], acc_bits, rounding, overflow, width) < 0) {
        PyBuffer_Release(&xb); PyBuffer_Release(&yb); PyBuffer_Release(&cb);
        return NULL;
    }
    const int64_t D = c[0], C1 = c[1], C2 = c[2], G = c[3], A11 = c[4], A12 = c[5], A21 = c[6], A22 = c[7];
    Py_ssize_t n = xb.len / 8;
    const int64_t *x = (const int64_t *)xb.buf;
    int64_t *y = (int64_t *)yb.buf;
    long long ovf = 0, aovf = 0;
    int64_t s1 = 0, s2 = 0;
    Py_BEGIN_ALLOW_THREADS
    for (Py_ssize_t i = 0; i < n; i++) {
        long long bad = 0, o = 0;
        wsum_t w, w1, w2;
        WS_INIT(w); WS_ADD(w, D * x[i]); WS_ADD(w, C1 * s1); WS_ADD(w, C2 * s2);
        WS_INIT(w1); WS_ADD(w1, A11 * s1); WS_ADD(w1, A12 * s2); WS_ADD(w1, G * x[i]);
        WS_INIT(w2); WS_ADD(w2, A21 * s1); WS_ADD(w2, A22 * s2);
        int64_t accy = WS_FINISH(w, &ar, &bad);
        int64_t acc1 = WS_FINISH(w1, &ar, &bad);
        int64_t acc2 = WS_FINISH(w2, &ar, &bad);
        y[i] = fit(rshift(accy, &ar), &ar, &o);
        s1 = fit(rshift(acc1, &ar), &ar, &o);
        s2 = fit(rshift(acc2, &ar), &ar, &o);
        ovf += o != 0;
        aovf += bad != 0;
    }
    Py_END_ALLOW_THREADS
    PyBuffer_Release(&xb); PyBuffer_Release(&yb); PyBuffer_Release(&cb);
    return Py_BuildValue("LL", ovf, aovf);
}

/* ------------------------------------------------------------ zero-input iteration */

/* The zero-input recursion of a section (coefc.analyse.limitcycles), run on many
 * states at once:
 *
 *   df1/tdf2  acc = wrapA(-A1*y1 - A2*y2);      y = fit_data(round_shift(acc, k))
 *   df1ef     acc = wrapA(-A1*y1 - A2*y2 + E);  v = round_shift(acc, k);
 *             E = acc - v * 2^k (modulo 2^64);  y = fit_data(v)
 *
 * then y2 = y1 (second order) or 0, y1 = y.  The products and sums are taken modulo
 * 2^64 (as numpy's int64 arithmetic does) before the accumulator wrap, which is
 * exact for acc_bits <= 64.  Over `steps + tail` iterations; in the last `tail`
 * iterations big[j] = max(big[j], (double)|y1[j]|); when check is set, at every
 * iteration i < steps with i % 64 == 63, stop when max |y1|, |y2| over the states
 * (|INT64_MIN| staying negative, as numpy's abs) is <= gran.  Returns the number of
 * iterations done. */
static PyObject *py_zero_input(PyObject *self, PyObject *args)
{
    PyObject *y1o, *y2o, *eo, *bo;
    long long a1, a2;
    int k, acc_bits, rounding, overflow, width, ef, order2, check;
    Py_ssize_t steps, tail;
    double gran;
    if (!PyArg_ParseTuple(args, "OOOOLLiiiiiiinnid", &y1o, &y2o, &eo, &bo, &a1, &a2, &k, &acc_bits, &rounding,
                          &overflow, &width, &ef, &order2, &steps, &tail, &check, &gran))
        return NULL;
    arith_t ar;
    if (arith_init(&ar, k, acc_bits, rounding, overflow, width) < 0) return NULL;
    if (steps < 0 || tail < 0) { PyErr_SetString(PyExc_ValueError, "engine: negative step count"); return NULL; }
    Py_buffer b1, b2, be, bb;
    if (get_buf(y1o, &b1, 1, 'i', "y1") < 0) return NULL;
    if (get_buf(y2o, &b2, 1, 'i', "y2") < 0) { PyBuffer_Release(&b1); return NULL; }
    if (get_buf(eo, &be, 1, 'i', "e") < 0) { PyBuffer_Release(&b1); PyBuffer_Release(&b2); return NULL; }
    if (get_buf(bo, &bb, 1, 'd', "big") < 0) {
        PyBuffer_Release(&b1); PyBuffer_Release(&b2); PyBuffer_Release(&be); return NULL;
    }
    Py_ssize_t n = b1.len / 8;
    if (b2.len != b1.len || be.len != b1.len || bb.len != b1.len) {
        PyErr_SetString(PyExc_ValueError, "engine: y1, y2, e and big differ in length");
        PyBuffer_Release(&b1); PyBuffer_Release(&b2); PyBuffer_Release(&be); PyBuffer_Release(&bb);
        return NULL;
    }
    int64_t *y1 = (int64_t *)b1.buf, *y2 = (int64_t *)b2.buf, *e = (int64_t *)be.buf;
    double *big = (double *)bb.buf;
    /* m <= gran for an integer m  <=>  m <= floor(gran) */
    int gran_all = gran >= 9223372036854775808.0, gran_none = !(gran >= -9223372036854775808.0);
    int64_t gran_i = (gran_all || gran_none) ? 0 : (int64_t)floor(gran);
    const uint64_t ua1 = (uint64_t)a1, ua2 = (uint64_t)a2;
    Py_ssize_t i, total = steps + tail;
    Py_BEGIN_ALLOW_THREADS
    for (i = 0; i < total; i++) {
        for (Py_ssize_t j = 0; j < n; j++) {
            uint64_t u = (uint64_t)0 - ua1 * (uint64_t)y1[j] - ua2 * (uint64_t)y2[j];
            if (ef) u += (uint64_t)e[j];
            int64_t acc = sext(u, acc_bits);
            int64_t v = rshift(acc, &ar);
            if (ef) e[j] = (int64_t)((uint64_t)acc - ((uint64_t)v << k));
            int64_t y = v;
            if (y > ar.hi || y < ar.lo) y = overflow == 0 ? (y > ar.hi ? ar.hi : ar.lo) : sext((uint64_t)y, width);
            y2[j] = order2 ? y1[j] : 0;
            y1[j] = y;
        }
        if (i >= steps) {
            for (Py_ssize_t j = 0; j < n; j++) {
                double m = (double)(int64_t)(y1[j] < 0 ? (uint64_t)0 - (uint64_t)y1[j] : (uint64_t)y1[j]);
                if (m > big[j]) big[j] = m;
            }
        } else if (check && i % 64 == 63) {
            int64_t m = INT64_MIN;
            for (Py_ssize_t j = 0; j < n; j++) {
                int64_t p = (int64_t)(y1[j] < 0 ? (uint64_t)0 - (uint64_t)y1[j] : (uint64_t)y1[j]);
                int64_t q = (int64_t)(y2[j] < 0 ? (uint64_t)0 - (uint64_t)y2[j] : (uint64_t)y2[j]);
                if (p > m) m = p;
                if (q > m) m = q;
            }
            if (n > 0 && (gran_all || (!gran_none && m <= gran_i))) { i++; break; }
        }
    }
    Py_END_ALLOW_THREADS
    PyBuffer_Release(&b1); PyBuffer_Release(&b2); PyBuffer_Release(&be); PyBuffer_Release(&bb);
    return PyLong_FromSsize_t(i);
}

/* ------------------------------------------------------------ exhaustive cycle searches */

/* One zero-input step of the integer map (the arithmetic of py_zero_input):
 * u = -A1*y1 - A2*y2 (+ E) modulo 2^64, acc = the low acc_bits of u, v = round_shift(acc, k),
 * y = fit_data(v); *acc_out and *v_out receive acc and v. */
static inline int64_t zi_step(int64_t y1, int64_t y2, int64_t e, uint64_t ua1, uint64_t ua2, const arith_t *ar,
                              int64_t *acc_out, int64_t *v_out, uint64_t *u_out)
{
    uint64_t u = (uint64_t)0 - ua1 * (uint64_t)y1 - ua2 * (uint64_t)y2 + (uint64_t)e;
    int64_t acc = sext(u, ar->acc_bits);
    int64_t v = rshift(acc, ar);
    int64_t y = v;
    if (y > ar->hi || y < ar->lo) y = ar->overflow == 0 ? (y > ar->hi ? ar->hi : ar->lo) : sext((uint64_t)y, ar->width);
    *acc_out = acc; *v_out = v; *u_out = u;
    return y;
}

/* The candidate region of cycle_region: rows y1 = -B..B, in each row the y2 of
 * [lo, hi] (second order: |y2| <= B, |y1 - y2| <= D, |y1 + y2| <= S; first order:
 * y2 = 0 only); states numbered row by row, so in the order of (y1, y2). */
typedef struct {
    int64_t B, D, S;
    int order2;
    int64_t *start; /* 2B+2 entries: the first index of each row, then the number of states */
    int64_t n;
} region_t;

/* the y2 range [*lo, *hi] of row y1 (empty: *hi < *lo) */
static inline void region_row(const region_t *R, int64_t y1, int64_t *lo, int64_t *hi)
{
    if (!R->order2) { *lo = *hi = 0; return; }
    int64_t l = -R->B, h = R->B;
    if (y1 - R->D > l) l = y1 - R->D;
    if (-R->S - y1 > l) l = -R->S - y1;
    if (y1 + R->D < h) h = y1 + R->D;
    if (R->S - y1 < h) h = R->S - y1;
    *lo = l; *hi = h;
}

static inline int64_t region_index(const region_t *R, int64_t y1, int64_t y2)
{
    int64_t lo, hi;
    if (y1 < -R->B || y1 > R->B) return -1;
    region_row(R, y1, &lo, &hi);
    if (y2 < lo || y2 > hi) return -1;
    return R->start[y1 + R->B] + (y2 - lo);
}

/* cycle_region(A1, A2, k, acc_bits, rounding, overflow, width, B, D, S, order2) -> (y1 bytes, y2 bytes, n)
 *
 * Every nonzero state on a zero-input cycle that stays inside the candidate region,
 * in the order of (y1, y2), as native int64 bytes; n is the number of candidate
 * states.  The zero-input map restricted to the region is a function on a finite
 * set (a state whose image leaves the region has no successor), so every state is
 * visited once: follow unvisited states, marking them "on the path"; a walk that
 * meets its own path has found a cycle (marked "on a cycle" by going round it once);
 * a walk that leaves the region or meets an earlier walk's state has not; then the
 * path is walked again and marked "done".  One byte of mark per state, plus one
 * int64 per row (2B + 1 rows, never more than the states: every row is nonempty
 * when B <= (D + S) / 2, as the caller makes it). */
static PyObject *py_cycle_region(PyObject *self, PyObject *args)
{
    long long a1, a2, B, D, S;
    int k, acc_bits, rounding, overflow, width, order2;
    if (!PyArg_ParseTuple(args, "LLiiiiiLLLi", &a1, &a2, &k, &acc_bits, &rounding, &overflow, &width, &B, &D, &S,
                          &order2))
        return NULL;
    arith_t ar;
    if (arith_init(&ar, k, acc_bits, rounding, overflow, width) < 0) return NULL;
    if (B < 0 || D < 0 || S < 0 || B > (INT64_C(1) << 40)) {
        PyErr_SetString(PyExc_ValueError, "engine: cycle_region bounds out of range");
        return NULL;
    }
    region_t R;
    R.B = B; R.D = D; R.S = S; R.order2 = order2;
    int64_t rows = 2 * B + 1;
    R.start = PyMem_Malloc(sizeof(int64_t) * (rows + 1));
    uint8_t *mark = NULL;
    int64_t *o1 = NULL, *o2 = NULL;
    PyObject *result = NULL;
    if (!R.start) { PyErr_NoMemory(); goto done; }
    R.n = 0;
    for (int64_t r = 0; r < rows; r++) {
        int64_t lo, hi;
        region_row(&R, r - B, &lo, &hi);
        R.start[r] = R.n;
        if (hi >= lo) R.n += hi - lo + 1;
    }
    R.start[rows] = R.n;
    if (R.n > (INT64_C(1) << 34)) { PyErr_SetString(PyExc_ValueError, "engine: cycle_region too many states"); goto done; }
    mark = PyMem_Calloc(R.n ? (size_t)R.n : 1, 1);
    if (!mark) { PyErr_NoMemory(); goto done; }
    const uint64_t ua1 = (uint64_t)a1, ua2 = order2 ? (uint64_t)a2 : 0;
    int64_t found = 0;
    int64_t acc, v;
    uint64_t u;
    Py_BEGIN_ALLOW_THREADS
    for (int64_t r = 0; r < rows; r++) {
        int64_t y1s = r - B, rlo, rhi;
        region_row(&R, y1s, &rlo, &rhi);
        for (int64_t y2s = rlo; y2s <= rhi; y2s++) {
            int64_t s = R.start[r] + (y2s - rlo);
            if (mark[s]) continue;
            /* walk */
            int64_t c = s, c1 = y1s, c2 = y2s, nx, n1, n2;
            for (;;) {
                mark[c] = 1;
                n1 = zi_step(c1, c2, 0, ua1, ua2, &ar, &acc, &v, &u);
                n2 = order2 ? c1 : 0;
                nx = region_index(&R, n1, n2);
                if (nx < 0 || mark[nx] != 0) break;
                c = nx; c1 = n1; c2 = n2;
            }
            if (nx >= 0 && mark[nx] == 1) { /* a new cycle through nx */
                int64_t x = nx, x1 = n1, x2 = n2;
                do {
                    mark[x] = 3;
                    found += (x1 != 0 || x2 != 0);
                    int64_t m1 = zi_step(x1, x2, 0, ua1, ua2, &ar, &acc, &v, &u);
                    x2 = order2 ? x1 : 0; x1 = m1;
                    x = region_index(&R, x1, x2);
                } while (x != nx);
            }
            /* the rest of the path is not on a cycle */
            {
                int64_t x = s, x1 = y1s, x2 = y2s;
                while (x >= 0 && mark[x] == 1) {
                    mark[x] = 2;
                    int64_t m1 = zi_step(x1, x2, 0, ua1, ua2, &ar, &acc, &v, &u);
                    x2 = order2 ? x1 : 0; x1 = m1;
                    x = region_index(&R, x1, x2);
                }
            }
        }
    }
    Py_END_ALLOW_THREADS
    o1 = PyMem_Malloc(sizeof(int64_t) * (found ? found : 1));
    o2 = PyMem_Malloc(sizeof(int64_t) * (found ? found : 1));
    if (!o1 || !o2) { PyErr_NoMemory(); goto done; }
    {
        int64_t j = 0;
        for (int64_t r = 0; r < rows; r++) {
            int64_t rlo, rhi;
            region_row(&R, r - B, &rlo, &rhi);
            for (int64_t y2 = rlo; y2 <= rhi; y2++)
                if (mark[R.start[r] + (y2 - rlo)] == 3 && (r != B || y2 != 0)) { o1[j] = r - B; o2[j] = y2; j++; }
        }
    }
    result = Py_BuildValue("y#y#L", (const char *)o1, (Py_ssize_t)(found * 8), (const char *)o2,
                           (Py_ssize_t)(found * 8), (long long)R.n);
done:
    PyMem_Free(R.start);
    PyMem_Free(mark); PyMem_Free(o1); PyMem_Free(o2);
    return result;
}

/* whole_cycles(A1, A2, k, acc_bits, rounding, overflow, width, order2, ef, elo, ehi, max_states)
 *     -> (n, granular, overflow), each None or (amplitude, period, y1, y2, e)
 *
 * Every cycle of the zero-input map over the whole state space: (y1, y2) over the
 * data-word box (y1 alone, first order) and, for df1ef, every residual E in
 * [elo, ehi]; state index ((y1 - lo) * 2^W + (y2 - lo)) * ne + (E - elo).  Each state
 * is visited once (as in cycle_region, here every image lies in the space).  A
 * cycle passes through an overflow when on one of its steps fit_data changed the
 * rounded value or the accumulator wrap changed the exact sum (taken in int64, which
 * the caller guarantees exact).  Of each kind (no overflow: granular; overflow) the
 * cycle of largest amplitude max |y1| > 0 is returned (ties: the one whose smallest
 * state index is smallest), with its period and the state of smallest index among
 * those with |y1| equal to the amplitude. */
typedef struct { int64_t amp, period, start, first; int have; } cyc_t;

static PyObject *cyc_tuple(const cyc_t *c, int64_t ny, int64_t ne, int64_t lo, int64_t elo, int order2)
{
    if (!c->have) Py_RETURN_NONE;
    int64_t e = c->start % ne + elo, rest = c->start / ne;
    int64_t y1 = order2 ? rest / ny + lo : rest + lo, y2 = order2 ? rest % ny + lo : 0;
    return Py_BuildValue("LLLLL", (long long)c->amp, (long long)c->period, (long long)y1, (long long)y2, (long long)e);
}

static PyObject *py_whole_cycles(PyObject *self, PyObject *args)
{
    long long a1, a2, elo, ehi, max_states;
    int k, acc_bits, rounding, overflow, width, order2, ef;
    if (!PyArg_ParseTuple(args, "LLiiiiiiiLLL", &a1, &a2, &k, &acc_bits, &rounding, &overflow, &width, &order2, &ef,
                          &elo, &ehi, &max_states))
        return NULL;
    arith_t ar;
    if (arith_init(&ar, k, acc_bits, rounding, overflow, width) < 0) return NULL;
    if (width > 30 || ehi < elo || ehi - elo > (INT64_C(1) << 40) || max_states > (INT64_C(1) << 34)) {
        PyErr_SetString(PyExc_ValueError, "engine: whole_cycles space out of range");
        return NULL;
    }
    const int64_t ny = INT64_C(1) << width, lo = ar.lo, ne = ef ? ehi - elo + 1 : 1;
    if (!ef) elo = 0;
    const int64_t n = (order2 ? ny * ny : ny) * ne;
    if (n > max_states) Py_RETURN_NONE;
    uint8_t *mark = PyMem_Calloc((size_t)n, 1);
    if (!mark) return PyErr_NoMemory();
    const uint64_t ua1 = (uint64_t)a1, ua2 = order2 ? (uint64_t)a2 : 0;
    cyc_t best[2] = {{0, 0, 0, 0, 0}, {0, 0, 0, 0, 0}};
    int bad = 0;
    Py_BEGIN_ALLOW_THREADS
#define WC_DECODE(i, y1, y2, e) do { int64_t r_ = (i) / ne; (e) = ef ? (i) % ne + elo : 0; \
        if (order2) { (y1) = r_ / ny + lo; (y2) = r_ % ny + lo; } else { (y1) = r_ + lo; (y2) = 0; } } while (0)
#define WC_NEXT(y1, y2, e, nxt, ovf) do { int64_t acc_, v_; uint64_t u_; \
        int64_t y0_ = zi_step((y1), (y2), (e), ua1, ua2, &ar, &acc_, &v_, &u_); \
        int64_t en_ = ef ? (int64_t)((uint64_t)acc_ - ((uint64_t)v_ << k)) - elo : 0; \
        (ovf) = (y0_ != v_) || (acc_ != (int64_t)u_); \
        if (en_ < 0 || en_ >= ne) { bad = 1; en_ = 0; } \
        (nxt) = ((order2 ? (y0_ - lo) * ny + ((y1) - lo) : (y0_ - lo))) * ne + en_; } while (0)
    for (int64_t s = 0; s < n && !bad; s++) {
        if (mark[s]) continue;
        int64_t c = s, nx, y1, y2, e;
        int ovf;
        for (;;) {
            mark[c] = 1;
            WC_DECODE(c, y1, y2, e);
            WC_NEXT(y1, y2, e, nx, ovf);
            if (mark[nx] != 0) break;
            c = nx;
        }
        if (mark[nx] == 1) {
            cyc_t cy = {0, 0, nx, nx, 1};
            int any_ovf = 0;
            int64_t x = nx;
            do {
                mark[x] = 3;
                WC_DECODE(x, y1, y2, e);
                int64_t a = y1 < 0 ? -y1 : y1;
                if (a > cy.amp || (a == cy.amp && x < cy.start)) { cy.amp = a; cy.start = x; }
                if (x < cy.first) cy.first = x;
                cy.period++;
                WC_NEXT(y1, y2, e, x, ovf);
                any_ovf |= ovf;
            } while (x != nx);
            cyc_t *b = &best[any_ovf];
            if (cy.amp > 0 && (!b->have || cy.amp > b->amp || (cy.amp == b->amp && cy.first < b->first))) *b = cy;
        }
        for (int64_t x = s; mark[x] == 1;) {
            mark[x] = 2;
            WC_DECODE(x, y1, y2, e);
            WC_NEXT(y1, y2, e, x, ovf);
        }
    }
#undef WC_DECODE
#undef WC_NEXT
    Py_END_ALLOW_THREADS
    PyMem_Free(mark);
    if (bad) { PyErr_SetString(PyExc_RuntimeError, "engine: whole_cycles residual out of range"); return NULL; }
    PyObject *g = cyc_tuple(&best[0], ny, ne, lo, elo, order2), *o = cyc_tuple(&best[1], ny, ne, lo, elo, order2);
    if (!g || !o) { Py_XDECREF(g); Py_XDECREF(o); return NULL; }
    return Py_BuildValue("LNN", (long long)n, g, o);
}

/* coupled_cycles(A11, A12, A21, A22, k, acc_bits, rounding, overflow, width, B1, B2, max_states)
 *     -> None when the box holds more than max_states states, else (s1 bytes, s2 bytes, n)
 *
 * Every state on a zero-input cycle of a coupled-form section (coefc.analyse.coupled_cycles)
 * that stays inside the box |S1| <= B1, |S2| <= B2, as native int64 bytes in the order of
 * (S1, S2); n is the number of states of the box.  One step:
 *   t_i = Ai1 S1 + Ai2 S2 (exact in int64: the caller makes the data and coefficient words
 *   together at most 62 bits wide);  w_i = the low acc_bits of t_i, sign-extended;
 *   S_i' = fit_data(round_shift(w_i, k)).
 * A step that wraps the accumulator (w_i != t_i) or changes a value in fit_data, or whose
 * image leaves the box, has no successor (as the numpy search it replaces).  The map on the
 * box is then a function on a finite set and every state is visited once (marks as in
 * cycle_region): 0 new, 1 on the current path, 2 done, 3 on a cycle. */
static inline int64_t cc_step(int64_t s1, int64_t s2, int64_t c1, int64_t c2, const arith_t *ar, int *bad)
{
    int64_t t = c1 * s1 + c2 * s2;
    int64_t w = ar->acc_bits >= 64 ? t : sext((uint64_t)t, ar->acc_bits);
    if (w != t) *bad = 1;
    int64_t v = rshift(w, ar);
    int64_t f = v;
    if (v > ar->hi || v < ar->lo) {
        *bad = 1;
        f = ar->overflow == 0 ? (v > ar->hi ? ar->hi : ar->lo) : sext((uint64_t)v, ar->width);
    }
    return f;
}

static PyObject *py_coupled_cycles(PyObject *self, PyObject *args)
{
    long long a11, a12, a21, a22, B1, B2, max_states;
    int k, acc_bits, rounding, overflow, width;
    if (!PyArg_ParseTuple(args, "LLLLiiiiiLLL", &a11, &a12, &a21, &a22, &k, &acc_bits, &rounding, &overflow, &width,
                          &B1, &B2, &max_states))
        return NULL;
    arith_t ar;
    if (arith_init(&ar, k, acc_bits, rounding, overflow, width) < 0) return NULL;
    if (B1 < 0 || B2 < 0 || B1 > (INT64_C(1) << 40) || B2 > (INT64_C(1) << 40) || width > 61 ||
        max_states > (INT64_C(1) << 34)) {
        PyErr_SetString(PyExc_ValueError, "engine: coupled_cycles box out of range");
        return NULL;
    }
    const int64_t n2 = 2 * B2 + 1, n = (2 * B1 + 1) * n2;
    if ((2 * B1 + 1) > max_states / n2 + 1 || n > max_states) Py_RETURN_NONE;
    uint8_t *mark = PyMem_Calloc((size_t)n, 1);
    if (!mark) return PyErr_NoMemory();
    int64_t found = 0;
    Py_BEGIN_ALLOW_THREADS
#define CC_NEXT(s1, s2, i) do { int bad_ = 0; \
        int64_t u1_ = cc_step((s1), (s2), a11, a12, &ar, &bad_), u2_ = cc_step((s1), (s2), a21, a22, &ar, &bad_); \
        (s1) = u1_; (s2) = u2_; \
        (i) = (bad_ || u1_ < -B1 || u1_ > B1 || u2_ < -B2 || u2_ > B2) ? -1 : (u1_ + B1) * n2 + (u2_ + B2); } while (0)
    for (int64_t s = 0; s < n; s++) {
        if (mark[s]) continue;
        int64_t c = s, nx, c1 = s / n2 - B1, c2 = s % n2 - B2;
        for (;;) {
            mark[c] = 1;
            CC_NEXT(c1, c2, nx);
            if (nx < 0 || mark[nx] != 0) break;
            c = nx;
        }
        if (nx >= 0 && mark[nx] == 1) { /* a new cycle through nx */
            int64_t x = nx, x1 = nx / n2 - B1, x2 = nx % n2 - B2;
            do {
                mark[x] = 3;
                found++;
                CC_NEXT(x1, x2, x);
            } while (x != nx);
        }
        for (int64_t x = s, x1 = s / n2 - B1, x2 = s % n2 - B2; x >= 0 && mark[x] == 1;) {
            mark[x] = 2;
            CC_NEXT(x1, x2, x);
        }
    }
#undef CC_NEXT
    Py_END_ALLOW_THREADS
    int64_t *o = PyMem_Malloc(sizeof(int64_t) * 2 * (found ? found : 1));
    if (!o) { PyMem_Free(mark); return PyErr_NoMemory(); }
    int64_t j = 0;
    for (int64_t s = 0; s < n; s++)
        if (mark[s] == 3) { o[j] = s / n2 - B1; o[found + j] = s % n2 - B2; j++; }
    PyMem_Free(mark);
    PyObject *r = Py_BuildValue("y#y#L", (const char *)o, (Py_ssize_t)(found * 8), (const char *)(o + found),
                                (Py_ssize_t)(found * 8), (long long)n);
    PyMem_Free(o);
    return r;
}

/* walk(y1, y2, E, A1, A2, k, acc_bits, rounding, overflow, width, ef, limit) -> None or bytes
 *
 * Follow one state (y1, y2, E) of the zero-input map, y2 taking the old y1 (E stays 0
 * unless ef), until a state repeats.  Returns the states of the cycle reached, from
 * the first one the walk meets, as native int64 triples (y1, y2, E); None when the
 * walk has not closed within `limit` distinct states (tail plus period >= limit).
 * Brent's cycle detection: no memory beyond two states. */
static PyObject *py_walk(PyObject *self, PyObject *args)
{
    long long y1, y2, e, a1, a2, limit;
    int k, acc_bits, rounding, overflow, width, ef;
    if (!PyArg_ParseTuple(args, "LLLLLiiiiiiL", &y1, &y2, &e, &a1, &a2, &k, &acc_bits, &rounding, &overflow, &width,
                          &ef, &limit))
        return NULL;
    arith_t ar;
    if (arith_init(&ar, k, acc_bits, rounding, overflow, width) < 0) return NULL;
    const uint64_t ua1 = (uint64_t)a1, ua2 = (uint64_t)a2;
    int64_t acc, v;
    uint64_t u;
#define WK_STEP(p) do { int64_t n_ = zi_step((p)[0], (p)[1], (p)[2], ua1, ua2, &ar, &acc, &v, &u); \
        (p)[2] = ef ? (int64_t)((uint64_t)acc - ((uint64_t)v << k)) : 0; (p)[1] = (p)[0]; (p)[0] = n_; } while (0)
#define WK_EQ(p, q) ((p)[0] == (q)[0] && (p)[1] == (q)[1] && (p)[2] == (q)[2])
    int64_t x0[3] = {y1, y2, ef ? e : 0}, t[3], h[3];
    int64_t power = 1, lam = 1, steps = 1, mu = 0, cap = 4 * (limit > 0 ? limit : 0) + 8;
    int closed = 1;
    memcpy(t, x0, sizeof t); memcpy(h, x0, sizeof h);
    Py_BEGIN_ALLOW_THREADS
    WK_STEP(h);
    while (!WK_EQ(t, h)) {
        if (power == lam) { memcpy(t, h, sizeof t); power *= 2; lam = 0; }
        WK_STEP(h);
        lam++;
        if (++steps > cap) { closed = 0; break; }
    }
    if (closed) {
        memcpy(t, x0, sizeof t); memcpy(h, x0, sizeof h);
        for (int64_t i = 0; i < lam; i++) WK_STEP(h);
        while (!WK_EQ(t, h)) { WK_STEP(t); WK_STEP(h); mu++; }
    }
    Py_END_ALLOW_THREADS
    if (!closed || mu + lam >= limit) Py_RETURN_NONE;
    int64_t *out = PyMem_Malloc(sizeof(int64_t) * 3 * lam);
    if (!out) return PyErr_NoMemory();
    for (int64_t i = 0; i < lam; i++) { memcpy(out + 3 * i, t, sizeof t); WK_STEP(t); }
#undef WK_STEP
#undef WK_EQ
    PyObject *r = PyBytes_FromStringAndSize((const char *)out, (Py_ssize_t)(24 * lam));
    PyMem_Free(out);
    return r;
}

/* ------------------------------------------------------------ float32 ops */

static PyObject *py_sos_f32(PyObject *self, PyObject *args)
{
    PyObject *xo, *yo;
    double d[5];
    int structure;
    if (!PyArg_ParseTuple(args, "OOdddddi", &xo, &yo, &d[0], &d[1], &d[2], &d[3], &d[4], &structure)) return NULL;
    Py_buffer xb, yb;
    if (get_xy(xo, yo, &xb, &yb, 'f') < 0) return NULL;
    const float b0 = (float)d[0], b1 = (float)d[1], b2 = (float)d[2], a1 = (float)d[3], a2 = (float)d[4];
    Py_ssize_t n = xb.len / 4;
    const float *x = (const float *)xb.buf;
    float *y = (float *)yb.buf;
    Py_BEGIN_ALLOW_THREADS
    if (structure == 1) {
        float s1 = 0.0f, s2 = 0.0f;
        for (Py_ssize_t i = 0; i < n; i++) {
            float xn = x[i];
            float yn = b0 * xn + s1;
            s1 = (b1 * xn - a1 * yn) + s2;
            s2 = b2 * xn - a2 * yn;
            y[i] = yn;
        }
    } else {
        float x1 = 0.0f, x2 = 0.0f, y1 = 0.0f, y2 = 0.0f;
        for (Py_ssize_t i = 0; i < n; i++) {
            float xn = x[i];
            float acc = b0 * xn;
            acc = acc + b1 * x1;
            acc = acc + b2 * x2;
            acc = acc - a1 * y1;
            acc = acc - a2 * y2;
            y[i] = acc;
            x2 = x1; x1 = xn; y2 = y1; y1 = acc;
        }
    }
    Py_END_ALLOW_THREADS
    PyBuffer_Release(&xb); PyBuffer_Release(&yb);
    Py_RETURN_NONE;
}

static PyObject *py_fir_f32(PyObject *self, PyObject *args)
{
    PyObject *xo, *yo, *to;
    if (!PyArg_ParseTuple(args, "OOO", &xo, &yo, &to)) return NULL;
    Py_buffer xb, yb, tb;
    if (get_xy(xo, yo, &xb, &yb, 'f') < 0) return NULL;
    if (get_buf(to, &tb, 0, 'f', "taps") < 0) { PyBuffer_Release(&xb); PyBuffer_Release(&yb); return NULL; }
    Py_ssize_t n = xb.len / 4, nt = tb.len / 4;
    const float *x = (const float *)xb.buf, *t = (const float *)tb.buf;
    float *y = (float *)yb.buf;
    Py_BEGIN_ALLOW_THREADS
    for (Py_ssize_t i = 0; i < n; i++) {
        float acc = nt ? t[0] * x[i] : 0.0f;
        for (Py_ssize_t j = 1; j < nt; j++) acc = acc + t[j] * (i - j >= 0 ? x[i - j] : 0.0f);
        y[i] = acc;
    }
    Py_END_ALLOW_THREADS
    PyBuffer_Release(&xb); PyBuffer_Release(&yb); PyBuffer_Release(&tb);
    Py_RETURN_NONE;
}

static PyObject *py_gain_f32(PyObject *self, PyObject *args)
{
    PyObject *xo, *yo;
    double g;
    if (!PyArg_ParseTuple(args, "OOd", &xo, &yo, &g)) return NULL;
    Py_buffer xb, yb;
    if (get_xy(xo, yo, &xb, &yb, 'f') < 0) return NULL;
    const float gf = (float)g;
    Py_ssize_t n = xb.len / 4;
    const float *x = (const float *)xb.buf;
    float *y = (float *)yb.buf;
    for (Py_ssize_t i = 0; i < n; i++) y[i] = gf * x[i];
    PyBuffer_Release(&xb); PyBuffer_Release(&yb);
    Py_RETURN_NONE;
}

/* ------------------------------------------------------------ rounded products
 * Targets whose multiplier keeps only the high part of each product: every
 * product p is rounded to q(p) = round_shift(p, P) by the target's product
 * rounding before it is added (coefc/program.py, "product shift").  One op per
 * call, sample by sample; sums exact (wide_t), so accumulator overflows count as
 * in the exact-product ops.  kind 0/1/2 = df1/tdf2/df1ef (coefs B0 B1 B2 A1 A2),
 * 3 = FIR (coefs = taps), 4 = gain (coefs = C); k = the final shift, 0..62.
 */
static inline int64_t pround(int64_t v, int p, int mode)
{
    int64_t q = v >> p;
    uint64_t rem = (uint64_t)v & ((UINT64_C(1) << p) - 1), half = UINT64_C(1) << (p - 1);
    switch (mode) {
    case 0: return q + (rem >= half);
    case 1: return q;
    case 2: return q + (rem > half || (rem == half && (q & 1)));
    default: return q + (v < 0 && rem != 0);
    }
}

static PyObject *py_rounded_products(PyObject *self, PyObject *args)
{
    PyObject *xo, *yo, *co;
    int kind, k, P, prnd, acc_bits, rounding, overflow, width;
    if (!PyArg_ParseTuple(args, "OOOiiiiiiii", &xo, &yo, &co, &kind, &k, &P, &prnd, &acc_bits, &rounding,
                          &overflow, &width))
        return NULL;
    arith_t ar;
    /* arith_init needs k >= 1; k == 0 (no final shift) is handled here */
    if (arith_init(&ar, k < 1 ? 1 : k, acc_bits, rounding, overflow, width) < 0) return NULL;
    if (k < 0 || P < 1 || P > 62 || prnd < 0 || prnd > 3 || kind < 0 || kind > 4) {
        PyErr_SetString(PyExc_ValueError, "engine: rounded_products: k 0..62, P 1..62, kind 0..4");
        return NULL;
    }
    Py_buffer xb, yb, cb;
    if (get_xy(xo, yo, &xb, &yb, 'i') < 0) return NULL;
    if (get_buf(co, &cb, 0, 'i', "coefs") < 0) { PyBuffer_Release(&xb); PyBuffer_Release(&yb); return NULL; }
    Py_ssize_t n = xb.len / 8, nc = cb.len / 8;
    const int64_t *x = (const int64_t *)xb.buf, *c = (const int64_t *)cb.buf;
    int64_t *y = (int64_t *)yb.buf;
    long long ovf = 0, aovf = 0;
    if ((kind <= 2 && nc != 5) || (kind == 4 && nc != 1)) {
        PyBuffer_Release(&xb); PyBuffer_Release(&yb); PyBuffer_Release(&cb);
        PyErr_SetString(PyExc_ValueError, "engine: rounded_products: 5 coefficients per section, 1 per gain");
        return NULL;
    }
    Py_BEGIN_ALLOW_THREADS
    int64_t x1 = 0, x2 = 0, y1 = 0, y2 = 0, e = 0, s1 = 0, s2 = 0;
    for (Py_ssize_t i = 0; i < n; i++) {
        int64_t xn = x[i], acc, v, yn;
        wide_t w = {0, 0};
        if (kind == 3) {
            Py_ssize_t m = i + 1 < nc ? i + 1 : nc;
            for (Py_ssize_t j = 0; j < m; j++) wadd(&w, pround(c[j] * x[i - j], P, prnd));
        } else if (kind == 4) {
            wadd(&w, pround(c[0] * xn, P, prnd));
        } else if (kind == 1) {
            wadd(&w, pround(c[0] * xn, P, prnd)); wadd(&w, s1);
        } else {
            wadd(&w, pround(c[0] * xn, P, prnd)); wadd(&w, pround(c[1] * x1, P, prnd));
            wadd(&w, pround(c[2] * x2, P, prnd));
            wadd(&w, pround(-(c[3] * y1), P, prnd)); wadd(&w, pround(-(c[4] * y2), P, prnd));
            if (kind == 2) wadd(&w, e);
        }
        acc = wfinish(&w, &ar, &aovf);
        v = k == 0 ? acc : rshift(acc, &ar);
        yn = fit(v, &ar, &ovf);
        if (kind == 2) e = k == 0 ? 0 : (int64_t)((uint64_t)acc - ((uint64_t)v << k));
        if (kind == 1) {
            long long t1 = 0, t2 = 0;
            wide_t w1 = {0, 0}, w2 = {0, 0};
            wadd(&w1, pround(c[1] * xn, P, prnd)); wadd(&w1, pround(-(c[3] * yn), P, prnd)); wadd(&w1, s2);
            wadd(&w2, pround(c[2] * xn, P, prnd)); wadd(&w2, pround(-(c[4] * yn), P, prnd));
            s1 = wfinish(&w1, &ar, &t1);
            s2 = wfinish(&w2, &ar, &t2);
            /* one sample counts once, whichever of its three sums left the range */
            if ((t1 || t2) && !(w.c != 0 || (int64_t)w.s < ar.acc_lo || (int64_t)w.s > ar.acc_hi)) aovf++;
        }
        x2 = x1; x1 = xn; y2 = y1; y1 = yn;
        y[i] = yn;
    }
    Py_END_ALLOW_THREADS
    PyBuffer_Release(&xb); PyBuffer_Release(&yb); PyBuffer_Release(&cb);
    return Py_BuildValue("LL", ovf, aovf);
}

static PyMethodDef engine_methods[] = {
    {"rounded_products", py_rounded_products, METH_VARARGS,
     "rounded_products(x, y, coefs, kind, k, P, product_rounding, acc_bits, rounding, overflow, data_width)\n"
     "-> (ovf, acc_ovf): one op (0 df1, 1 tdf2, 2 df1ef, 3 FIR, 4 gain) with every product rounded by 2^P."},
    {"cascade", py_cascade, METH_VARARGS,
     "cascade(x, ys, coefs, structure, acc_bits, rounding, overflow, data_width) -> [(ovf, acc_ovf), ...]\n"
     "coefs: int64 buffer of B0, B1, B2, A1, A2, k per section; ys: one writable int64 buffer per section."},
    {"coupled", py_coupled, METH_VARARGS,
     "coupled(x, y, coefs[D, C1, C2, G, A11, A12, A21, A22, k], acc_bits, rounding, overflow, data_width) -> (ovf, acc_ovf)"},
    {"fir", py_fir, METH_VARARGS, "fir(x, y, taps, k, acc_bits, rounding, overflow, data_width) -> (ovf, acc_ovf)"},
    {"fir_rate", py_fir_rate, METH_VARARGS,
     "fir_rate(x, y, taps, down, up, k, acc_bits, rounding, overflow, data_width) -> (ovf, acc_ovf)\n"
     "polyphase FIR: len(y) = ceil(len(x) * up / down); only the kept outputs are computed."},
    {"cic", py_cic, METH_VARARGS,
     "cic(x, y, R, N, D, register_bits, C, k, rounding, overflow, data_width) -> (ovf, 0)\n"
     "CIC decimator: len(y) = ceil(len(x) / R); integrators and combs modulo 2^64, v from register_bits bits."},
    {"sos_wide", py_sos_wide, METH_VARARGS,
     "sos_wide(x, y, B0, B1, B2, A1H, A2H, A1L, A2L, L, k, acc_bits, rounding, overflow, data_width[, ef])\n"
     "-> (ovf, acc_ovf): one df1-wide-fb section (double-word feedback coefficients);\n"
     "ef = True (optional): df1ef-wide-fb (with first-order error feedback);\n"
     "B0L, B1L, B2L (optional, after ef): the numerator's low words (df1ef-wide)."},
    {"gain", py_gain, METH_VARARGS, "gain(x, y, C, k, acc_bits, rounding, overflow, data_width) -> (ovf, acc_ovf)"},
    {"sos_f32", py_sos_f32, METH_VARARGS, "sos_f32(x, y, b0, b1, b2, a1, a2, structure) -> None (float32)"},
    {"fir_f32", py_fir_f32, METH_VARARGS, "fir_f32(x, y, taps) -> None (float32)"},
    {"gain_f32", py_gain_f32, METH_VARARGS, "gain_f32(x, y, g) -> None (float32)"},
    {"zero_input", py_zero_input, METH_VARARGS,
     "zero_input(y1, y2, e, big, A1, A2, k, acc_bits, rounding, overflow, data_width, ef, order2, steps, tail,\n"
     "           check, gran) -> iterations done; the zero-input recursion of a section on int64 state\n"
     "buffers y1, y2, e (updated in place), float64 big (peak |y1| over the last `tail` iterations)."},
    {"cycle_region", py_cycle_region, METH_VARARGS,
     "cycle_region(A1, A2, k, acc_bits, rounding, overflow, data_width, B, D, S, order2) -> (y1, y2, n):\n"
     "every nonzero state on a zero-input cycle inside the candidate region (int64 bytes), n candidate states."},
    {"whole_cycles", py_whole_cycles, METH_VARARGS,
     "whole_cycles(A1, A2, k, acc_bits, rounding, overflow, data_width, order2, ef, elo, ehi, max_states)\n"
     "-> (n, granular, overflow), each None or (amplitude, period, y1, y2, E); None when n > max_states."},
    {"coupled_cycles", py_coupled_cycles, METH_VARARGS,
     "coupled_cycles(A11, A12, A21, A22, k, acc_bits, rounding, overflow, data_width, B1, B2, max_states)\n"
     "-> None (box above max_states) or (s1, s2, n): every state on a zero-input cycle of a coupled-form\n"
     "section inside |S1| <= B1, |S2| <= B2 (int64 bytes, in the order of (S1, S2)), n box states."},
    {"lanes", py_lanes, METH_VARARGS,
     "lanes([on]) -> bool: whether cascades run eight sections at once on 512-bit lanes (on = 0: never,\n"
     "1: where the processor has AVX-512F/DQ; without an argument only the query)."},
    {"walk", py_walk, METH_VARARGS,
     "walk(y1, y2, E, A1, A2, k, acc_bits, rounding, overflow, data_width, ef, limit) -> None or the cycle\n"
     "reached from one zero-input state, as int64 triples (y1, y2, E), from the first cycle state met."},
    {NULL, NULL, 0, NULL}};

static struct PyModuleDef engine_module = {
    PyModuleDef_HEAD_INIT, "_engine",
    "Compiled core of coefc's bit-true engine (see coefc.simulate and coefc.program).", -1, engine_methods};

PyMODINIT_FUNC PyInit__engine(void) { return PyModule_Create(&engine_module); }
