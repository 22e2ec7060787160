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

/* two channels, two sections (K-weighting of a stereo block): everything in registers */
static void stereo2(const double *sos, double *y0, double *y1, double *za, double *zb, Py_ssize_t n)
{
    const double p0 = sos[0], p1 = sos[1], p2 = sos[2], p4 = sos[4], p5 = sos[5];
    const double q0 = sos[6], q1 = sos[7], q2 = sos[8], q4 = sos[10], q5 = sos[11];
    double a00 = za[0], a01 = za[1], a10 = za[2], a11 = za[3];
    double b00 = zb[0], b01 = zb[1], b10 = zb[2], b11 = zb[3];
    for (Py_ssize_t i = 0; i < n; i++) {
        double x = y0[i], u = y1[i], t, v;
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

/* y: (C, n) C order; z: (C, S, 2) C order; sos: (S, 6) with a0 = 1 */
static void run(const double *sos, double *y, double *z, Py_ssize_t C, Py_ssize_t n, Py_ssize_t S)
{
    Py_ssize_t c0 = 0;
    if (S == 2) {
        for (; c0 + 1 < C; c0 += 2)
            stereo2(sos, y + c0 * n, y + (c0 + 1) * n, z + c0 * 4, z + (c0 + 1) * 4, n);
    }
    for (Py_ssize_t i = 0; i < n; i++) {
        for (Py_ssize_t c = c0; c < C; c++) {
            double x = y[c * n + i];
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
    run((const double *)sos.buf, (double *)y.buf, (double *)z.buf, C, n, S);
    Py_END_ALLOW_THREADS
    PyBuffer_Release(&sos);
    PyBuffer_Release(&y);
    PyBuffer_Release(&z);
    Py_RETURN_NONE;
}

static PyMethodDef methods[] = {
    {"cascade", cascade, METH_VARARGS,
     "cascade(sos, y, z, channels, frames, sections): filter y (channels, frames) in place; "
     "z (channels, sections, 2) is the state, updated in place; every buffer C-ordered float64"},
    {NULL, NULL, 0, NULL}
};

static struct PyModuleDef module = {PyModuleDef_HEAD_INIT, "_cascade", NULL, -1, methods, NULL, NULL, NULL, NULL};

PyMODINIT_FUNC PyInit__cascade(void) { return PyModule_Create(&module); }
