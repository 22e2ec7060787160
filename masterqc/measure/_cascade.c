/* Cascaded biquad sections (transposed direct form II) over every channel of a block, in place.
 *
 * The recursion per section and sample is the one of masterqc/measure/iir.py:
 *     y  = b0 x + z0
 *     z0 = b1 x - a1 y + z1
 *     z1 = b2 x - a2 y
 * evaluated in that order in IEEE double precision, with no fused multiply-add (built with
 * -ffp-contract=off), so the output is bit for bit that of the plain-Python recursion and of
 * scipy's compiled kernel.  What differs is the loop order: the channels (and the sections)
 * advance together, sample by sample, so their independent recursions overlap in the
 * processor instead of running one channel after the other.  Optional: iir.py checks it
 * against the Python recursion when it loads and uses another kernel when it is absent.
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <math.h>
#include <stdint.h>
#ifdef __SSE2__
#include <emmintrin.h>
#endif

/* two channels, two sections (K-weighting of a stereo block): everything in registers (where SSE2
 * is available, stereo2_sse2 below runs instead: the same operations, one channel per lane) */
#ifndef __SSE2__
static void stereo2(const double *sos, const double *x0, const double *x1, double *y0, double *y1,
                    double *za, double *zb, Py_ssize_t n)
{
    const double p0 = sos[0], p1 = sos[1], p2 = sos[2], p4 = sos[4], p5 = sos[5];
    const double q0 = sos[6], q1 = sos[7], q2 = sos[8], q4 = sos[10], q5 = sos[11];
    double a00 = za[0], a01 = za[1], a10 = za[2], a11 = za[3];
    double b00 = zb[0], b01 = zb[1], b10 = zb[2], b11 = zb[3];
    for (Py_ssize_t i = 0; i < n; i++) {
        double x = x0[i], u = x1[i], t, v;
        t = p0 * x + a00; a00 = p1 * x - p4 * t + a01; a01 = p2 * x - p5 * t;
        v = p0 * u + b00; b00 = p1 * u - p4 * v + b01; b01 = p2 * u - p5 * v;
        x = t; u = v;
        t = q0 * x + a10; a10 = q1 * x - q4 * t + a11; a11 = q2 * x - q5 * t;
        v = q0 * u + b10; b10 = q1 * u - q4 * v + b11; b11 = q2 * u - q5 * v;
        y0[i] = t; y1[i] = v;
    }
    za[0] = a00; za[1] = a01; za[2] = a10; za[3] = a11;
    zb[0] = b00; zb[1] = b01; zb[2] = b10; zb[3] = b11;
}
#endif

#ifdef __SSE2__
/* stereo2 with the two channels in the two lanes of SSE2 registers: every lane does the scalar
 * loop's operations in the same order (IEEE double multiplies, adds and subtracts, no fused
 * multiply-add), so each channel's output is the same bits, with half the instructions */
static void stereo2_sse2(const double *sos, const double *x0, const double *x1, double *y0, double *y1,
                         double *za, double *zb, Py_ssize_t n)
{
    const __m128d p0 = _mm_set1_pd(sos[0]), p1 = _mm_set1_pd(sos[1]), p2 = _mm_set1_pd(sos[2]);
    const __m128d p4 = _mm_set1_pd(sos[4]), p5 = _mm_set1_pd(sos[5]);
    const __m128d q0 = _mm_set1_pd(sos[6]), q1 = _mm_set1_pd(sos[7]), q2 = _mm_set1_pd(sos[8]);
    const __m128d q4 = _mm_set1_pd(sos[10]), q5 = _mm_set1_pd(sos[11]);
    /* lane 0: channel a (za), lane 1: channel b (zb) */
    __m128d s00 = _mm_set_pd(zb[0], za[0]), s01 = _mm_set_pd(zb[1], za[1]);
    __m128d s10 = _mm_set_pd(zb[2], za[2]), s11 = _mm_set_pd(zb[3], za[3]);
    for (Py_ssize_t i = 0; i < n; i++) {
        __m128d x = _mm_set_pd(x1[i], x0[i]), t;
        t = _mm_add_pd(_mm_mul_pd(p0, x), s00);
        s00 = _mm_add_pd(_mm_sub_pd(_mm_mul_pd(p1, x), _mm_mul_pd(p4, t)), s01);
        s01 = _mm_sub_pd(_mm_mul_pd(p2, x), _mm_mul_pd(p5, t));
        x = t;
        t = _mm_add_pd(_mm_mul_pd(q0, x), s10);
        s10 = _mm_add_pd(_mm_sub_pd(_mm_mul_pd(q1, x), _mm_mul_pd(q4, t)), s11);
        s11 = _mm_sub_pd(_mm_mul_pd(q2, x), _mm_mul_pd(q5, t));
        _mm_storel_pd(y0 + i, t);
        _mm_storeh_pd(y1 + i, t);
    }
    _mm_storel_pd(za + 0, s00); _mm_storeh_pd(zb + 0, s00);
    _mm_storel_pd(za + 1, s01); _mm_storeh_pd(zb + 1, s01);
    _mm_storel_pd(za + 2, s10); _mm_storeh_pd(zb + 2, s10);
    _mm_storel_pd(za + 3, s11); _mm_storeh_pd(zb + 3, s11);
}
#define STEREO2 stereo2_sse2
#else
#define STEREO2 stereo2
#endif

/* x (input) and y (output, may be x itself): (C, n) C order; z: (C, S, 2) C order; sos: (S, 6)
 * with a0 = 1.  Each sample is read before its output is written, so in place is safe. */
static void run(const double *sos, const double *xin, double *y, double *z, Py_ssize_t C, Py_ssize_t n,
                Py_ssize_t S)
{
    Py_ssize_t c0 = 0;
    if (S == 2) {
        for (; c0 + 1 < C; c0 += 2)
            STEREO2(sos, xin + c0 * n, xin + (c0 + 1) * n, y + c0 * n, y + (c0 + 1) * n, z + c0 * 4,
                    z + (c0 + 1) * 4, n);
    }
    for (Py_ssize_t i = 0; i < n; i++) {
        for (Py_ssize_t c = c0; c < C; c++) {
            double x = xin[c * n + i];
            double *zc = z + c * S * 2;
            for (Py_ssize_t s = 0; s < S; s++) {
                const double *q = sos + 6 * s;
                double t = q[0] * x + zc[2 * s];
                zc[2 * s] = q[1] * x - q[4] * t + zc[2 * s + 1];
                zc[2 * s + 1] = q[2] * x - q[5] * t;
                x = t;
            }
            y[c * n + i] = x;
        }
    }
}

static PyObject *cascade(PyObject *self, PyObject *args)
{
    Py_buffer sos, y, z;
    Py_ssize_t C, n, S;
    (void)self;
    if (!PyArg_ParseTuple(args, "y*w*w*nnn", &sos, &y, &z, &C, &n, &S))
        return NULL;
    if (C < 0 || n < 0 || S < 0 || sos.len != (Py_ssize_t)(S * 6 * sizeof(double)) ||
        y.len != (Py_ssize_t)(C * n * sizeof(double)) || z.len != (Py_ssize_t)(C * S * 2 * sizeof(double))) {
        PyBuffer_Release(&sos);
        PyBuffer_Release(&y);
        PyBuffer_Release(&z);
        PyErr_SetString(PyExc_ValueError, "cascade: buffer sizes do not match (channels, frames, sections)");
        return NULL;
    }
    Py_BEGIN_ALLOW_THREADS
    run((const double *)sos.buf, (const double *)y.buf, (double *)y.buf, (double *)z.buf, C, n, S);
    Py_END_ALLOW_THREADS
    PyBuffer_Release(&sos);
    PyBuffer_Release(&y);
    PyBuffer_Release(&z);
    Py_RETURN_NONE;
}

/* the same recursion from x (read only) into y: no copy of the input first */
static PyObject *cascade_into(PyObject *self, PyObject *args)
{
    Py_buffer sos, x, y, z;
    Py_ssize_t C, n, S;
    (void)self;
    if (!PyArg_ParseTuple(args, "y*y*w*w*nnn", &sos, &x, &y, &z, &C, &n, &S))
        return NULL;
    if (C < 0 || n < 0 || S < 0 || sos.len != (Py_ssize_t)(S * 6 * sizeof(double)) ||
        x.len != (Py_ssize_t)(C * n * sizeof(double)) || y.len != (Py_ssize_t)(C * n * sizeof(double)) ||
        z.len != (Py_ssize_t)(C * S * 2 * sizeof(double))) {
        PyBuffer_Release(&sos);
        PyBuffer_Release(&x);
        PyBuffer_Release(&y);
        PyBuffer_Release(&z);
        PyErr_SetString(PyExc_ValueError, "cascade_into: buffer sizes do not match (channels, frames, sections)");
        return NULL;
    }
    Py_BEGIN_ALLOW_THREADS
    run((const double *)sos.buf, (const double *)x.buf, (double *)y.buf, (double *)z.buf, C, n, S);
    Py_END_ALLOW_THREADS
    PyBuffer_Release(&sos);
    PyBuffer_Release(&x);
    PyBuffer_Release(&y);
    PyBuffer_Release(&z);
    Py_RETURN_NONE;
}

/* ---------------------------------------------------------------------------------------------
 * Group statistics of the true-peak meter's pre-screen (masterqc/measure/oversample.py), one pass
 * per channel row of a float32 buffer, exact (maxima of absolute values and of float32
 * differences, each rounded as numpy rounds them):
 *     ax[j]  = |x[j]|                                             (written over the row's L columns)
 *     gm[g]  = max |x[j]| over group g (columns g*G .. g*G + G - 1)
 *     gh[g]  = max |(x[j+1] - x[j]) - (x[j] - x[j-1])| over group g, 1 <= j <= L - 2 (0 at j = 0 and
 *              L - 1), each difference rounded to float32 as numpy's subtract rounds it
 *     nr[g]  = max |x[j]| over columns g*G - near .. g*G + G - 1 + near (clipped to 0 .. L - 1)
 * Returns False, with nothing promised about the outputs, when a sample is not finite (the caller
 * then takes numpy's path, whose NaN and infinity rules this loop does not reproduce).
 */
/* The maxima run on the bit patterns: for floats that are not NaN, |a| <= |b| exactly when the
 * bits of |a| (sign cleared) are <= those of |b| as unsigned integers, and every NaN or infinity
 * has bits >= 0x7f800000, so a group maximum at or above it marks a non-finite sample.  Integer
 * maxima vectorise; the two float32 subtractions of gh are done in float as numpy does them. */
#if defined(__GNUC__) && !defined(__clang__)
#define VECTORISE __attribute__((optimize("O3")))
#else
#define VECTORISE
#endif

typedef union { float f; uint32_t u; } f32bits;

/* the bits of |v| as a signed integer (the sign bit cleared, so never negative: signed
 * comparisons, which SSE2 has, order them as the unsigned ones would) */
static inline int32_t abs_bits(float v)
{
    f32bits b;
    b.f = v;
    return (int32_t)(b.u & 0x7fffffffu);
}

VECTORISE
static int32_t group_max_bits(const float *x, int32_t *ab, Py_ssize_t n)
{
    int32_t m = 0;
    for (Py_ssize_t j = 0; j < n; j++) {
        int32_t u = abs_bits(x[j]);
        ab[j] = u;
        m = u > m ? u : m;
    }
    return m;
}

VECTORISE
static int32_t group_max_second_diff_bits(const float *x, Py_ssize_t lo, Py_ssize_t hi)
{
    int32_t m = 0;
    for (Py_ssize_t j = lo; j < hi; j++) {
        float d1 = x[j + 1] - x[j];
        float d0 = x[j] - x[j - 1];
        int32_t u = abs_bits(d1 - d0);
        m = u > m ? u : m;
    }
    return m;
}

static int prescreen_row(const float *x, float *ax, float *gm, float *gh, float *nr,
                         Py_ssize_t L, Py_ssize_t G, Py_ssize_t near)
{
    Py_ssize_t ng = L / G;
    int32_t *ab = (int32_t *)ax, *gmb = (int32_t *)gm, *ghb = (int32_t *)gh, *nrb = (int32_t *)nr;
    int32_t top = 0;
    for (Py_ssize_t g = 0; g < ng; g++) {
        int32_t m = group_max_bits(x + g * G, ab + g * G, G);
        gmb[g] = m;
        top = m > top ? m : top;
    }
    if (top >= 0x7f800000)
        return 0;
    for (Py_ssize_t g = 0; g < ng; g++) {
        Py_ssize_t lo = g * G, hi = lo + G;
        if (lo < 1)
            lo = 1;
        if (hi > L - 1)
            hi = L - 1;
        ghb[g] = lo < hi ? group_max_second_diff_bits(x, lo, hi) : 0;
    }
    for (Py_ssize_t g = 0; g < ng; g++) {
        int32_t m = gmb[g];
        Py_ssize_t lo = g * G - near, hi = g * G + G + near;
        if (lo < 0)
            lo = 0;
        if (hi > L)
            hi = L;
        for (Py_ssize_t j = lo; j < g * G; j++)
            m = ab[j] > m ? ab[j] : m;
        for (Py_ssize_t j = g * G + G; j < hi; j++)
            m = ab[j] > m ? ab[j] : m;
        nrb[g] = m;
    }
    return 1;
}

static PyObject *prescreen(PyObject *self, PyObject *args)
{
    Py_buffer x, ax, gm, gh, nr;
    Py_ssize_t C, stride, L, G, near;
    int ok = 1;
    (void)self;
    if (!PyArg_ParseTuple(args, "y*w*w*w*w*nnnnn", &x, &ax, &gm, &gh, &nr, &C, &stride, &L, &G, &near))
        return NULL;
    Py_ssize_t ng = G > 0 ? L / G : 0;
    if (C < 0 || L < 0 || G <= 0 || near < 0 || near > G || L % G || stride < L ||
        x.len < (Py_ssize_t)(C * stride * sizeof(float)) || ax.len < (Py_ssize_t)(C * stride * sizeof(float)) ||
        gm.len < (Py_ssize_t)(C * ng * sizeof(float)) || gh.len < (Py_ssize_t)(C * ng * sizeof(float)) ||
        nr.len < (Py_ssize_t)(C * ng * sizeof(float))) {
        PyBuffer_Release(&x);
        PyBuffer_Release(&ax);
        PyBuffer_Release(&gm);
        PyBuffer_Release(&gh);
        PyBuffer_Release(&nr);
        PyErr_SetString(PyExc_ValueError, "prescreen: buffer sizes do not match (channels, stride, frames, group)");
        return NULL;
    }
    Py_BEGIN_ALLOW_THREADS
    for (Py_ssize_t c = 0; c < C && ok; c++)
        ok = prescreen_row((const float *)x.buf + c * stride, (float *)ax.buf + c * stride,
                           (float *)gm.buf + c * ng, (float *)gh.buf + c * ng, (float *)nr.buf + c * ng,
                           L, G, near);
    Py_END_ALLOW_THREADS
    PyBuffer_Release(&x);
    PyBuffer_Release(&ax);
    PyBuffer_Release(&gm);
    PyBuffer_Release(&gh);
    PyBuffer_Release(&nr);
    return PyBool_FromLong(ok);
}


/* ---------------------------------------------------------------------------------------------
 * Window sums of a channel pair (masterqc/measure/channels.py): for segments [cuts[k], cuts[k+1])
 * (the last one to n) of two float64 rows x and y, the sums of x*y, x*x and y*y, each exactly as
 * numpy's ``np.add.reduceat(x * y, cuts)`` adds them: the segment's first product, plus numpy's
 * pairwise sum of the others (8 accumulators over blocks of at most 128 values, halved at a
 * multiple of 8 above that; below 8 values a plain sum from -0.0).  The products are rounded as
 * numpy rounds them (no fused multiply-add, -ffp-contract=off).  The three sums walk the same
 * blocks together, so each block of the rows is read once.  Checked against numpy on load
 * (channels.py); numpy's path runs where the check fails.
 */
#define PW_BLOCK 128

static void pairwise3(const double *x, const double *y, Py_ssize_t n, double *sxy, double *sxx, double *syy)
{
    if (n < 8) {
        double a = -0.0, b = -0.0, c = -0.0;
        for (Py_ssize_t i = 0; i < n; i++) {
            a += x[i] * y[i];
            b += x[i] * x[i];
            c += y[i] * y[i];
        }
        *sxy = a; *sxx = b; *syy = c;
    }
    else if (n <= PW_BLOCK) {
        double ra[8], rb[8], rc[8], a, b, c;
        Py_ssize_t i;
        for (int j = 0; j < 8; j++) {
            ra[j] = x[j] * y[j];
            rb[j] = x[j] * x[j];
            rc[j] = y[j] * y[j];
        }
        for (i = 8; i < n - (n % 8); i += 8) {
            for (int j = 0; j < 8; j++) {
                double u = x[i + j], v = y[i + j];
                ra[j] += u * v;
                rb[j] += u * u;
                rc[j] += v * v;
            }
        }
        a = ((ra[0] + ra[1]) + (ra[2] + ra[3])) + ((ra[4] + ra[5]) + (ra[6] + ra[7]));
        b = ((rb[0] + rb[1]) + (rb[2] + rb[3])) + ((rb[4] + rb[5]) + (rb[6] + rb[7]));
        c = ((rc[0] + rc[1]) + (rc[2] + rc[3])) + ((rc[4] + rc[5]) + (rc[6] + rc[7]));
        for (; i < n; i++) {
            a += x[i] * y[i];
            b += x[i] * x[i];
            c += y[i] * y[i];
        }
        *sxy = a; *sxx = b; *syy = c;
    }
    else {
        Py_ssize_t n2 = n / 2;
        double a1, b1, c1, a2, b2, c2;
        n2 -= n2 % 8;
        pairwise3(x, y, n2, &a1, &b1, &c1);
        pairwise3(x + n2, y + n2, n - n2, &a2, &b2, &c2);
        *sxy = a1 + a2; *sxx = b1 + b2; *syy = c1 + c2;
    }
}

static PyObject *pair_sums(PyObject *self, PyObject *args)
{
    Py_buffer x, y, cuts, out;
    Py_ssize_t n, k;
    int bad = 0;
    (void)self;
    if (!PyArg_ParseTuple(args, "y*y*y*w*nn", &x, &y, &cuts, &out, &n, &k))
        return NULL;
    if (n < 1 || k < 1 || x.len != (Py_ssize_t)(n * sizeof(double)) || y.len != (Py_ssize_t)(n * sizeof(double)) ||
        cuts.len != (Py_ssize_t)(k * sizeof(int64_t)) || out.len != (Py_ssize_t)(3 * k * sizeof(double)))
        bad = 1;
    else {
        const int64_t *c = (const int64_t *)cuts.buf;
        for (Py_ssize_t i = 0; i < k && !bad; i++)
            if (c[i] < 0 || c[i] >= n || (i && c[i] <= c[i - 1]))
                bad = 1;
    }
    if (bad) {
        PyBuffer_Release(&x);
        PyBuffer_Release(&y);
        PyBuffer_Release(&cuts);
        PyBuffer_Release(&out);
        PyErr_SetString(PyExc_ValueError, "pair_sums: rows of n float64, k increasing cuts in [0, n), out (3, k)");
        return NULL;
    }
    Py_BEGIN_ALLOW_THREADS
    {
        const double *xp = (const double *)x.buf, *yp = (const double *)y.buf;
        const int64_t *c = (const int64_t *)cuts.buf;
        double *o = (double *)out.buf;
        for (Py_ssize_t i = 0; i < k; i++) {
            Py_ssize_t a = (Py_ssize_t)c[i], b = i + 1 < k ? (Py_ssize_t)c[i + 1] : n;
            double sxy, sxx, syy;
            pairwise3(xp + a + 1, yp + a + 1, b - a - 1, &sxy, &sxx, &syy);
            o[i] = xp[a] * yp[a] + sxy;
            o[k + i] = xp[a] * xp[a] + sxx;
            o[2 * k + i] = yp[a] * yp[a] + syy;
        }
    }
    Py_END_ALLOW_THREADS
    PyBuffer_Release(&x);
    PyBuffer_Release(&y);
    PyBuffer_Release(&cuts);
    PyBuffer_Release(&out);
    Py_RETURN_NONE;
}


/* ---------------------------------------------------------------------------------------------
 * Frozen-value candidates of one channel (masterqc/measure/silence.py): the positions j of a
 * float64 row where x[j] equals its predecessor (x[-1] = prev, the previous block's last sample,
 * NaN before the first block) or its successor, and the last position always (a run may go on
 * into the next block).  The comparisons are IEEE equality, as numpy's: NaN equals nothing,
 * -0.0 equals 0.0.  Writes the positions, increasing, into idx (room for n) and returns how many.
 */
#define ACTIVE_PIECE 256

/* whether v[j] == v[j + 1] for some j < m (reads v[0 .. m]); SSE2 where the compiler has it */
static int any_equal_next(const double *v, Py_ssize_t m)
{
    Py_ssize_t j = 0;
#ifdef __SSE2__
    __m128d acc = _mm_setzero_pd();
    for (; j + 8 <= m; j += 8) {
        __m128d e0 = _mm_cmpeq_pd(_mm_loadu_pd(v + j), _mm_loadu_pd(v + j + 1));
        __m128d e1 = _mm_cmpeq_pd(_mm_loadu_pd(v + j + 2), _mm_loadu_pd(v + j + 3));
        __m128d e2 = _mm_cmpeq_pd(_mm_loadu_pd(v + j + 4), _mm_loadu_pd(v + j + 5));
        __m128d e3 = _mm_cmpeq_pd(_mm_loadu_pd(v + j + 6), _mm_loadu_pd(v + j + 7));
        acc = _mm_or_pd(acc, _mm_or_pd(_mm_or_pd(e0, e1), _mm_or_pd(e2, e3)));
    }
    if (_mm_movemask_pd(acc))
        return 1;
#endif
    for (; j < m; j++)
        if (v[j] == v[j + 1])
            return 1;
    return 0;
}

static PyObject *active_positions(PyObject *self, PyObject *args)
{
    Py_buffer x, idx;
    double prev;
    Py_ssize_t n, k = 0;
    (void)self;
    if (!PyArg_ParseTuple(args, "y*dw*n", &x, &prev, &idx, &n))
        return NULL;
    if (n < 1 || x.len != (Py_ssize_t)(n * sizeof(double)) || idx.len < (Py_ssize_t)(n * sizeof(int64_t))) {
        PyBuffer_Release(&x);
        PyBuffer_Release(&idx);
        PyErr_SetString(PyExc_ValueError, "active_positions: a row of n float64 and room for n int64 positions");
        return NULL;
    }
    Py_BEGIN_ALLOW_THREADS
    {
        const double *v = (const double *)x.buf;
        int64_t *out = (int64_t *)idx.buf;
        /* pieces of ACTIVE_PIECE positions: most hold no equal neighbours (a vectorised test of
         * the piece's pairs); only the others are scanned position by position */
        for (Py_ssize_t a = 0; a < n - 1; a += ACTIVE_PIECE) {
            Py_ssize_t b = a + ACTIVE_PIECE < n - 1 ? a + ACTIVE_PIECE : n - 1;
            Py_ssize_t lo = a ? a - 1 : 0;
            int hit = (a == 0 && v[0] == prev) | any_equal_next(v + lo, b - lo);
            if (!hit)
                continue;
            for (Py_ssize_t j = a; j < b; j++) {
                double before = j ? v[j - 1] : prev;
                if (v[j] == before || v[j] == v[j + 1])
                    out[k++] = (int64_t)j;
            }
        }
        out[k++] = (int64_t)(n - 1);
    }
    Py_END_ALLOW_THREADS
    PyBuffer_Release(&x);
    PyBuffer_Release(&idx);
    return PyLong_FromSsize_t(k);
}


/* ---------------------------------------------------------------------------------------------
 * Loudness power of a K-weighted stereo block with unit channel weights
 * (masterqc/measure/loudness.py), the same bits as numpy's steps there:
 *     energy[c] = sum of y[c]^2 over the block          (np.square, then .sum(axis=1))
 *     p[j]      = y[0][j]^2 + y[1][j]^2                 ((1, 1) @ squares: exact either order)
 *     ticks[i]  = sum of p over [seg[i], seg[i+1])      (np.add.reduceat(p[:end], seg), the last
 *                                                        segment to end)
 *     rest      = sum of p over [end, n)                (p[end:].sum(); 0.0 when empty)
 * every sum in numpy's pairwise order (pairwise_sum below; reduceat: the first value plus the
 * pairwise sum of the others).  p is written into the caller's buffer.  Checked against numpy
 * on load (loudness.py); numpy's steps run where the check fails.
 */
VECTORISE
static double pairwise_sum(const double *a, Py_ssize_t n)
{
    if (n < 8) {
        double res = -0.0;
        for (Py_ssize_t i = 0; i < n; i++)
            res += a[i];
        return res;
    }
    else if (n <= PW_BLOCK) {
        double r[8], res;
        Py_ssize_t i;
        for (int j = 0; j < 8; j++)
            r[j] = a[j];
        for (i = 8; i < n - (n % 8); i += 8)
            for (int j = 0; j < 8; j++)
                r[j] += a[i + j];
        res = ((r[0] + r[1]) + (r[2] + r[3])) + ((r[4] + r[5]) + (r[6] + r[7]));
        for (; i < n; i++)
            res += a[i];
        return res;
    }
    else {
        Py_ssize_t n2 = n / 2;
        n2 -= n2 % 8;
        return pairwise_sum(a, n2) + pairwise_sum(a + n2, n - n2);
    }
}

/* the pairwise sum of x[j]^2 (each square rounded, as np.square rounds it) */
VECTORISE
static double pairwise_sum_sq(const double *a, Py_ssize_t n)
{
    if (n < 8) {
        double res = -0.0;
        for (Py_ssize_t i = 0; i < n; i++)
            res += a[i] * a[i];
        return res;
    }
    else if (n <= PW_BLOCK) {
        double r[8], res;
        Py_ssize_t i;
        for (int j = 0; j < 8; j++)
            r[j] = a[j] * a[j];
        for (i = 8; i < n - (n % 8); i += 8)
            for (int j = 0; j < 8; j++)
                r[j] += a[i + j] * a[i + j];
        res = ((r[0] + r[1]) + (r[2] + r[3])) + ((r[4] + r[5]) + (r[6] + r[7]));
        for (; i < n; i++)
            res += a[i] * a[i];
        return res;
    }
    else {
        Py_ssize_t n2 = n / 2;
        n2 -= n2 % 8;
        return pairwise_sum_sq(a, n2) + pairwise_sum_sq(a + n2, n - n2);
    }
}

VECTORISE
static PyObject *stereo_power(PyObject *self, PyObject *args)
{
    Py_buffer y, p, seg, ticks, out;
    Py_ssize_t n, k, end;
    int bad = 0;
    (void)self;
    if (!PyArg_ParseTuple(args, "y*w*y*w*w*nnn", &y, &p, &seg, &ticks, &out, &n, &k, &end))
        return NULL;
    if (n < 1 || k < 0 || end < 0 || end > n || (k == 0) != (end == 0) ||
        y.len != (Py_ssize_t)(2 * n * sizeof(double)) || p.len < (Py_ssize_t)(n * sizeof(double)) ||
        seg.len != (Py_ssize_t)(k * sizeof(int64_t)) || ticks.len != (Py_ssize_t)(k * sizeof(double)) ||
        out.len != (Py_ssize_t)(3 * sizeof(double)))
        bad = 1;
    else if (k) {
        const int64_t *sg = (const int64_t *)seg.buf;
        if (sg[0] != 0)
            bad = 1;
        for (Py_ssize_t i = 1; i < k && !bad; i++)
            if (sg[i] <= sg[i - 1])
                bad = 1;
        if (!bad && sg[k - 1] >= end)
            bad = 1;
    }
    if (bad) {
        PyBuffer_Release(&y);
        PyBuffer_Release(&p);
        PyBuffer_Release(&seg);
        PyBuffer_Release(&ticks);
        PyBuffer_Release(&out);
        PyErr_SetString(PyExc_ValueError, "stereo_power: y (2, n) float64, p (n), seg (k) increasing from 0 "
                                          "below end <= n, ticks (k), out (3)");
        return NULL;
    }
    Py_BEGIN_ALLOW_THREADS
    {
        const double *y0 = (const double *)y.buf, *y1 = y0 + n;
        double *pp = (double *)p.buf, *t = (double *)ticks.buf, *o = (double *)out.buf;
        const int64_t *sg = (const int64_t *)seg.buf;
        o[0] = pairwise_sum_sq(y0, n);
        o[1] = pairwise_sum_sq(y1, n);
        for (Py_ssize_t j = 0; j < n; j++)
            pp[j] = y0[j] * y0[j] + y1[j] * y1[j];
        for (Py_ssize_t i = 0; i < k; i++) {
            Py_ssize_t a = (Py_ssize_t)sg[i], b = i + 1 < k ? (Py_ssize_t)sg[i + 1] : end;
            t[i] = pp[a] + pairwise_sum(pp + a + 1, b - a - 1);
        }
        o[2] = end < n ? pairwise_sum(pp + end, n - end) : 0.0;
    }
    Py_END_ALLOW_THREADS
    PyBuffer_Release(&y);
    PyBuffer_Release(&p);
    PyBuffer_Release(&seg);
    PyBuffer_Release(&ticks);
    PyBuffer_Release(&out);
    Py_RETURN_NONE;
}

/* ---------------------------------------------------------------------------------------------
 * Integer PCM bytes to float64 (masterqc/audio/pcm.py), one pass: every sample's code, sign-extended
 * into the top bits of an int32 (16-bit codes << 16, 24-bit << 8, 32-bit as they are), times 2**-31,
 * which is how libsndfile scales integer PCM to double by default (the product of an integer and a
 * power of two: exact, so code / 2**(bits - 1) whichever way it is written).  Written both interleaved
 * (frames, channels) and planar (channels, frames), each C-ordered; planar may be an empty buffer
 * (not written).  width: bytes per sample (2, 3 or 4); big: 1 for big-endian samples (AIFF).
 */
#if defined(__GNUC__)
#define ALWAYS_INLINE inline __attribute__((always_inline))
#else
#define ALWAYS_INLINE inline
#endif
static ALWAYS_INLINE int32_t pcm_code(const unsigned char *b, int width, int big)
{
    uint32_t u;
    if (width == 3)
        u = big ? ((uint32_t)b[0] << 24 | (uint32_t)b[1] << 16 | (uint32_t)b[2] << 8)
                : ((uint32_t)b[2] << 24 | (uint32_t)b[1] << 16 | (uint32_t)b[0] << 8);
    else if (width == 2)
        u = big ? ((uint32_t)b[0] << 24 | (uint32_t)b[1] << 16) : ((uint32_t)b[1] << 24 | (uint32_t)b[0] << 16);
    else
        u = big ? ((uint32_t)b[0] << 24 | (uint32_t)b[1] << 16 | (uint32_t)b[2] << 8 | (uint32_t)b[3])
                : ((uint32_t)b[3] << 24 | (uint32_t)b[2] << 16 | (uint32_t)b[1] << 8 | (uint32_t)b[0]);
    return (int32_t)u;
}

/* always inlined, so each call with constant width and byte order becomes a loop of its own */
static ALWAYS_INLINE void pcm_rows(const unsigned char *s, double *o, double *pl, Py_ssize_t n, Py_ssize_t C,
                                   int width, int big)
{
    const double scale = 1.0 / 2147483648.0;
    if (C == 2 && pl) {                 /* stereo: both channels of a frame per step */
        double *p0 = pl, *p1 = pl + n;
        for (Py_ssize_t i = 0; i < n; i++) {
            double a = (double)pcm_code(s, width, big) * scale;
            double b = (double)pcm_code(s + width, width, big) * scale;
            s += 2 * width;
            o[2 * i] = a;
            o[2 * i + 1] = b;
            p0[i] = a;
            p1[i] = b;
        }
        return;
    }
    for (Py_ssize_t i = 0; i < n; i++) {
        for (Py_ssize_t c = 0; c < C; c++) {
            double v = (double)pcm_code(s, width, big) * scale;
            s += width;
            o[i * C + c] = v;
            if (pl)
                pl[c * n + i] = v;
        }
    }
}

static PyObject *pcm_to_double(PyObject *self, PyObject *args)
{
    Py_buffer src, inter, planar;
    Py_ssize_t n, C;
    int width, big;
    (void)self;
    if (!PyArg_ParseTuple(args, "y*w*w*nnii", &src, &inter, &planar, &n, &C, &width, &big))
        return NULL;
    if (n < 0 || C < 1 || (width != 2 && width != 3 && width != 4) ||
        src.len < (Py_ssize_t)(n * C * width) || inter.len != (Py_ssize_t)(n * C * sizeof(double)) ||
        (planar.len != 0 && planar.len != (Py_ssize_t)(n * C * sizeof(double)))) {
        PyBuffer_Release(&src);
        PyBuffer_Release(&inter);
        PyBuffer_Release(&planar);
        PyErr_SetString(PyExc_ValueError, "pcm_to_double: src (n * channels * width bytes), inter (n, channels) "
                                          "float64, planar (channels, n) float64 or empty, width 2, 3 or 4");
        return NULL;
    }
    Py_BEGIN_ALLOW_THREADS
    switch (width * 2 + big) {          /* each case a loop of its own, the byte order fixed in it */
    case 4: pcm_rows((const unsigned char *)src.buf, (double *)inter.buf, planar.len ? (double *)planar.buf : NULL, n, C, 2, 0); break;
    case 5: pcm_rows((const unsigned char *)src.buf, (double *)inter.buf, planar.len ? (double *)planar.buf : NULL, n, C, 2, 1); break;
    case 6: pcm_rows((const unsigned char *)src.buf, (double *)inter.buf, planar.len ? (double *)planar.buf : NULL, n, C, 3, 0); break;
    case 7: pcm_rows((const unsigned char *)src.buf, (double *)inter.buf, planar.len ? (double *)planar.buf : NULL, n, C, 3, 1); break;
    case 8: pcm_rows((const unsigned char *)src.buf, (double *)inter.buf, planar.len ? (double *)planar.buf : NULL, n, C, 4, 0); break;
    default: pcm_rows((const unsigned char *)src.buf, (double *)inter.buf, planar.len ? (double *)planar.buf : NULL, n, C, 4, 1); break;
    }
    Py_END_ALLOW_THREADS
    PyBuffer_Release(&src);
    PyBuffer_Release(&inter);
    PyBuffer_Release(&planar);
    Py_RETURN_NONE;
}

static PyMethodDef methods[] = {
    {"cascade", cascade, METH_VARARGS,
     "cascade(sos, y, z, channels, frames, sections): filter y (channels, frames) in place; "
     "z (channels, sections, 2) is the state, updated in place; every buffer C-ordered float64"},
    {"cascade_into", cascade_into, METH_VARARGS,
     "cascade_into(sos, x, y, z, channels, frames, sections): filter x (channels, frames) into y "
     "(same shape, not overlapping x unless it is x); z as for cascade"},
    {"prescreen", prescreen, METH_VARARGS,
     "prescreen(x, ax, gm, gh, nr, channels, stride, frames, group, near): the true-peak pre-screen's "
     "group statistics of x (channels rows of stride float32, the first frames used); False when a "
     "sample is not finite"},
    {"pair_sums", pair_sums, METH_VARARGS,
     "pair_sums(x, y, cuts, out, n, k): per segment of the cuts (int64, increasing, the last segment to n) "
     "the sums of x*y, x*x and y*y of two float64 rows, as np.add.reduceat of the products adds them, "
     "into out (3, k) float64"},
    {"active_positions", active_positions, METH_VARARGS,
     "active_positions(x, prev, idx, n): positions of a float64 row equal to a neighbour (prev before "
     "the first), and the last, into idx (int64, room for n); returns their count"},
    {"stereo_power", stereo_power, METH_VARARGS,
     "stereo_power(y, p, seg, ticks, out, n, k, end): channel energies, per-sample power p = y0^2 + y1^2, "
     "its sums over the segments seg (the last to end) and over [end, n), in numpy's summation order"},
    {"pcm_to_double", pcm_to_double, METH_VARARGS,
     "pcm_to_double(src, inter, planar, n, channels, width, big): n frames of integer PCM (width bytes per "
     "sample, big-endian when big) scaled as libsndfile scales them to double, into inter (n, channels) "
     "and, unless it is empty, planar (channels, n), both float64"},
    {NULL, NULL, 0, NULL}
};

static struct PyModuleDef module = {PyModuleDef_HEAD_INIT, "_cascade", NULL, -1, methods, NULL, NULL, NULL, NULL};

PyMODINIT_FUNC PyInit__cascade(void) { return PyModule_Create(&module); }
