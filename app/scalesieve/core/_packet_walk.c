/* The wavelet packet tree of one time piece, every depth, and the raw moment
 * sums of each node's coefficients in fixed units: the compiled core of the
 * kurtosis table (scalesieve/core/packet_walk.py explains the plan).
 *
 * A child coefficient is PyWavelets' own, bit for bit: output o of a parent
 * row is  sum_{j=0}^{F-1} parent[2o+1-j] * filter[j],  added in the order
 * j = 0, 1, ..., F-1 from 0.0 (the order of PyWavelets' convolution), with no
 * fused multiply-add (the build asks for -ffp-contract=off).  Only outputs
 * whose taps all lie inside the parent are made here; the caller keeps the
 * boundary ones to PyWavelets.
 *
 * The sums of a unit are taken in eight lanes, lane L adding the values at
 * i = L, L + 8, ... in order, the lanes then joined pairwise and the last
 * values added one by one: a fixed order, so the figures do not depend on how
 * the work is shared among threads.
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <stdint.h>

/* outputs per block; the parent's samples of a block are split into even and odd */
#define OUT_BLOCK 512
/* the longest filter handled */
#define MAX_TAPS 128

#if defined(__GNUC__) && !defined(__clang__) && defined(__x86_64__) && defined(__linux__)
#define CLONES __attribute__((target_clones("avx2", "default")))
#else
#define CLONES
#endif

#define DEFINE_KERNEL(F)                                                            \
    CLONES static void kernel_##F(const double *restrict ev, const double *restrict od, \
                                  const double *restrict lo, const double *restrict hi, \
                                  double *restrict a, double *restrict d, Py_ssize_t m) \
    {                                                                               \
        for (Py_ssize_t k = 0; k < m; k++) {                                        \
            double p = 0.0, q = 0.0;                                                \
            _Pragma("GCC unroll 32")                                                \
            for (int j = 0; j < F; j++) {                                           \
                const int t = F - 1 - j;                                            \
                const double v = (t & 1) ? od[k + t / 2] : ev[k + t / 2];           \
                p += v * lo[j];                                                     \
                q += v * hi[j];                                                     \
            }                                                                       \
            a[k] = p;                                                               \
            d[k] = q;                                                               \
        }                                                                           \
    }

DEFINE_KERNEL(2)
DEFINE_KERNEL(4)
DEFINE_KERNEL(6)
DEFINE_KERNEL(8)
DEFINE_KERNEL(10)
DEFINE_KERNEL(12)
DEFINE_KERNEL(14)
DEFINE_KERNEL(16)
DEFINE_KERNEL(18)
DEFINE_KERNEL(20)

/* any even length up to MAX_TAPS, the same order */
CLONES static void kernel_any(const double *restrict ev, const double *restrict od,
                              const double *restrict lo, const double *restrict hi,
                              double *restrict a, double *restrict d, Py_ssize_t m, int F)
{
    for (Py_ssize_t k = 0; k < m; k++) {
        double p = 0.0, q = 0.0;
        for (int j = 0; j < F; j++) {
            const int t = F - 1 - j;
            const double v = (t & 1) ? od[k + t / 2] : ev[k + t / 2];
            p += v * lo[j];
            q += v * hi[j];
        }
        a[k] = p;
        d[k] = q;
    }
}

static void run_kernel(const double *ev, const double *od, const double *lo, const double *hi,
                       double *a, double *d, Py_ssize_t m, int F)
{
    switch (F) {
    case 2: kernel_2(ev, od, lo, hi, a, d, m); break;
    case 4: kernel_4(ev, od, lo, hi, a, d, m); break;
    case 6: kernel_6(ev, od, lo, hi, a, d, m); break;
    case 8: kernel_8(ev, od, lo, hi, a, d, m); break;
    case 10: kernel_10(ev, od, lo, hi, a, d, m); break;
    case 12: kernel_12(ev, od, lo, hi, a, d, m); break;
    case 14: kernel_14(ev, od, lo, hi, a, d, m); break;
    case 16: kernel_16(ev, od, lo, hi, a, d, m); break;
    case 18: kernel_18(ev, od, lo, hi, a, d, m); break;
    case 20: kernel_20(ev, od, lo, hi, a, d, m); break;
    default: kernel_any(ev, od, lo, hi, a, d, m, F); break;
    }
}

/* outputs c0 .. c1-1 of a parent row whose first stored sample is global index pstart */
static void children(const double *parent, Py_ssize_t pstart, Py_ssize_t c0, Py_ssize_t c1,
                     const double *lo, const double *hi, int F, double *a, double *d,
                     double *ev, double *od)
{
    for (Py_ssize_t b0 = c0; b0 < c1; b0 += OUT_BLOCK) {
        const Py_ssize_t m = (c1 - b0 < OUT_BLOCK) ? c1 - b0 : OUT_BLOCK;
        const double *s = parent + (2 * b0 + 2 - F - pstart);
        const Py_ssize_t h = m + F / 2 - 1;
        for (Py_ssize_t k = 0; k < h; k++) {
            ev[k] = s[2 * k];
            od[k] = s[2 * k + 1];
        }
        run_kernel(ev, od, lo, hi, a + (b0 - c0), d + (b0 - c0), m, F);
    }
}

/* out[0..3] = sum c, c^2, c^3, c^4 over c[0 .. n-1], in the fixed order above */
CLONES static void moment_sums(const double *restrict c, Py_ssize_t n, double *restrict out)
{
    double l1[8] = {0}, l2[8] = {0}, l3[8] = {0}, l4[8] = {0};
    Py_ssize_t i = 0;
    for (; i + 8 <= n; i += 8) {
        for (int L = 0; L < 8; L++) {
            const double v = c[i + L], v2 = v * v;
            l1[L] += v;
            l2[L] += v2;
            l3[L] += v2 * v;
            l4[L] += v2 * v2;
        }
    }
    double r[4];
    double *ls[4] = {l1, l2, l3, l4};
    for (int s = 0; s < 4; s++) {
        double *l = ls[s];
        r[s] = ((l[0] + l[1]) + (l[2] + l[3])) + ((l[4] + l[5]) + (l[6] + l[7]));
    }
    for (; i < n; i++) {
        const double v = c[i], v2 = v * v;
        r[0] += v;
        r[1] += v2;
        r[2] += v2 * v;
        r[3] += v2 * v2;
    }
    out[0] = r[0];
    out[1] = r[1];
    out[2] = r[2];
    out[3] = r[3];
}

/* the sums of every unit inside [olo, ohi) of `nodes` rows of width w starting at
 * global index c0; units: `count + 1` ascending boundaries; out[(node*count + u)*4 ..] */
static int unit_sums(const double *rows, Py_ssize_t nodes, Py_ssize_t w, Py_ssize_t c0,
                     Py_ssize_t olo, Py_ssize_t ohi, const int64_t *units, Py_ssize_t count,
                     double *out)
{
    Py_ssize_t u = 0;
    while (u < count && units[u] < olo)
        u++;
    if (olo < ohi && (u == count || units[u] != olo))
        return -1;
    for (; u < count && units[u] < ohi; u++) {
        const Py_ssize_t a = units[u], b = units[u + 1];
        if (b > ohi || a < c0 || b > c0 + w)
            return -1;
        for (Py_ssize_t node = 0; node < nodes; node++)
            moment_sums(rows + node * w + (a - c0), b - a, out + (node * count + u) * 4);
    }
    return 0;
}

/* a C-contiguous buffer of obj (writable if asked); -1 with Python's error set */
static int get(PyObject *obj, Py_buffer *view, int writable)
{
    return PyObject_GetBuffer(obj, view, PyBUF_C_CONTIGUOUS | (writable ? PyBUF_WRITABLE : 0));
}

#define REQUIRE(cond, msg)                               \
    do {                                                 \
        if (!(cond)) {                                   \
            PyErr_SetString(PyExc_ValueError, msg);      \
            goto done;                                   \
        }                                                \
    } while (0)

/* walk(x, lo, hi, geom, depth, units, unit_off, out, out_base, work)
 *
 * x: float64, the whole signal; lo, hi: float64 filters (even length F);
 * geom: int64 [(depth+1) * 4]: per depth need_lo, need_hi, owned_lo, owned_hi
 *   (depth 0: the samples read; its owned pair unused);
 * units, unit_off: int64 unit boundaries of each depth, depth j's at
 *   units[unit_off[j] .. unit_off[j+1]-1];
 * out: float64, written at out_base[j] + (node*count_j + u)*4 for the units owned;
 * work: float64 scratch, at least 2*S + 2*(OUT_BLOCK + MAX_TAPS) where S is
 *   the largest 2^j * (need_hi - need_lo) of depths 1..depth.
 * Every child range must have all its taps inside the parent's stored samples.
 */
static PyObject *walk(PyObject *self, PyObject *args)
{
    PyObject *ox, *olo, *ohi, *ogeom, *ounits, *ouoff, *oout, *obase, *owork;
    int depth;
    Py_buffer x = {0}, lo = {0}, hi = {0}, geom = {0}, units = {0}, uoff = {0}, out = {0},
              base = {0}, work = {0};
    PyObject *result = NULL;
    (void)self;
    if (!PyArg_ParseTuple(args, "OOOOiOOOOO", &ox, &olo, &ohi, &ogeom, &depth, &ounits, &ouoff,
                          &oout, &obase, &owork))
        return NULL;
    if (get(ox, &x, 0) || get(olo, &lo, 0) || get(ohi, &hi, 0) ||
        get(ogeom, &geom, 0) || get(ounits, &units, 0) ||
        get(ouoff, &uoff, 0) || get(oout, &out, 1) ||
        get(obase, &base, 0) || get(owork, &work, 1))
        goto done;
    {
        const Py_ssize_t n = x.len / 8, F = lo.len / 8, nu = units.len / 8;
        const Py_ssize_t nout = out.len / 8, nwork = work.len / 8;
        const int64_t *g = (const int64_t *)geom.buf, *U = (const int64_t *)units.buf;
        const int64_t *uo = (const int64_t *)uoff.buf, *ob = (const int64_t *)base.buf;
        REQUIRE(depth >= 1 && depth <= 30, "depth out of range");
        REQUIRE(F >= 2 && F <= MAX_TAPS && F % 2 == 0 && hi.len == lo.len, "filters");
        REQUIRE(geom.len == (depth + 1) * 4 * 8 && uoff.len == (depth + 2) * 8 &&
                    base.len == (depth + 1) * 8, "plan sizes");
        REQUIRE(g[0] >= 0 && g[1] <= n && g[0] < g[1], "samples read");
        Py_ssize_t S = 0;
        for (int j = 1; j <= depth; j++) {
            const int64_t c0 = g[4 * j], c1 = g[4 * j + 1], p0 = g[4 * (j - 1)],
                          p1 = g[4 * (j - 1) + 1];
            REQUIRE(c0 < c1 && 2 * c0 + 2 - F >= p0 && 2 * c1 <= p1, "taps outside the parent");
            REQUIRE(uo[j] >= 0 && uo[j] < uo[j + 1] && uo[j + 1] <= nu, "units");
            const Py_ssize_t count = uo[j + 1] - uo[j] - 1;
            REQUIRE(ob[j] >= 0 && ob[j] + ((Py_ssize_t)1 << j) * count * 4 <= nout, "out size");
            const Py_ssize_t size = ((Py_ssize_t)1 << j) * (c1 - c0);
            if (size > S)
                S = size;
        }
        REQUIRE(nwork >= 2 * S + 2 * (OUT_BLOCK + MAX_TAPS), "work too small");
        const double *xs = (const double *)x.buf, *fl = (const double *)lo.buf,
                     *fh = (const double *)hi.buf;
        double *o = (double *)out.buf, *wk = (double *)work.buf;
        int bad = 0;
        Py_BEGIN_ALLOW_THREADS
        double *bufs[2] = {wk, wk + S};
        double *ev = wk + 2 * S, *od = ev + OUT_BLOCK + MAX_TAPS;
        const double *parent = xs + g[0];
        for (int j = 1; j <= depth && !bad; j++) {
            const int64_t c0 = g[4 * j], c1 = g[4 * j + 1], pstart = g[4 * (j - 1)];
            const Py_ssize_t w = c1 - c0, pw = g[4 * (j - 1) + 1] - pstart;
            double *dst = bufs[j & 1];
            const Py_ssize_t parents = (Py_ssize_t)1 << (j - 1);
            for (Py_ssize_t r = 0; r < parents; r++)
                children(parent + r * pw, pstart, c0, c1, fl, fh, (int)F, dst + 2 * r * w,
                         dst + (2 * r + 1) * w, ev, od);
            const Py_ssize_t count = uo[j + 1] - uo[j] - 1;
            if (unit_sums(dst, 2 * parents, w, c0, g[4 * j + 2], g[4 * j + 3], U + uo[j], count,
                          o + ob[j]) < 0)
                bad = 1;
            parent = dst;
        }
        Py_END_ALLOW_THREADS
        REQUIRE(!bad, "owned range not on unit boundaries");
        Py_INCREF(Py_None);
        result = Py_None;
    }
done:
    PyBuffer_Release(&x);
    PyBuffer_Release(&lo);
    PyBuffer_Release(&hi);
    PyBuffer_Release(&geom);
    PyBuffer_Release(&units);
    PyBuffer_Release(&uoff);
    PyBuffer_Release(&out);
    PyBuffer_Release(&base);
    PyBuffer_Release(&work);
    return result;
}

/* sums(rows, nodes, c0, owned_lo, owned_hi, units, out): unit sums of rows made elsewhere */
static PyObject *sums(PyObject *self, PyObject *args)
{
    PyObject *orows, *ounits, *oout;
    Py_ssize_t nodes, c0, olo, ohi;
    Py_buffer rows = {0}, units = {0}, out = {0};
    PyObject *result = NULL;
    (void)self;
    if (!PyArg_ParseTuple(args, "OnnnnOO", &orows, &nodes, &c0, &olo, &ohi, &ounits, &oout))
        return NULL;
    if (get(orows, &rows, 0) || get(ounits, &units, 0) ||
        get(oout, &out, 1))
        goto done;
    {
        const Py_ssize_t total = rows.len / 8, count = units.len / 8 - 1;
        REQUIRE(nodes >= 1 && total % nodes == 0 && count >= 1, "rows");
        REQUIRE(out.len / 8 >= nodes * count * 4, "out size");
        const Py_ssize_t w = total / nodes;
        int bad;
        Py_BEGIN_ALLOW_THREADS
        bad = unit_sums((const double *)rows.buf, nodes, w, c0, olo, ohi,
                        (const int64_t *)units.buf, count, (double *)out.buf);
        Py_END_ALLOW_THREADS
        REQUIRE(!bad, "owned range not on unit boundaries");
        Py_INCREF(Py_None);
        result = Py_None;
    }
done:
    PyBuffer_Release(&rows);
    PyBuffer_Release(&units);
    PyBuffer_Release(&out);
    return result;
}

static PyMethodDef methods[] = {
    {"walk", walk, METH_VARARGS, "Every node of one interior piece, depths 1..J, and its unit sums."},
    {"sums", sums, METH_VARARGS, "Unit sums of rows made elsewhere (the pieces at the ends)."},
    {NULL, NULL, 0, NULL},
};

static struct PyModuleDef module = {
    PyModuleDef_HEAD_INIT, "_packet_walk",
    "The compiled core of the kurtosis table (see scalesieve.core.packet_walk).", -1, methods,
};

PyMODINIT_FUNC PyInit__packet_walk(void)
{
    PyObject *m = PyModule_Create(&module);
    if (m != NULL) {
        PyModule_AddIntConstant(m, "OUT_BLOCK", OUT_BLOCK);
        PyModule_AddIntConstant(m, "MAX_TAPS", MAX_TAPS);
    }
    return m;
}
