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

/* two channels, two sections (K-weighting of a stereo block): everything in registers */
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

/* x (input) and y (output, may be x itself): (C, n) C order; z: (C, S, 2) C order; sos: (S, 6)
 * with a0 = 1.  Each sample is read before its output is written, so in place is safe. */
static void run(const double *sos, const double *xin, double *y, double *z, Py_ssize_t C, Py_ssize_t n,
                Py_ssize_t S)
{
    Py_ssize_t c0 = 0;
    if (S == 2) {
        for (; c0 + 1 < C; c0 += 2)
            stereo2(sos, xin + c0 * n, xin + (c0 + 1) * n, y + c0 * n, y + (c0 + 1) * n, z + c0 * 4,
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
    {NULL, NULL, 0, NULL}
};

static struct PyModuleDef module = {PyModuleDef_HEAD_INIT, "_cascade", NULL, -1, methods, NULL, NULL, NULL, NULL};

PyMODINIT_FUNC PyInit__cascade(void) { return PyModule_Create(&module); }
