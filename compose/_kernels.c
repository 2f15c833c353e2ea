/* compose._kernels: per-pixel loops of the window task in one pass each: the window statistics
 * (compose.measure), a palette's colours composited (compose.composite), the 8-bit conversion
 * (compose.engine) and the hillshade
 * (compose.layers.hillshade).
 *
 * Arrays come in through the buffer protocol only (any strides; the element type read from
 * the buffer's format character and item size), so nothing here depends on numpy's C API.
 * Every number is the one compose.measure's numpy path gives, bit for bit: the same float32
 * and float64 operations in the same order (IEEE 754; built with -ffp-contract=off so no
 * multiply and add are fused), and every sum is added pixel by pixel in row-major order, the
 * order np.bincount adds its weights in. tests/test_kernels.py compares the two paths.
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <math.h>
#include <stdint.h>
#include <string.h>

/* The hot loops below are also compiled for AVX2 (256-bit vectors) and chosen when the
 * process starts, by the CPU it runs on (GCC's target_clones; elsewhere the one plain build):
 * the same C, the same float32 operations (IEEE 754 results do not depend on the vector
 * width; -ffp-contract=off keeps multiplies and adds apart in every clone), so the same bits.
 * Measured on the 8192 benchmark walk here: the 8-bit conversion, the lookup-table index and
 * the relief levels in about half the time, the hillshade in four fifths. Loops made of
 * table look-ups and histograms (the palette composite, the statistics) ran slower so built
 * (AVX2 gathers), so they have the plain build only. */
#if defined(__GNUC__) && !defined(__clang__) && __GNUC__ >= 8 && defined(__x86_64__) \
    && defined(__linux__) && !defined(COMPOSE_NO_CLONES)
#define WIDE __attribute__((target_clones("avx2", "default")))
#else
#define WIDE
#endif

/* element kinds of a buffer */
enum { K_F32, K_F64, K_INT, K_UINT, K_BAD };

typedef struct {
    Py_buffer b;
    int held;
    int kind;
} Arr;

static int kind_of(const Py_buffer *b) {
    const char *f = b->format ? b->format : "B";
    if (*f == '@' || *f == '=' || *f == '<') f++;     /* native order (little-endian hosts) */
    if (f[0] == '\0' || f[1] != '\0') return K_BAD;
    switch (f[0]) {
        case 'f': return b->itemsize == 4 ? K_F32 : K_BAD;
        case 'd': return b->itemsize == 8 ? K_F64 : K_BAD;
        case 'b': case 'h': case 'i': case 'l': case 'q': case 'n': return K_INT;
        case 'B': case 'H': case 'I': case 'L': case 'Q': case 'N': return K_UINT;
        default: return K_BAD;
    }
}

/* Borrow ``o``'s buffer with ``ndim`` dimensions (and the kind wanted, or K_INT for any
 * integer type); Py_None gives an empty Arr when ``optional``. 0 on success. */
static int take(PyObject *o, Arr *a, int ndim, int want, int writable, int optional,
                const char *name) {
    a->held = 0;
    if (o == Py_None && optional) return 0;
    int flags = PyBUF_STRIDES | PyBUF_FORMAT | (writable ? PyBUF_WRITABLE : 0);
    if (PyObject_GetBuffer(o, &a->b, flags) < 0) return -1;
    a->held = 1;
    a->kind = kind_of(&a->b);
    int ok = a->b.ndim == ndim && a->kind != K_BAD
             && (want == K_INT ? (a->kind == K_INT || a->kind == K_UINT) : a->kind == want);
    if (!ok) {
        PyErr_Format(PyExc_TypeError, "%s: wrong type or number of dimensions", name);
        return -1;
    }
    return 0;
}

static void drop(Arr *a) {
    if (a->held) PyBuffer_Release(&a->b);
    a->held = 0;
}

#define AT(a, i) ((const char *)(a).b.buf + (i) * (a).b.strides[0])
#define AT2(a, i, j) ((const char *)(a).b.buf + (i) * (a).b.strides[0] + (j) * (a).b.strides[1])
#define AT3(a, i, j, k) ((const char *)(a).b.buf + (i) * (a).b.strides[0] + (j) * (a).b.strides[1] \
                         + (k) * (a).b.strides[2])

static inline __attribute__((always_inline)) int64_t read_int(const char *p, const Arr *a) {
    switch (a->b.itemsize) {
        case 1: return a->kind == K_INT ? (int64_t)*(const int8_t *)p : (int64_t)*(const uint8_t *)p;
        case 2: return a->kind == K_INT ? (int64_t)*(const int16_t *)p : (int64_t)*(const uint16_t *)p;
        case 4: return a->kind == K_INT ? (int64_t)*(const int32_t *)p : (int64_t)*(const uint32_t *)p;
        default: return *(const int64_t *)p;
    }
}

/* 8-bit code of a float32 sRGB value: x 255, clipped to [0, 255], rounded half to even
 * (np.clip, then np.rint into uint8; NaN gives 0) */
/* compose.composite.composite_over's float32 steps for one channel of one pixel: the mix
   Cs - Cb ('normal', multiply 0) or Cb Cs - Cb ('multiply', 1), times alpha a unless opaque,
   added to Cb, each step rounded to float32 as numpy's strips do. Inlined where multiply and
   opaque are constants, so the row loops that call it still vectorise. */
static inline __attribute__((always_inline)) float over(float cb, float cs, int multiply, int opaque, float a) {
    float m;
    if (multiply) { m = cb * cs; m -= cb; }
    else m = cs - cb;
    if (!opaque) m *= a;
    return cb + m;
}

static inline __attribute__((always_inline)) uint8_t code8(float v) {
    float x = v * 255.0f;
    x = x > 0.0f ? x : 0.0f;            /* NaN gives 0 too */
    x = x < 255.0f ? x : 255.0f;
    /* rintf without a call: adding 2**23 rounds a float32 in [0, 2**23) to an integer in the
       current rounding mode (to nearest, ties to even), as rintf does */
    float r = (x + 8388608.0f) - 8388608.0f;
    return (uint8_t)r;
}

/* code8 of one value without a branch (maxss and minss keep its NaN and clipping: maxss gives
 * its second operand unless the first is greater, so NaN and -0.0 give +0.0), for loops that
 * do not vectorise; the same value as code8 */
#if defined(__SSE__) || defined(__x86_64__)
#include <xmmintrin.h>
static inline __attribute__((always_inline)) uint8_t code8_one(float v) {
    __m128 x = _mm_mul_ss(_mm_set_ss(v), _mm_set_ss(255.0f));
    x = _mm_max_ss(x, _mm_setzero_ps());
    x = _mm_min_ss(x, _mm_set_ss(255.0f));
    float r = (_mm_cvtss_f32(x) + 8388608.0f) - 8388608.0f;
    return (uint8_t)r;
}
#else
#define code8_one code8
#endif

/* the tables both kernels look luminance and L* up in */
typedef struct {
    const float *ytab;          /* (3, 256) float32: each channel's share of luminance Y */
    const uint8_t *lbin;        /* (ncell,) rounded L* of each Y cell */
    Py_ssize_t ncell;
} Tables;

static int tables(PyObject *ytab_o, PyObject *lbin_o, Arr *ytab, Arr *lbin, Tables *t) {
    if (take(ytab_o, ytab, 2, K_F32, 0, 0, "ytab") < 0) return -1;
    if (take(lbin_o, lbin, 1, K_UINT, 0, 0, "lbin") < 0) return -1;
    if (!PyBuffer_IsContiguous(&ytab->b, 'C') || ytab->b.shape[0] != 3 || ytab->b.shape[1] != 256
        || !PyBuffer_IsContiguous(&lbin->b, 'C') || lbin->b.itemsize != 1 || lbin->b.shape[0] < 1
        || lbin->b.shape[0] > 65536) {
        PyErr_SetString(PyExc_ValueError,
                        "ytab must be (3, 256) float32, lbin (n,) uint8 with n <= 65536, contiguous");
        return -1;
    }
    /* each entry a share of luminance in [0, 1] (so a luminance and its Y cell stay small:
       y_cell) */
    const float *y = (const float *)ytab->b.buf;
    for (int i = 0; i < 3 * 256; i++) {
        if (!(y[i] >= 0.0f && y[i] <= 1.0f)) {
            PyErr_SetString(PyExc_ValueError, "ytab entries must lie in [0, 1]");
            return -1;
        }
    }
    t->ytab = (const float *)ytab->b.buf;
    t->lbin = (const uint8_t *)lbin->b.buf;
    t->ncell = lbin->b.shape[0];
    return 0;
}

/* luminance of an 8-bit colour: three table entries added in float32, in channel order */
static inline __attribute__((always_inline)) float luminance(const Tables *t, uint8_t r, uint8_t g, uint8_t b) {
    float y = t->ytab[r];
    y += t->ytab[256 + g];
    y += t->ytab[512 + b];
    return y;
}

/* the Y cell of a luminance: trunc(y * (ncell - 1) + 0.5) in float32, capped. A luminance
 * here is a sum of three table entries in [0, 1] and the tables have at most 65536 cells, so
 * the product fits int32: its 32-bit conversion is the same number and, measured in the
 * overlay's bins pass, about a tenth faster per pixel than a 64-bit one with its wider clamps */
static inline __attribute__((always_inline)) Py_ssize_t y_cell(const Tables *t, float y) {
    float s = y * (float)(t->ncell - 1);
    s += 0.5f;
    int32_t cell = (int32_t)s;
    const int32_t top = (int32_t)(t->ncell - 1);
    cell = cell > top ? top : cell;
    cell = cell < 0 ? 0 : cell;
    return cell;
}

/* rounded L* of a luminance by its Y cell */
static inline __attribute__((always_inline)) uint8_t lightness(const Tables *t, float y) {
    return t->lbin[y_cell(t, y)];
}

/* WCAG contrast bin of luminance y against y_part, as compose.measure._contrast_bins */
static inline Py_ssize_t contrast_bin(double y, double y_part, double step, Py_ssize_t n) {
    double ratio = y > y_part ? y : y_part;
    ratio += 0.05;
    double low = y < y_part ? y : y_part;
    low += 0.05;
    ratio /= low;
    ratio -= 1.0;
    ratio /= step;
    ratio += 1e-9;
    /* floor, then clipped to [0, n - 1]: truncation equals floor from 0 up */
    if (!(ratio >= 0)) return 0;
    if (ratio >= (double)(n - 1)) return n - 1;
    return (Py_ssize_t)ratio;
}

#if defined(__SSE2__)
#include <emmintrin.h>
#define COMPOSE_SSE2 1
/* for each pattern of 4 columns drawn (bit i: column i), the drawn ones' offsets in order */
static const int32_t DRAWN_AT[16][4] = {
    {0, 0, 0, 0}, {0, 0, 0, 0}, {1, 0, 0, 0}, {0, 1, 0, 0}, {2, 0, 0, 0}, {0, 2, 0, 0},
    {1, 2, 0, 0}, {0, 1, 2, 0}, {3, 0, 0, 0}, {0, 3, 0, 0}, {1, 3, 0, 0}, {0, 1, 3, 0},
    {2, 3, 0, 0}, {0, 2, 3, 0}, {1, 2, 3, 0}, {0, 1, 2, 3}};
static const int32_t DRAWN_COUNT[16] = {0, 1, 1, 2, 1, 2, 2, 3, 1, 2, 2, 3, 2, 3, 3, 4};
#endif

/* overlay's first pass where every row is contiguous (alpha's and each beneath plane's
 * columns 4 bytes apart), in a function of its own so that its pointers stay in registers: the
 * pixels drawn (alpha > 0) of rows r0..r1-1, columns c0..c1-1, in row-major order, their weights
 * to wbuf and 8-bit colours beneath to cbuf; the weights' range to range[0] (least) and
 * range[1] (largest). Returns their number. The same arithmetic as overlay's general loop. */
static __attribute__((noinline)) Py_ssize_t overlay_gather(
        const char *abase, Py_ssize_t arow, const char *pbase0, const char *pbase1,
        const char *pbase2, Py_ssize_t prow, Py_ssize_t r0, Py_ssize_t r1, Py_ssize_t c0,
        Py_ssize_t c1, int32_t *restrict cols, float *restrict wbuf, uint32_t *restrict cbuf,
        float *range) {
    Py_ssize_t pixels = 0;
    float wmin = range[0], wmax = range[1];
    for (Py_ssize_t i = r0; i < r1; i++) {
        const float *restrict a = (const float *)(abase + i * arow);
        const float *restrict p0 = (const float *)(pbase0 + i * prow);
        const float *restrict p1 = (const float *)(pbase1 + i * prow);
        const float *restrict p2 = (const float *)(pbase2 + i * prow);
        int32_t k = 0, j = (int32_t)c0;
#ifdef COMPOSE_SSE2
        /* four columns at a time: those drawn (a > 0, NaN not) written in order by a table of
           the 16 patterns (cols has room for 3 more) */
        const __m128 zero = _mm_setzero_ps();
        for (; j + 4 <= (int32_t)c1; j += 4) {
            int mask = _mm_movemask_ps(_mm_cmpgt_ps(_mm_loadu_ps(a + j), zero));
            __m128i at = _mm_add_epi32(_mm_set1_epi32(j),
                                       _mm_loadu_si128((const __m128i *)DRAWN_AT[mask]));
            _mm_storeu_si128((__m128i *)(cols + k), at);
            k += DRAWN_COUNT[mask];
        }
#endif
        for (; j < (int32_t)c1; j++) {
            cols[k] = j;
            k += (a[j] > 0.0f);
        }
        float *restrict wo = wbuf + pixels;
        uint32_t *restrict co = cbuf + pixels;
        int32_t q = 0;
#ifdef COMPOSE_SSE2
        /* four drawn pixels at a time: each channel's four values coded together (code8_one's
           steps on four lanes: x 255, maxps against 0 (NaN gives 0), minps against 255, the
           2**23 rounding, then exact integers converted), packed r << 16 | g << 8 | b */
        const __m128 k255 = _mm_set1_ps(255.0f), big = _mm_set1_ps(8388608.0f);
        __m128 vmin = _mm_set1_ps(wmin), vmax = _mm_set1_ps(wmax);     /* weights: > 0, no NaN */
        for (; q + 4 <= k; q += 4) {
            const int32_t j0 = cols[q], j1 = cols[q + 1], j2 = cols[q + 2], j3 = cols[q + 3];
            const __m128 x = _mm_setr_ps(a[j0], a[j1], a[j2], a[j3]);
            __m128i ch[3];
            const float *pl[3] = {p0, p1, p2};
            for (int c = 0; c < 3; c++) {
                const float *pc = pl[c];
                __m128 v = _mm_mul_ps(_mm_setr_ps(pc[j0], pc[j1], pc[j2], pc[j3]), k255);
                v = _mm_max_ps(v, _mm_setzero_ps());
                v = _mm_min_ps(v, k255);
                v = _mm_sub_ps(_mm_add_ps(v, big), big);
                ch[c] = _mm_cvttps_epi32(v);
            }
            __m128i rgb = _mm_or_si128(_mm_or_si128(_mm_slli_epi32(ch[0], 16),
                                                    _mm_slli_epi32(ch[1], 8)), ch[2]);
            _mm_storeu_si128((__m128i *)(co + q), rgb);
            _mm_storeu_ps(wo + q, x);
            vmin = _mm_min_ps(vmin, x);
            vmax = _mm_max_ps(vmax, x);
        }
        float lanes[4];
        _mm_storeu_ps(lanes, vmin);
        for (int t = 0; t < 4; t++) wmin = lanes[t] < wmin ? lanes[t] : wmin;
        _mm_storeu_ps(lanes, vmax);
        for (int t = 0; t < 4; t++) wmax = lanes[t] > wmax ? lanes[t] : wmax;
#endif
        for (; q < k; q++) {
            int32_t j = cols[q];
            float x = a[j];
            wmin = x < wmin ? x : wmin;
            wmax = x > wmax ? x : wmax;
            wo[q] = x;
            co[q] = ((uint32_t)code8_one(p0[j]) << 16) | ((uint32_t)code8_one(p1[j]) << 8)
                    | (uint32_t)code8_one(p2[j]);
        }
        pixels += k;
    }
    range[0] = wmin;
    range[1] = wmax;
    return pixels;
}

/* the luminance (ys) and Y cell (cells) of n 8-bit colours packed r << 16 | g << 8 | b, by
 * luminance and y_cell */
static inline __attribute__((always_inline)) void bins6_cells(
        const uint32_t *restrict cb, int n, const Tables *tp, float *restrict ys,
        Py_ssize_t *restrict cells) {
    const Tables t = *tp;
    for (int i = 0; i < n; i++) {
        uint32_t rgb = cb[i];
        float y = luminance(&t, (uint8_t)(rgb >> 16), (uint8_t)(rgb >> 8), (uint8_t)rgb);
        ys[i] = y;
        cells[i] = y_cell(&t, y);
    }
}

/* overlay's second pass with L* and beneath colours of 6 bits per channel (compose.check.stats
 * BENEATH_BITS), in a function of its own (pointers in registers, shifts constant): each
 * pixel's weight added to its contrast bin, its L* and its colour code, pixel by pixel, as
 * overlay's general loop adds them. Returns -1 when touched is too short, else the codes
 * touched; the weights' sum (added in the same order) to *total. The pixels go in blocks of
 * 256: first every luminance and Y cell of the block (bins6_cells: no histogram in that loop,
 * so the processor overlaps pixels), then the additions, in the same order as one loop makes
 * them. Measured on the 8192 benchmark walk's largest 60 windows (4.4 M pixels), best of 7:
 * 4.4-5.6 -> 3.8-4.3 ns a pixel in alternating runs, the same histograms bit for bit. */
static __attribute__((noinline)) Py_ssize_t overlay_bins6(
        const float *restrict wbuf, const uint32_t *restrict cbuf, Py_ssize_t pixels,
        const Tables *tp, const int16_t *restrict cbin, double y_part, double step,
        Py_ssize_t ncon, double *restrict contrast, double *restrict lsum,
        double *restrict dsum, Py_ssize_t *restrict tlist, Py_ssize_t tcap, double *total) {
    const uint8_t *restrict lbin = tp->lbin;
    Py_ssize_t nt = 0;
    double sum = 0.0;
    Py_ssize_t cells[256];
    float ys[256];
    for (Py_ssize_t p0 = 0; p0 < pixels; p0 += 256) {
        const int n = (int)(pixels - p0 < 256 ? pixels - p0 : 256);
        const uint32_t *restrict cb = cbuf + p0;
        bins6_cells(cb, n, tp, ys, cells);
        const float *restrict wb = wbuf + p0;
        for (int i = 0; i < n; i++) {
            double wgt = (double)wb[i];
            sum += wgt;
            Py_ssize_t cell = cells[i];
            Py_ssize_t bin = cbin[cell];
            if (bin < 0 || bin >= ncon) bin = contrast_bin((double)ys[i], y_part, step, ncon);
            contrast[bin] += wgt;
            lsum[lbin[cell]] += wgt;
            uint32_t rgb = cb[i];
            Py_ssize_t code = (Py_ssize_t)(((rgb >> 6) & 0x3f000u) | ((rgb >> 4) & 0xfc0u)
                                           | ((rgb >> 2) & 0x3fu));
            if (dsum[code] == 0.0) {
                if (nt >= tcap) return -1;
                tlist[nt++] = code;
            }
            dsum[code] += wgt;
        }
    }
    *total = sum;
    return nt;
}

/* overlay's second pass over the pixels gathered (wbuf, cbuf): each pixel's weight added to
 * its contrast bin, its L* (lsum, or NULL) and its beneath-colour code (dsum and tlist, or
 * NULL), pixel by pixel; the weights' sum to *total. Returns the codes touched, or -1 when
 * tlist is too short. */
static Py_ssize_t overlay_bins_all(
        const float *wbuf, const uint32_t *cbuf, Py_ssize_t pixels, const Tables *tp,
        const int16_t *cbin, double y_part, double step, Py_ssize_t ncon, double *contrast,
        double *lsum, double *dsum, Py_ssize_t *tlist, Py_ssize_t tcap, int bits, double *total) {
    if (bits == 6 && lsum && dsum)
        return overlay_bins6(wbuf, cbuf, pixels, tp, cbin, y_part, step, ncon, contrast, lsum,
                             dsum, tlist, tcap, total);
    const Tables t = *tp;
    const int shift = 8 - bits;
    Py_ssize_t nt = 0;
    double sum = 0.0;
    for (Py_ssize_t p = 0; p < pixels; p++) {
        double wgt = (double)wbuf[p];
        sum += wgt;
        uint32_t rgb = cbuf[p];
        uint32_t r = rgb >> 16, g = (rgb >> 8) & 255u, b = rgb & 255u;
        float y = luminance(&t, (uint8_t)r, (uint8_t)g, (uint8_t)b);
        Py_ssize_t cell = y_cell(&t, y);
        Py_ssize_t bin = cbin[cell];
        if (bin < 0 || bin >= ncon) bin = contrast_bin((double)y, y_part, step, ncon);
        contrast[bin] += wgt;
        if (lsum) lsum[t.lbin[cell]] += wgt;
        if (dsum) {
            Py_ssize_t code = ((Py_ssize_t)(r >> shift) << (2 * bits))
                              | ((Py_ssize_t)(g >> shift) << bits) | (Py_ssize_t)(b >> shift);
            if (dsum[code] == 0.0) {
                if (nt >= tcap) return -1;
                tlist[nt++] = code;
            }
            dsum[code] += wgt;
        }
    }
    *total = sum;
    return nt;
}

/* overlay's result: (pixels, codes touched, the weights' sum when every sum of them is exact
 * in any order (compose.measure._sums_exact: every weight a whole multiple of the lowest one's
 * float32 spacing u, and pixels x the largest below u x 2**53), else None) */
static PyObject *overlay_result(Py_ssize_t pixels, Py_ssize_t nt, double total, float wmin,
                                float wmax) {
    int exact = 0;
    if (pixels) {
        int e;
        frexpf(wmin, &e);
        exact = (double)pixels * (double)wmax < ldexp(1.0, e - 24) * 9007199254740992.0;
    }
    if (exact) return Py_BuildValue("nnd", pixels, nt, total);
    return Py_BuildValue("nnO", pixels, nt, Py_None);
}

PyDoc_STRVAR(overlay_doc,
"overlay(alpha, beneath, r0, r1, c0, c1, y_part, step, ytab, lbin, ctab, contrast, lightness,\n"
"        bits, dense, touched, scratch_w, scratch_c) -> (pixels, touched_count, total)\n\n"
"The beneath histograms of an overlay part over the core rows r0..r1-1, columns c0..c1-1:\n"
"for every pixel whose alpha (float32 (H, W)) is > 0, with weight float64(alpha), the colour\n"
"beneath (float32 planes (3, H, W)) as 8-bit codes; its WCAG contrast bin against luminance\n"
"y_part (bins of width step; ctab (int16, one per Y cell): the cell's bin, or -1 where it is\n"
"computed) added to contrast (float64 (n,)); its L* to lightness (float64\n"
"(101,) or None); its beneath-colour code (bits per channel) to dense (float64 (1 << 3 bits,),\n"
"zero where not touched yet; or None), each code first touched appended to touched (intp).\n"
"scratch_w (float32) and scratch_c (uint32), each at least the core's size, hold the pixels\n"
"drawn between the two passes. Returns the number of pixels and of codes touched, and the\n"
"weights' sum (float64, added pixel by pixel) when every sum of them is exact in any order\n"
"(compose.measure._sums_exact), else None.");

static PyObject *overlay(PyObject *self, PyObject *args) {
    PyObject *alpha_o, *beneath_o, *ytab_o, *lbin_o, *ctab_o, *contrast_o, *light_o, *dense_o,
        *touched_o, *sw_o, *sc_o;
    Py_ssize_t r0, r1, c0, c1;
    double y_part, step;
    int bits;
    if (!PyArg_ParseTuple(args, "OOnnnnddOOOOOiOOOO", &alpha_o, &beneath_o, &r0, &r1, &c0, &c1,
                          &y_part, &step, &ytab_o, &lbin_o, &ctab_o, &contrast_o, &light_o, &bits,
                          &dense_o, &touched_o, &sw_o, &sc_o))
        return NULL;
    Arr alpha = {0}, beneath = {0}, ytab = {0}, lbin = {0}, ctab = {0}, con = {0}, light = {0},
        dense = {0}, touched = {0}, scratch_w = {0}, scratch_c = {0};
    Tables t;
    PyObject *result = NULL;
    if (take(alpha_o, &alpha, 2, K_F32, 0, 0, "alpha") < 0
        || take(beneath_o, &beneath, 3, K_F32, 0, 0, "beneath") < 0
        || tables(ytab_o, lbin_o, &ytab, &lbin, &t) < 0
        || take(ctab_o, &ctab, 1, K_INT, 0, 0, "ctab") < 0
        || take(contrast_o, &con, 1, K_F64, 1, 0, "contrast") < 0
        || take(light_o, &light, 1, K_F64, 1, 1, "lightness") < 0
        || take(dense_o, &dense, 1, K_F64, 1, 1, "dense") < 0
        || take(touched_o, &touched, 1, K_INT, 1, 1, "touched") < 0
        || take(sw_o, &scratch_w, 1, K_F32, 1, 0, "scratch_w") < 0
        || take(sc_o, &scratch_c, 1, K_UINT, 1, 0, "scratch_c") < 0)
        goto done;
    Py_ssize_t h = alpha.b.shape[0], w = alpha.b.shape[1];
    if (beneath.b.shape[0] != 3 || beneath.b.shape[1] != h || beneath.b.shape[2] != w
        || r0 < 0 || c0 < 0 || r1 > h || c1 > w || r0 > r1 || c0 > c1
        || !PyBuffer_IsContiguous(&scratch_w.b, 'C') || !PyBuffer_IsContiguous(&scratch_c.b, 'C')
        || scratch_c.b.itemsize != 4 || scratch_w.b.shape[0] < (r1 - r0) * (c1 - c0)
        || scratch_c.b.shape[0] < (r1 - r0) * (c1 - c0)
        || !PyBuffer_IsContiguous(&con.b, 'C') || !PyBuffer_IsContiguous(&ctab.b, 'C')
        || ctab.b.itemsize != 2 || ctab.kind != K_INT || ctab.b.shape[0] != t.ncell
        || (light.held && (!PyBuffer_IsContiguous(&light.b, 'C') || light.b.shape[0] < 101))
        || (dense.held != touched.held) || bits < 1 || bits > 8
        || (dense.held && (!PyBuffer_IsContiguous(&dense.b, 'C')
                           || dense.b.shape[0] < ((Py_ssize_t)1 << (3 * bits))
                           || !PyBuffer_IsContiguous(&touched.b, 'C')
                           || touched.b.itemsize != sizeof(Py_ssize_t) || touched.kind != K_INT))) {
        PyErr_SetString(PyExc_ValueError, "overlay: shapes do not fit");
        goto done;
    }
    double *contrast = (double *)con.b.buf;
    const int16_t *cbin = (const int16_t *)ctab.b.buf;
    Py_ssize_t ncon = con.b.shape[0];
    double *lsum = light.held ? (double *)light.b.buf : NULL;
    double *dsum = dense.held ? (double *)dense.b.buf : NULL;
    Py_ssize_t *tlist = touched.held ? (Py_ssize_t *)touched.b.buf : NULL;
    Py_ssize_t tcap = touched.held ? touched.b.shape[0] : 0;
    Py_ssize_t pixels = 0, nt = 0;
    float wmin = INFINITY, wmax = 0.0f;        /* the weights' range, for exactness */
    double total = 0.0;
    int overflow = 0;
    float *wbuf = (float *)scratch_w.b.buf;
    uint32_t *cbuf = (uint32_t *)scratch_c.b.buf;
    Py_BEGIN_ALLOW_THREADS
    /* first the pixels drawn (alpha > 0), in row-major order: each row's columns drawn are
       gathered without a branch (a column is written at the next free place, which moves on
       only when it is drawn), then their weights and 8-bit colours beneath */
    Py_ssize_t sa = alpha.b.strides[1], sb = beneath.b.strides[2];
    Py_ssize_t *cols = (Py_ssize_t *)PyMem_RawMalloc(sizeof(Py_ssize_t) * (size_t)(c1 - c0 + 1));
    if (!cols) overflow = 2;
    /* rows whose columns are contiguous: the specialised loop (the same numbers) */
    int fast = cols && sa == (Py_ssize_t)sizeof(float) && sb == (Py_ssize_t)sizeof(float)
               && c1 - c0 < ((Py_ssize_t)1 << 30);
    if (fast) {
        float range[2] = {wmin, wmax};
        pixels = overlay_gather(AT2(alpha, 0, 0), alpha.b.strides[0], AT3(beneath, 0, 0, 0),
                                AT3(beneath, 1, 0, 0), AT3(beneath, 2, 0, 0), beneath.b.strides[1],
                                r0, r1, c0, c1, (int32_t *)cols, wbuf, cbuf, range);
        wmin = range[0];
        wmax = range[1];
    }
    for (Py_ssize_t i = r0; i < r1 && cols && !fast; i++) {
        const char *arow = AT2(alpha, i, 0);
        const char *row0 = AT3(beneath, 0, i, 0), *row1 = AT3(beneath, 1, i, 0),
                   *row2 = AT3(beneath, 2, i, 0);
        Py_ssize_t k = 0;
        for (Py_ssize_t j = c0; j < c1; j++) {
            cols[k] = j;
            k += (*(const float *)(arow + j * sa) > 0.0f);
        }
        for (Py_ssize_t q = 0; q < k; q++) {
            Py_ssize_t j = cols[q];
            uint32_t r = code8(*(const float *)(row0 + j * sb));
            uint32_t g = code8(*(const float *)(row1 + j * sb));
            uint32_t b = code8(*(const float *)(row2 + j * sb));
            float a = *(const float *)(arow + j * sa);
            wmin = a < wmin ? a : wmin;
            wmax = a > wmax ? a : wmax;
            wbuf[pixels + q] = a;
            cbuf[pixels + q] = (r << 16) | (g << 8) | b;
        }
        pixels += k;
    }
    PyMem_RawFree(cols);
    /* then their weights added to the bins, pixel by pixel */
    if (!overflow) {
        nt = overlay_bins_all(wbuf, cbuf, pixels, &t, cbin, y_part, step, ncon, contrast, lsum,
                              dsum, tlist, tcap, bits, &total);
        if (nt < 0) overflow = 1;
    }
    Py_END_ALLOW_THREADS
    if (overflow == 2) {
        PyErr_NoMemory();
        goto done;
    }
    if (overflow) {
        PyErr_SetString(PyExc_ValueError, "overlay: touched is too short");
        goto done;
    }
    result = overlay_result(pixels, nt, total, wmin, wmax);
done:
    drop(&alpha); drop(&beneath); drop(&ytab); drop(&lbin); drop(&ctab); drop(&con); drop(&light);
    drop(&dense); drop(&touched); drop(&scratch_w); drop(&scratch_c);
    return result;
}

PyDoc_STRVAR(index_range_doc,
"index_range(index) -> (lo, hi): the smallest and largest value of an integer array (k1, k2)\n"
"(any strides; not empty).");

static PyObject *index_range(PyObject *self, PyObject *args) {
    PyObject *o;
    if (!PyArg_ParseTuple(args, "O", &o)) return NULL;
    Arr a = {0};
    if (take(o, &a, 2, K_INT, 0, 0, "index") < 0) { drop(&a); return NULL; }
    Py_ssize_t k1 = a.b.shape[0], k2 = a.b.shape[1];
    if (k1 < 1 || k2 < 1) {
        drop(&a);
        PyErr_SetString(PyExc_ValueError, "index_range of an empty array");
        return NULL;
    }
    int64_t lo = read_int(AT2(a, 0, 0), &a), hi = lo;
    for (Py_ssize_t i = 0; i < k1; i++)
        for (Py_ssize_t j = 0; j < k2; j++) {
            int64_t v = read_int(AT2(a, i, j), &a);
            if (v < lo) lo = v;
            if (v > hi) hi = v;
        }
    drop(&a);
    return Py_BuildValue("LL", (long long)lo, (long long)hi);
}

/* one row of gray's samples: the row's pointers and strides */
typedef struct {
    const char *irow; Py_ssize_t ij;
    const char *prow; Py_ssize_t ps, pj;
    const char *arow; Py_ssize_t aj;
    const char *hrow; Py_ssize_t hj;
    const char *orow; Py_ssize_t oj;
} GrayRow;

/* gray's work on one row; u16 (the index is uint16) and the has_ flags are constants where it
   is inlined, so each common case gets a loop without their tests. Returns 1 when an index lies
   outside lo..lo + m - 1 (the tables then hold part of the row). Each table gets its additions pixel
   by pixel in row-major order: counts whole numbers, colour sums as np.bincount adds them. */
static inline __attribute__((always_inline)) int gray_row(
        const GrayRow *rw, const Arr *index, const Tables *t, const double *l8, Py_ssize_t lo,
        Py_ssize_t m, double *cts, double *cnt, double *col, Py_ssize_t k2, const int u16,
        const int has_alpha, const int has_hidden, const int has_above, const int has_cnt) {
    uint32_t last_rgb = 0xffffffffu;
    Py_ssize_t last_l = 0;
    for (Py_ssize_t j = 0; j < k2; j++) {
        const char *q = rw->irow + j * rw->ij;
        Py_ssize_t e = (Py_ssize_t)((u16 ? (int64_t)*(const uint16_t *)q : read_int(q, index)) - lo);
        if (__builtin_expect((size_t)e >= (size_t)m, 0)) return 1;
        float a = has_alpha ? *(const float *)(rw->arow + j * rw->aj) : 1.0f;
        int shown = has_hidden ? (*(const float *)(rw->hrow + j * rw->hj) < 0.02f) : 1;
        if (!shown) continue;
        const char *px = rw->prow + j * rw->pj;
        uint8_t r = *(const uint8_t *)px;
        uint8_t g = *(const uint8_t *)(px + rw->ps);
        uint8_t b = *(const uint8_t *)(px + 2 * rw->ps);
        if (!has_alpha || a > 0.5f) {
            /* L* of the previous colour again when it repeats (flat colours do) */
            uint32_t rgb = ((uint32_t)r << 16) | ((uint32_t)g << 8) | b;
            if (rgb != last_rgb) {
                last_rgb = rgb;
                last_l = lightness(t, luminance(t, r, g, b));
            }
            cts[e * 101 + last_l] += 1.0;
        }
        if (has_cnt && (!has_alpha || a > 0.0f)
                && (!has_above || *(const float *)(rw->orow + j * rw->oj) <= 0.5f)) {
            cnt[e] += 1.0;
            double *c3 = col + 3 * e;
            c3[0] += l8[r];
            c3[1] += l8[g];
            c3[2] += l8[b];
        }
    }
    return 0;
}

/* What gray's specialised loop reads: the sampled arrays' rows (every element 2 or 4 apart:
 * the grey order's samples of every 2nd or 4th column, compose.check.stats.gray_stride), and
 * its tables. */
typedef struct {
    const char *ibase; Py_ssize_t irow;         /* uint16 entries */
    const uint8_t *pbase; Py_ssize_t prow, plane;   /* the composite's 8-bit planes */
    const char *hbase; Py_ssize_t hrow;         /* float32 overlay cover, or NULL */
    Py_ssize_t k1, k2, lo, m;
    const Tables *t;
    const double *l8;
    double *cts, *cnt, *col;
    uint8_t *c8;        /* (m, 101) zeros: this call's counts, added to cts and cnt at the end */
    int32_t *kept;      /* (k2,) scratch: a row's columns kept */
} GraySampled;

/* gray's loop for uint16 entries, no alpha and nothing above, colours counted, over samples
 * S (2 or 4) elements apart, in a function of its own so that its pointers stay in registers:
 * the same numbers as gray_row. 1 when an entry lies outside lo..lo + m - 1.
 * The counts are whole numbers, so they are counted in uint8 (the entries x L* cells a
 * window touches lie scattered over hundreds of kB as float64: an eighth of the bytes stays
 * in cache) and added to cts at the end, whole numbers added in another grouping, exactly (a
 * count that wraps past 255 adds 256 at once); every pixel kept here is also drawn and
 * counted, so each entry's count is its row's sum. The colour sums stay float64, added pixel
 * by pixel in row-major order as gray_row adds them. */
static inline __attribute__((always_inline)) int gray_sampled_body(const GraySampled *g,
                                                                   const int has_hidden,
                                                                   const Py_ssize_t S) {
    const float *restrict ytab = g->t->ytab;
    const uint8_t *restrict lbin = g->t->lbin;
    const double *restrict l8 = g->l8;
    double *restrict cts = g->cts;
    double *restrict cnt = g->cnt;
    double *restrict col = g->col;
    uint8_t *restrict c8 = g->c8;
    int32_t *restrict kept = g->kept;
    const Py_ssize_t lo = g->lo, k2 = g->k2, plane = g->plane;
    const size_t m = (size_t)g->m;
    const Tables t = *g->t;
    Py_ssize_t run_e = -1, run_at = -1, run_ae = 0;
    uint32_t run_n = 0;
    double s0 = 0.0, s1 = 0.0, s2 = 0.0;
    /* a count of n more samples in cell at (entry ae): added to its uint8 counter, each 256
       it wraps past added to the tables at once (whole numbers: the same sums) */
#define GRAY_COUNT_FLUSH() do {                                                              \
        if (run_at >= 0) {                                                                   \
            uint32_t v_ = (uint32_t)c8[run_at] + run_n;                                      \
            c8[run_at] = (uint8_t)v_;                                                        \
            if (__builtin_expect(v_ >> 8, 0)) {                                              \
                double x_ = 256.0 * (double)(v_ >> 8);                                       \
                cts[run_at] += x_;                                                           \
                cnt[run_ae] += x_;                                                           \
            }                                                                                \
        }                                                                                    \
    } while (0)
    for (Py_ssize_t i = 0; i < g->k1; i++) {
        const uint16_t *restrict ix = (const uint16_t *)(g->ibase + i * g->irow);
        const uint8_t *restrict p0 = g->pbase + i * g->prow;
        const float *restrict hd = has_hidden ? (const float *)(g->hbase + i * g->hrow) : NULL;
        uint32_t last_rgb = 0xffffffffu;
        Py_ssize_t last_l = 0;
        /* the row's samples not under an overlay, gathered first without a branch (they fall
           where lines do not, so a branch would guess wrong often) */
        Py_ssize_t n = k2;
        if (has_hidden) {
            n = 0;
            for (Py_ssize_t j = 0; j < k2; j++) {
                kept[n] = (int32_t)j;
                n += hd[S * j] < 0.02f;
            }
        }
        for (Py_ssize_t q = 0; q < n; q++) {
            const Py_ssize_t j = has_hidden ? kept[q] : q;
            Py_ssize_t e = (Py_ssize_t)ix[S * j] - lo;
            if (__builtin_expect((size_t)e >= m, 0)) {
                if (run_e >= 0) {
                    double *c3 = col + 3 * run_e;
                    c3[0] = s0;
                    c3[1] = s1;
                    c3[2] = s2;
                }
                GRAY_COUNT_FLUSH();
                return 1;
            }
            uint8_t r = p0[S * j], gg = p0[S * j + plane], b = p0[S * j + 2 * plane];
            uint32_t rgb = ((uint32_t)r << 16) | ((uint32_t)gg << 8) | b;
            if (rgb != last_rgb) {
                last_rgb = rgb;
                float y = ytab[r];
                y += ytab[256 + gg];
                y += ytab[512 + b];
                last_l = lbin[y_cell(&t, y)];
            }
            /* a run of samples of one (entry, L*) cell counted in a register, then added */
            Py_ssize_t at = e * 101 + last_l;
            if (at != run_at) {
                GRAY_COUNT_FLUSH();
                run_at = at;
                run_ae = e;
                run_n = 0;
            }
            run_n++;
            /* the entry's colour sums held in registers while its run lasts: the same
               additions in the same order, without a round trip through memory each */
            if (e != run_e) {
                if (run_e >= 0) {
                    double *c3 = col + 3 * run_e;
                    c3[0] = s0;
                    c3[1] = s1;
                    c3[2] = s2;
                }
                run_e = e;
                const double *c3 = col + 3 * e;
                s0 = c3[0];
                s1 = c3[1];
                s2 = c3[2];
            }
            s0 += l8[r];
            s1 += l8[gg];
            s2 += l8[b];
        }
    }
    if (run_e >= 0) {
        double *c3 = col + 3 * run_e;
        c3[0] = s0;
        c3[1] = s1;
        c3[2] = s2;
    }
    GRAY_COUNT_FLUSH();
#undef GRAY_COUNT_FLUSH
    for (size_t e = 0; e < m; e++) {
        const uint8_t *restrict c = c8 + e * 101;
        double *restrict d = cts + e * 101;
        uint32_t sum = 0;
        for (int l = 0; l < 101; l++) sum += c[l];
        if (!sum) continue;
        cnt[e] += (double)sum;
        for (int l = 0; l < 101; l++) d[l] += (double)c[l];
    }
    return 0;
}

static __attribute__((noinline)) int gray_sampled_hidden(const GraySampled *g) {
    return gray_sampled_body(g, 1, 2);
}

static __attribute__((noinline)) int gray_sampled_shown(const GraySampled *g) {
    return gray_sampled_body(g, 0, 2);
}

/* the same over samples 4 elements apart (large canvases: compose.check.stats.gray_stride) */
static __attribute__((noinline)) int gray_sampled_hidden4(const GraySampled *g) {
    return gray_sampled_body(g, 1, 4);
}

static __attribute__((noinline)) int gray_sampled_shown4(const GraySampled *g) {
    return gray_sampled_body(g, 0, 4);
}

PyDoc_STRVAR(gray_doc,
"gray(planes8, index, alpha, hidden, above, ytab, lbin, linear8, lo, counts, count, color)\n\n"
"A theme's grey-order tables over sampled pixels (k1, k2), row-major: planes8 (3, k1, k2)\n"
"uint8 the composite, index (k1, k2) integer palette entries lo..lo + m - 1; alpha (the\n"
"theme's, float32) , hidden (what overlays cover, float32) and above (what themes drawn later\n"
"cover, float32), each (k1, k2) or None. A pixel kept (alpha > 0.5, hidden < 0.02) adds 1 to\n"
"counts[entry - lo, L*] (float64 (m, 101)); with count (float64 (m,)) and color (float64\n"
"(m, 3)) not None, a pixel drawn (alpha > 0, hidden < 0.02, above <= 0.5) adds 1 to its\n"
"entry's count and linear8 (float64 (256,)) of each channel to its colour. An index outside\n"
"lo..lo + m - 1 raises ValueError (the tables then hold part of the samples).");

static PyObject *gray(PyObject *self, PyObject *args) {
    PyObject *planes_o, *index_o, *alpha_o, *hidden_o, *above_o, *ytab_o, *lbin_o, *lin_o,
        *counts_o, *count_o, *color_o;
    Py_ssize_t lo;
    if (!PyArg_ParseTuple(args, "OOOOOOOOnOOO", &planes_o, &index_o, &alpha_o, &hidden_o,
                          &above_o, &ytab_o, &lbin_o, &lin_o, &lo, &counts_o, &count_o, &color_o))
        return NULL;
    Arr planes = {0}, index = {0}, alpha = {0}, hidden = {0}, above = {0}, ytab = {0}, lbin = {0},
        lin = {0}, counts = {0}, count = {0}, color = {0};
    Tables t;
    PyObject *result = NULL;
    if (take(planes_o, &planes, 3, K_UINT, 0, 0, "planes8") < 0
        || take(index_o, &index, 2, K_INT, 0, 0, "index") < 0
        || take(alpha_o, &alpha, 2, K_F32, 0, 1, "alpha") < 0
        || take(hidden_o, &hidden, 2, K_F32, 0, 1, "hidden") < 0
        || take(above_o, &above, 2, K_F32, 0, 1, "above") < 0
        || tables(ytab_o, lbin_o, &ytab, &lbin, &t) < 0
        || take(lin_o, &lin, 1, K_F64, 0, 0, "linear8") < 0
        || take(counts_o, &counts, 2, K_F64, 1, 0, "counts") < 0
        || take(count_o, &count, 1, K_F64, 1, 1, "count") < 0
        || take(color_o, &color, 2, K_F64, 1, 1, "color") < 0)
        goto done;
    Py_ssize_t k1 = index.b.shape[0], k2 = index.b.shape[1];
    Py_ssize_t m = counts.b.shape[0];
    int same = 1;
    Arr *masks[3] = {&alpha, &hidden, &above};
    for (int q = 0; q < 3; q++)
        if (masks[q]->held && (masks[q]->b.shape[0] != k1 || masks[q]->b.shape[1] != k2)) same = 0;
    if (!same || planes.b.itemsize != 1 || planes.b.shape[0] != 3 || planes.b.shape[1] != k1
        || planes.b.shape[2] != k2 || lin.b.shape[0] != 256 || !PyBuffer_IsContiguous(&lin.b, 'C')
        || !PyBuffer_IsContiguous(&counts.b, 'C') || counts.b.shape[1] != 101
        || count.held != color.held
        || (count.held && (!PyBuffer_IsContiguous(&count.b, 'C') || count.b.shape[0] != m
                           || !PyBuffer_IsContiguous(&color.b, 'C') || color.b.shape[0] != m
                           || color.b.shape[1] != 3))) {
        PyErr_SetString(PyExc_ValueError, "gray: shapes do not fit");
        goto done;
    }
    const double *l8 = (const double *)lin.b.buf;
    double *cts = (double *)counts.b.buf;
    double *cnt = count.held ? (double *)count.b.buf : NULL;
    double *col = color.held ? (double *)color.b.buf : NULL;
    int bad = 0;
    Py_BEGIN_ALLOW_THREADS
    const Py_ssize_t ps = planes.b.strides[0], pj = planes.b.strides[2];
    const Py_ssize_t aj = alpha.held ? alpha.b.strides[1] : 0;
    const Py_ssize_t hj = hidden.held ? hidden.b.strides[1] : 0;
    const Py_ssize_t oj = above.held ? above.b.strides[1] : 0;
    const Py_ssize_t ij = index.b.strides[1];
    const int u16 = index.b.itemsize == 2 && index.kind == K_UINT;
    /* the commonest case, samples 2 elements apart: its own loop (the same numbers) */
    /* the samples' step in elements: 2 or 4 (compose.check.stats.gray_stride), else 0 */
    const Py_ssize_t step = (ij == 4 && pj == 2 && (!hidden.held || hj == 8)) ? 2
                            : (ij == 8 && pj == 4 && (!hidden.held || hj == 16)) ? 4 : 0;
    int sampled = u16 && !alpha.held && !above.held && cnt && step && k1 > 0;
    uint8_t *c8 = sampled ? (uint8_t *)PyMem_RawCalloc((size_t)m * 101 + 4 * (size_t)k2 + 4, 1)
                           : NULL;
    if (sampled && c8) {
        GraySampled g = {AT2(index, 0, 0), index.b.strides[0],
                         (const uint8_t *)AT3(planes, 0, 0, 0), planes.b.strides[1], ps,
                         hidden.held ? AT2(hidden, 0, 0) : NULL,
                         hidden.held ? hidden.b.strides[0] : 0,
                         k1, k2, lo, m, &t, l8, cts, cnt, col, c8,
                         (int32_t *)(c8 + (((size_t)m * 101 + 3) & ~(size_t)3))};
        if (step == 2)
            bad = hidden.held ? gray_sampled_hidden(&g) : gray_sampled_shown(&g);
        else
            bad = hidden.held ? gray_sampled_hidden4(&g) : gray_sampled_shown4(&g);
    }
    PyMem_RawFree(c8);
    sampled = sampled && c8;       /* out of memory: the rows' loop below, the same numbers */
    /* the common cases with their tests made constant (see gray_row) */
    for (Py_ssize_t i = 0; i < k1 && !bad && !sampled; i++) {
        GrayRow row = {AT2(index, i, 0), ij, AT3(planes, 0, i, 0), ps, pj,
                       alpha.held ? AT2(alpha, i, 0) : NULL, aj,
                       hidden.held ? AT2(hidden, i, 0) : NULL, hj,
                       above.held ? AT2(above, i, 0) : NULL, oj};
        if (u16 && !alpha.held && hidden.held && !above.held && cnt)
            bad = gray_row(&row, &index, &t, l8, lo, m, cts, cnt, col, k2, 1, 0, 1, 0, 1);
        else if (u16 && !alpha.held && !hidden.held && !above.held && cnt)
            bad = gray_row(&row, &index, &t, l8, lo, m, cts, cnt, col, k2, 1, 0, 0, 0, 1);
        else
            bad = gray_row(&row, &index, &t, l8, lo, m, cts, cnt, col, k2, 0,
                           alpha.held, hidden.held, above.held, cnt != NULL);
    }
    Py_END_ALLOW_THREADS
    if (bad) {
        PyErr_SetString(PyExc_ValueError, "gray: an index outside lo..lo + m - 1");
        goto done;
    }
    Py_INCREF(Py_None);
    result = Py_None;
done:
    drop(&planes); drop(&index); drop(&alpha); drop(&hidden); drop(&above); drop(&ytab);
    drop(&lbin); drop(&lin); drop(&counts); drop(&count); drop(&color);
    return result;
}

PyDoc_STRVAR(to8_doc,
"to8(planes, rgb8, planes8)\n\n"
"Float colour planes (3, h, w) float32 (any strides; values clipped to [0, 1]) as 8-bit codes,\n"
"x 255 rounded half to even, written both interleaved to rgb8 (h, w, 3) uint8 and planar to\n"
"planes8 (3, h, w) uint8 (both C-contiguous): np.clip, x 255, np.rint and the cast to uint8\n"
"(NaN gives 0).");

WIDE static PyObject *to8(PyObject *self, PyObject *args) {
    PyObject *planes_o, *rgb_o, *out_o;
    if (!PyArg_ParseTuple(args, "OOO", &planes_o, &rgb_o, &out_o)) return NULL;
    Arr planes = {0}, rgb = {0}, out = {0};
    PyObject *result = NULL;
    if (take(planes_o, &planes, 3, K_F32, 0, 0, "planes") < 0
        || take(rgb_o, &rgb, 3, K_UINT, 1, 0, "rgb8") < 0
        || take(out_o, &out, 3, K_UINT, 1, 0, "planes8") < 0)
        goto done;
    Py_ssize_t h = planes.b.shape[1], w = planes.b.shape[2];
    if (planes.b.shape[0] != 3 || rgb.b.itemsize != 1 || out.b.itemsize != 1
        || rgb.b.shape[0] != h || rgb.b.shape[1] != w || rgb.b.shape[2] != 3
        || out.b.shape[0] != 3 || out.b.shape[1] != h || out.b.shape[2] != w
        || !PyBuffer_IsContiguous(&rgb.b, 'C') || !PyBuffer_IsContiguous(&out.b, 'C')) {
        PyErr_SetString(PyExc_ValueError, "to8: shapes do not fit");
        goto done;
    }
    uint8_t *dst = (uint8_t *)rgb.b.buf, *pl = (uint8_t *)out.b.buf;
    const Py_ssize_t sj = planes.b.strides[2];
    Py_BEGIN_ALLOW_THREADS
    for (Py_ssize_t i = 0; i < h; i++) {
        const char *row[3] = {AT3(planes, 0, i, 0), AT3(planes, 1, i, 0), AT3(planes, 2, i, 0)};
        uint8_t *d = dst + 3 * w * i;
        uint8_t *p0 = pl + i * w, *p1 = pl + (h + i) * w, *p2 = pl + (2 * h + i) * w;
        uint8_t *ps[3] = {p0, p1, p2};
        for (int c = 0; c < 3; c++) {
            uint8_t *p = ps[c];
            const char *src = row[c];
            if (sj == (Py_ssize_t)sizeof(float)) {      /* contiguous rows: vectorised */
                const float *f = (const float *)src;
                for (Py_ssize_t j = 0; j < w; j++) p[j] = code8(f[j]);
            } else {
                for (Py_ssize_t j = 0; j < w; j++) p[j] = code8(*(const float *)(src + j * sj));
            }
            /* clipped to [0, 1] first (as np.clip), then x 255: equal to clipping after */
        }
        for (Py_ssize_t j = 0; j < w; j++) {
            d[3 * j] = p0[j];
            d[3 * j + 1] = p1[j];
            d[3 * j + 2] = p2[j];
        }
    }
    Py_END_ALLOW_THREADS
    Py_INCREF(Py_None);
    result = Py_None;
done:
    drop(&planes); drop(&rgb); drop(&out);
    return result;
}

/* Horn's gradient of one row from its three padded DEM rows (w + 2 each): the vertical
   [1 2 1] sums ((top + bottom) + centre) + centre, their horizontal difference, q likewise
   across (numpy's order of operations), unscaled. Returns 1 when a gradient is NaN. */
WIDE static __attribute__((noinline)) int horn_row(const float *restrict up, const float *restrict mid, const float *restrict dn,
                    float *restrict v, float *restrict pp, float *restrict qq, Py_ssize_t w) {
    for (Py_ssize_t c = 0; c < w + 2; c++) {
        float a = up[c] + dn[c];
        a += mid[c];
        a += mid[c];
        v[c] = a;
    }
    for (Py_ssize_t c = 0; c < w; c++) {
        float p = v[c + 2] - v[c];
        float ht = up[c] + up[c + 2];
        ht += up[c + 1];
        ht += up[c + 1];
        float hb = dn[c] + dn[c + 2];
        hb += dn[c + 1];
        hb += dn[c + 1];
        float q = ht - hb;
        pp[c] = p;
        qq[c] = q;
    }
    /* NaN: exponent bits all set and a fraction not zero; tested on the bits (no branch) */
    uint32_t nan = 0;
    for (Py_ssize_t c = 0; c < w; c++) {
        uint32_t a, b;
        memcpy(&a, pp + c, 4);
        memcpy(&b, qq + c, 4);
        nan |= ((a & 0x7fffffffu) > 0x7f800000u) | ((b & 0x7fffffffu) > 0x7f800000u);
    }
    return nan != 0;
}

/* a neighbour of a cell next to no-data, as compose.layers.hillshade._gradient_nan: itself,
   or reflected through the centre e (2e - opposite), or e when the opposite is NaN too */
static inline float reflect(float a, float b, float e) {
    if (!isnan(a)) return a;
    if (isnan(b)) return e;
    float t = 2.0f * e;
    return t - b;
}

/* compose.layers.hillshade._gradient_nan on one row of unscaled gradients: cells whose p or q
   is NaN and whose centre is not are computed again from reflected neighbours (in numpy's
   order of operations); cells whose centre is NaN are NaN. */
WIDE static __attribute__((noinline)) void horn_fix(const float *up, const float *mid, const float *dn,
                                               float *pp, float *qq, Py_ssize_t w) {
    for (Py_ssize_t c = 0; c < w; c++) {
        float e = mid[c + 1];
        if (isnan(e)) {
            pp[c] = NAN;
            qq[c] = NAN;
            continue;
        }
        if (!isnan(pp[c]) && !isnan(qq[c])) continue;
        /* f(row, col) offsets: (-1,-1) up[c], (-1,0) up[c+1], (-1,1) up[c+2], (0,-1) mid[c],
           (0,1) mid[c+2], (1,-1) dn[c], (1,0) dn[c+1], (1,1) dn[c+2] */
        float nw = reflect(up[c], dn[c + 2], e), se = reflect(dn[c + 2], up[c], e);
        float n = reflect(up[c + 1], dn[c + 1], e), s = reflect(dn[c + 1], up[c + 1], e);
        float ne = reflect(up[c + 2], dn[c], e), sw = reflect(dn[c], up[c + 2], e);
        float west = reflect(mid[c], mid[c + 2], e), east = reflect(mid[c + 2], mid[c], e);
        float a = 2.0f * east, b;
        a = ne + a;
        a = a + se;
        b = 2.0f * west;
        b = nw + b;
        b = b + sw;
        pp[c] = a - b;
        a = 2.0f * n;
        a = nw + a;
        a = a + ne;
        b = 2.0f * s;
        b = sw + b;
        b = b + se;
        qq[c] = a - b;
    }
}

/* The weighted Lambertian shade of one row of gradients under k suns, as _Light.shade. */
WIDE static __attribute__((noinline)) void shade_row(const float *restrict pp, const float *restrict qq, float *restrict den,
                      float *restrict acc, float *restrict u, float *restrict o, Py_ssize_t w,
                      float k2, float sin_alt, const float *cx, const float *cy,
                      const float *wt, Py_ssize_t k) {
    for (Py_ssize_t c = 0; c < w; c++) {
        float d = pp[c] * pp[c];
        float t = qq[c] * qq[c];
        d += t;
        d *= k2;
        d += 1.0f;
        den[c] = sqrtf(d);
    }
    float *sum = k == 1 ? u : acc;
    for (Py_ssize_t i = 0; i < k; i++) {
        const float ci = cx[i], di = cy[i], wi = wt[i];
        if (k == 1) {
            for (Py_ssize_t c = 0; c < w; c++) {
                float x = pp[c] * ci;
                x += sin_alt;
                float t = qq[c] * di;
                x += t;
                u[c] = x < 0.0f ? 0.0f : x;         /* np.maximum(x, 0): NaN stays NaN */
            }
        } else if (i == 0) {
            for (Py_ssize_t c = 0; c < w; c++) {
                float x = pp[c] * ci;
                x += sin_alt;
                float t = qq[c] * di;
                x += t;
                x = x < 0.0f ? 0.0f : x;
                acc[c] = x * wi;
            }
        } else {
            for (Py_ssize_t c = 0; c < w; c++) {
                float x = pp[c] * ci;
                x += sin_alt;
                float t = qq[c] * di;
                x += t;
                x = x < 0.0f ? 0.0f : x;
                x *= wi;
                acc[c] += x;
            }
        }
    }
    for (Py_ssize_t c = 0; c < w; c++) {
        float x = sum[c] / den[c];
        o[c] = x > 1.0f ? 1.0f : x;                 /* np.minimum(x, 1): NaN stays NaN */
    }
}

PyDoc_STRVAR(hillshade_doc,
"hillshade(dem, scale_p, scale_q, k2, sin_alt, cx, cy, weights, out) -> bool\n\n"
"compose.layers.hillshade.multidirectional's float32 arithmetic, pixel by pixel: Horn's\n"
"gradient of dem (H, W) float32 (edges replicated), p scaled per row by scale_p (H,) float32\n"
"and q by scale_q, then the weighted Lambertian shade under the suns (cx, cy, weights: (k,)\n"
"float32; one sun: weights unused) into out (H, W) float32; all C-contiguous. Cells next to\n"
"no-data (NaN) get the gradient of _gradient_nan (neighbours reflected through the centre),\n"
"cells of no-data NaN. Returns True.");

static PyObject *hillshade(PyObject *self, PyObject *args) {
    PyObject *dem_o, *sp_o, *cx_o, *cy_o, *w_o, *out_o;
    float sq, k2, sin_alt;
    if (!PyArg_ParseTuple(args, "OOfffOOOO", &dem_o, &sp_o, &sq, &k2, &sin_alt, &cx_o, &cy_o,
                          &w_o, &out_o))
        return NULL;
    Arr dem = {0}, sp = {0}, cxa = {0}, cya = {0}, wa = {0}, out = {0};
    PyObject *result = NULL;
    if (take(dem_o, &dem, 2, K_F32, 0, 0, "dem") < 0
        || take(sp_o, &sp, 1, K_F32, 0, 0, "scale_p") < 0
        || take(cx_o, &cxa, 1, K_F32, 0, 0, "cx") < 0
        || take(cy_o, &cya, 1, K_F32, 0, 0, "cy") < 0
        || take(w_o, &wa, 1, K_F32, 0, 0, "weights") < 0
        || take(out_o, &out, 2, K_F32, 1, 0, "out") < 0)
        goto done;
    Py_ssize_t h = dem.b.shape[0], w = dem.b.shape[1], k = cxa.b.shape[0];
    if (h < 1 || w < 1 || k < 1 || k > 64 || sp.b.shape[0] != h || cya.b.shape[0] != k
        || wa.b.shape[0] != k || out.b.shape[0] != h || out.b.shape[1] != w
        || !PyBuffer_IsContiguous(&dem.b, 'C') || !PyBuffer_IsContiguous(&sp.b, 'C')
        || !PyBuffer_IsContiguous(&cxa.b, 'C') || !PyBuffer_IsContiguous(&cya.b, 'C')
        || !PyBuffer_IsContiguous(&wa.b, 'C') || !PyBuffer_IsContiguous(&out.b, 'C')) {
        PyErr_SetString(PyExc_ValueError, "hillshade: shapes do not fit");
        goto done;
    }
    const float *z = (const float *)dem.b.buf, *spr = (const float *)sp.b.buf;
    const float *cx = (const float *)cxa.b.buf, *cy = (const float *)cya.b.buf;
    const float *wt = (const float *)wa.b.buf;
    float *dst = (float *)out.b.buf;
    /* per row: the three DEM rows with their edge columns replicated, the vertical [1 2 1]
       sums, p, q, the denominator and the sums of the suns' terms */
    float *buf = (float *)PyMem_RawMalloc(sizeof(float) * (size_t)(4 * (w + 2) + 5 * w));
    if (!buf) {
        PyErr_NoMemory();
        goto done;
    }
    Py_BEGIN_ALLOW_THREADS
    float *up = buf, *mid = up + (w + 2), *dn = mid + (w + 2), *v = dn + (w + 2);
    float *pp = v + (w + 2), *qq = pp + w, *den = qq + w, *acc = den + w, *u = acc + w;
    for (Py_ssize_t r = 0; r < h; r++) {
        const float *rows[3] = {z + (r > 0 ? r - 1 : 0) * w, z + r * w,
                                z + (r < h - 1 ? r + 1 : h - 1) * w};
        float *pads[3] = {up, mid, dn};
        for (int t = 0; t < 3; t++) {
            memcpy(pads[t] + 1, rows[t], sizeof(float) * (size_t)w);
            pads[t][0] = rows[t][0];
            pads[t][w + 1] = rows[t][w - 1];
        }
        if (horn_row(up, mid, dn, v, pp, qq, w)) horn_fix(up, mid, dn, pp, qq, w);
        const float s_p = spr[r];
        for (Py_ssize_t c = 0; c < w; c++) {
            pp[c] *= s_p;
            qq[c] *= sq;
        }
        shade_row(pp, qq, den, acc, u, dst + r * w, w, k2, sin_alt, cx, cy, wt, k);
    }
    Py_END_ALLOW_THREADS
    PyMem_RawFree(buf);
    result = PyBool_FromLong(1);
done:
    drop(&dem); drop(&sp); drop(&cxa); drop(&cya); drop(&wa); drop(&out);
    return result;
}

/* One row of palette() in one pass, for the common layout (uint16 entries, contiguous rows of
 * the backdrop and alpha): each pixel's entry read once (wrapped as np.take's "wrap"), counted
 * when cnt is not NULL, its three colours read together from tab4 (the table as (n, 4)
 * float32: r, g, b, unused) and each channel composited by over(), the same float32 steps as
 * the per-channel loops. Columns j0..j1-1; inlined with mode, opaque, bcast and counted
 * constant. The counts go to four tables, (n, 4) uint32, a column's to table j % 4: a run of
 * one entry (a smooth raster's) adds to four counters in turn instead of to one again before
 * its last addition is stored. */
static inline __attribute__((always_inline)) void palette_row_body(
        float *restrict b0, float *restrict b1, float *restrict b2, const uint16_t *restrict ir,
        const float *restrict tab4, const float *restrict a, uint32_t *restrict cnt,
        Py_ssize_t n, Py_ssize_t j0, Py_ssize_t j1, int multiply, int opaque, int bcast,
        const int counted) {
    for (Py_ssize_t j = j0; j < j1; j++) {
        Py_ssize_t v = ir[j];
        if (v >= n) v %= n;
        if (counted) cnt[4 * v + (j & 3)]++;
        const float *t = tab4 + 4 * v;
        const float aj = opaque ? 1.0f : (bcast ? a[0] : a[j]);
        b0[j] = over(b0[j], t[0], multiply, opaque, aj);
        b1[j] = over(b1[j], t[1], multiply, opaque, aj);
        b2[j] = over(b2[j], t[2], multiply, opaque, aj);
    }
}

#define PALETTE_ROW(M, O, B)                                                                  \
    do {                                                                                      \
        if (!cnt) {                                                                           \
            palette_row_body(b0, b1, b2, ir, tab4, a, NULL, n, 0, w, M, O, B, 0);             \
        } else {                                                                              \
            palette_row_body(b0, b1, b2, ir, tab4, a, NULL, n, 0, c0, M, O, B, 0);            \
            palette_row_body(b0, b1, b2, ir, tab4, a, cnt, n, c0, c1, M, O, B, 1);            \
            palette_row_body(b0, b1, b2, ir, tab4, a, NULL, n, c1, w, M, O, B, 0);            \
        }                                                                                     \
    } while (0)

static __attribute__((noinline)) void palette_row(
        float *b0, float *b1, float *b2, const uint16_t *ir, const float *tab4, const float *a,
        uint32_t *cnt, Py_ssize_t n, Py_ssize_t w, Py_ssize_t c0, Py_ssize_t c1, int mode,
        int opaque, int bcast) {
    if (mode == 0 && opaque) PALETTE_ROW(0, 1, 0);
    else if (mode == 0 && bcast) PALETTE_ROW(0, 0, 1);
    else if (mode == 0) PALETTE_ROW(0, 0, 0);
    else if (opaque) PALETTE_ROW(1, 1, 0);
    else if (bcast) PALETTE_ROW(1, 0, 1);
    else PALETTE_ROW(1, 0, 0);
}
#undef PALETTE_ROW

PyDoc_STRVAR(palette_doc,
"palette(backdrop, table, index, alpha, mode, opaque, counts, r0, r1, c0, c1)\n\n"
"compose.composite.composite_palette's float32 arithmetic, pixel by pixel, in place on backdrop\n"
"(3, H, W) float32: the source colour table[c, index] (table (3, n) float32, C-contiguous;\n"
"index (H, W) integers, wrapped into 0..n-1 as np.take's mode 'wrap'), mode 0 'normal'\n"
"(mix = Cs - Cb) or 1 'multiply' (mix = Cb Cs - Cb), mix times alpha ((H, W) or (1, 1)\n"
"float32) unless opaque, Cb + mix. With counts ((n,) intp, C-contiguous) not None, each index\n"
"of rows r0..r1-1 and columns c0..c1-1 adds 1 to its entry (np.bincount's counts).");

static PyObject *palette(PyObject *self, PyObject *args) {
    PyObject *back_o, *table_o, *index_o, *alpha_o, *counts_o;
    int mode, opaque;
    Py_ssize_t r0, r1, c0, c1;
    if (!PyArg_ParseTuple(args, "OOOOiiOnnnn", &back_o, &table_o, &index_o, &alpha_o, &mode,
                          &opaque, &counts_o, &r0, &r1, &c0, &c1))
        return NULL;
    Arr back = {0}, table = {0}, index = {0}, alpha = {0}, counts = {0};
    PyObject *result = NULL;
    if (take(back_o, &back, 3, K_F32, 1, 0, "backdrop") < 0
        || take(table_o, &table, 2, K_F32, 0, 0, "table") < 0
        || take(index_o, &index, 2, K_INT, 0, 0, "index") < 0
        || take(alpha_o, &alpha, 2, K_F32, 0, 0, "alpha") < 0
        || take(counts_o, &counts, 1, K_INT, 1, 1, "counts") < 0)
        goto done;
    Py_ssize_t h = back.b.shape[1], w = back.b.shape[2], n = table.b.shape[1];
    int bcast = alpha.b.shape[0] == 1 && alpha.b.shape[1] == 1;
    if (back.b.shape[0] != 3 || table.b.shape[0] != 3 || n < 1
        || !PyBuffer_IsContiguous(&table.b, 'C') || index.b.shape[0] != h || index.b.shape[1] != w
        || !(bcast || (alpha.b.shape[0] == h && alpha.b.shape[1] == w)) || mode < 0 || mode > 1
        || (counts.held && (!PyBuffer_IsContiguous(&counts.b, 'C') || counts.b.shape[0] != n
                            || counts.b.itemsize != sizeof(Py_ssize_t) || counts.kind != K_INT))
        || r0 < 0 || c0 < 0 || r1 > h || c1 > w) {
        PyErr_SetString(PyExc_ValueError, "palette: shapes do not fit");
        goto done;
    }
    const float *tab = (const float *)table.b.buf;
    Py_ssize_t *cnt = counts.held ? (Py_ssize_t *)counts.b.buf : NULL;
    Py_ssize_t *idx = (Py_ssize_t *)PyMem_RawMalloc(sizeof(Py_ssize_t) * (size_t)(w + 1));
    float *tab4 = (float *)PyMem_RawMalloc(sizeof(float) * 4 * (size_t)n);
    /* palette_row's counts: (n, 4) uint32, added to counts at the end (whole numbers; each
       below 2**32 where the region has fewer pixels) */
    uint32_t *cnt4 = cnt && (r1 - r0) * (c1 - c0) < ((Py_ssize_t)1 << 32)
                     ? (uint32_t *)PyMem_RawCalloc(4 * (size_t)n, sizeof(uint32_t)) : NULL;
    if (!idx || !tab4 || (cnt && (r1 - r0) * (c1 - c0) < ((Py_ssize_t)1 << 32) && !cnt4)) {
        PyMem_RawFree(idx);
        PyMem_RawFree(tab4);
        PyMem_RawFree(cnt4);
        PyErr_NoMemory();
        goto done;
    }
    Py_BEGIN_ALLOW_THREADS
    const Py_ssize_t bj = back.b.strides[2], ij = index.b.strides[1];
    const Py_ssize_t aj = bcast ? 0 : alpha.b.strides[1];
    const int isize = (int)index.b.itemsize, isigned = index.kind == K_INT;
    const int u16 = isize == 2 && !isigned && ij == 2;
    /* the common layout: every row in one pass (palette_row) */
    const int fused = u16 && bj == (Py_ssize_t)sizeof(float)
                      && (bcast || aj == (Py_ssize_t)sizeof(float)) && (!cnt || cnt4);
    if (fused)
        for (Py_ssize_t k = 0; k < n; k++) {
            tab4[4 * k] = tab[k];
            tab4[4 * k + 1] = tab[n + k];
            tab4[4 * k + 2] = tab[2 * n + k];
            tab4[4 * k + 3] = 0.0f;
        }
    for (Py_ssize_t i = 0; fused && i < h; i++) {
        const int counted = cnt && i >= r0 && i < r1;
        palette_row((float *)AT3(back, 0, i, 0), (float *)AT3(back, 1, i, 0),
                    (float *)AT3(back, 2, i, 0), (const uint16_t *)AT2(index, i, 0), tab4,
                    bcast ? (const float *)alpha.b.buf : (const float *)AT2(alpha, i, 0),
                    counted ? cnt4 : NULL, n, w, c0, c1 < c0 ? c0 : c1, mode, opaque, bcast);
    }
    if (fused && cnt)
        for (Py_ssize_t k = 0; k < n; k++)
            cnt[k] += (Py_ssize_t)cnt4[4 * k] + (Py_ssize_t)cnt4[4 * k + 1]
                      + (Py_ssize_t)cnt4[4 * k + 2] + (Py_ssize_t)cnt4[4 * k + 3];
    for (Py_ssize_t i = 0; !fused && i < h; i++) {
        const char *irow = AT2(index, i, 0);
        if (u16) {          /* contiguous uint16 entries: converted and counted in one pass */
            const uint16_t *ir = (const uint16_t *)irow;
            const int counted = cnt && i >= r0 && i < r1;
            const Py_ssize_t a0 = counted ? c0 : w, a1 = counted ? c1 : w;
            for (Py_ssize_t j = 0; j < a0; j++) {
                Py_ssize_t v = ir[j];
                idx[j] = v < n ? v : v % n;         /* np.take's "wrap" */
            }
            for (Py_ssize_t j = a0; j < a1; j++) {
                Py_ssize_t v = ir[j];
                v = v < n ? v : v % n;
                idx[j] = v;
                cnt[v]++;
            }
            for (Py_ssize_t j = a1; j < w; j++) {
                Py_ssize_t v = ir[j];
                idx[j] = v < n ? v : v % n;
            }
        } else {
            for (Py_ssize_t j = 0; j < w; j++) {
                const char *q = irow + j * ij;
                int64_t v = isize == 2 && !isigned ? (int64_t)*(const uint16_t *)q
                                                   : read_int(q, &index);
                if (v < 0 || v >= n) {          /* np.take's "wrap" */
                    v %= n;
                    if (v < 0) v += n;
                }
                idx[j] = (Py_ssize_t)v;
            }
            if (cnt && i >= r0 && i < r1)
                for (Py_ssize_t j = c0; j < c1; j++) cnt[idx[j]]++;
        }
        const char *arow = bcast ? (const char *)alpha.b.buf : AT2(alpha, i, 0);
        for (int c = 0; c < 3; c++) {
            const float *tc = tab + c * n;
            char *brow = (char *)AT3(back, c, i, 0);
            if (bj == (Py_ssize_t)sizeof(float) && (bcast || aj == (Py_ssize_t)sizeof(float))) {
                float *cb = (float *)brow;
                const float *a = (const float *)arow;
                if (mode == 0 && opaque)
                    for (Py_ssize_t j = 0; j < w; j++) cb[j] = over(cb[j], tc[idx[j]], 0, 1, 1.0f);
                else if (mode == 0 && bcast)
                    for (Py_ssize_t j = 0; j < w; j++) cb[j] = over(cb[j], tc[idx[j]], 0, 0, a[0]);
                else if (mode == 0)
                    for (Py_ssize_t j = 0; j < w; j++) cb[j] = over(cb[j], tc[idx[j]], 0, 0, a[j]);
                else if (opaque)
                    for (Py_ssize_t j = 0; j < w; j++) cb[j] = over(cb[j], tc[idx[j]], 1, 1, 1.0f);
                else if (bcast)
                    for (Py_ssize_t j = 0; j < w; j++) cb[j] = over(cb[j], tc[idx[j]], 1, 0, a[0]);
                else
                    for (Py_ssize_t j = 0; j < w; j++) cb[j] = over(cb[j], tc[idx[j]], 1, 0, a[j]);
            } else {
                for (Py_ssize_t j = 0; j < w; j++) {
                    float *cb = (float *)(brow + j * bj);
                    *cb = over(*cb, tc[idx[j]], mode, opaque, opaque ? 1.0f : *(const float *)(arow + j * aj));
                }
            }
        }
    }
    Py_END_ALLOW_THREADS
    PyMem_RawFree(idx);
    PyMem_RawFree(tab4);
    PyMem_RawFree(cnt4);
    Py_INCREF(Py_None);
    result = Py_None;
done:
    drop(&back); drop(&table); drop(&index); drop(&alpha); drop(&counts);
    return result;
}

PyDoc_STRVAR(levels_doc,
"levels(shade, top, index, alpha) -> int\n\n"
"A shade (H, W) float32 as table entries: shade x top (float32) rounded half to even into\n"
"index (H, W) uint16, alpha 1.0; where the shade is not finite entry top + 1 and alpha 0.0\n"
"(all C-contiguous; compose.layers.relief's numpy steps). Returns 1 when every shade was\n"
"finite, 0 when some were not, -1 (index incomplete) when a rounded value falls outside\n"
"0..65535: then the numpy path runs.");

WIDE static PyObject *levels(PyObject *self, PyObject *args) {
    PyObject *shade_o, *index_o, *alpha_o;
    float top;
    if (!PyArg_ParseTuple(args, "OfOO", &shade_o, &top, &index_o, &alpha_o)) return NULL;
    Arr shade = {0}, index = {0}, alpha = {0};
    PyObject *result = NULL;
    if (take(shade_o, &shade, 2, K_F32, 0, 0, "shade") < 0
        || take(index_o, &index, 2, K_UINT, 1, 0, "index") < 0
        || take(alpha_o, &alpha, 2, K_F32, 1, 0, "alpha") < 0)
        goto done;
    Py_ssize_t h = shade.b.shape[0], w = shade.b.shape[1];
    if (index.b.itemsize != 2 || index.b.shape[0] != h || index.b.shape[1] != w
        || alpha.b.shape[0] != h || alpha.b.shape[1] != w || !(top >= 0.0f && top < 65535.0f)
        || !PyBuffer_IsContiguous(&shade.b, 'C') || !PyBuffer_IsContiguous(&index.b, 'C')
        || !PyBuffer_IsContiguous(&alpha.b, 'C')) {
        PyErr_SetString(PyExc_ValueError, "levels: shapes do not fit");
        goto done;
    }
    const float *src = (const float *)shade.b.buf;
    uint16_t *dst = (uint16_t *)index.b.buf;
    float *al = (float *)alpha.b.buf;
    const uint16_t nodata = (uint16_t)((uint32_t)top + 1u);
    int all = 1, outside = 0;
    Py_BEGIN_ALLOW_THREADS
    /* branch-free (vectorised): finite by the exponent bits, the rounded value selected */
    uint32_t lost = 0, bad = 0;
    for (Py_ssize_t i = 0, n = h * w; i < n; i++) {
        float x = src[i];
        uint32_t bits;
        memcpy(&bits, &x, 4);
        uint32_t fin = (bits & 0x7f800000u) != 0x7f800000u;
        float y = x * top;
        /* np.rint: adding 2**23 rounds to an integer, ties to even, for 0 <= y < 2**23 */
        float r = (y + 8388608.0f) - 8388608.0f;
        uint32_t ok = (y >= 0.0f) & (y < 65535.5f);
        r = fin & ok ? r : 0.0f;
        int32_t k = (int32_t)r;
        dst[i] = fin ? (uint16_t)k : nodata;
        al[i] = fin ? 1.0f : 0.0f;
        lost |= fin ^ 1u;
        bad |= fin & (ok ^ 1u);
    }
    all = lost == 0;
    outside = bad != 0;
    Py_END_ALLOW_THREADS
    result = PyLong_FromLong(outside ? -1 : all);
done:
    drop(&shade); drop(&index); drop(&alpha);
    return result;
}

PyDoc_STRVAR(lut_index_doc,
"lut_index(values, index, lo, hi, n, origin, width, inner, at, first, width2) -> None\n\n"
"compose.ramps.lut.Lut.index of a continuous or stepped table in float64, value by value:\n"
"values (H, W) float32 or float64 -> index (H, W) uint16 (C-contiguous): NaN n + 2, below lo\n"
"n, above hi n + 1, else floor((v - origin) / width) clipped to 0..n-1 when width > 0 (and at\n"
"or above at, with first >= 0: first + floor((v - at) / width2); below it at most first - 1),\n"
"or, when width <= 0, the number of inner edges (inner (k,) float64, ascending) <= v.");

WIDE static PyObject *lut_index(PyObject *self, PyObject *args) {
    PyObject *values_o, *index_o, *inner_o;
    double lo, hi, origin, width, at, width2;
    Py_ssize_t n, first;
    if (!PyArg_ParseTuple(args, "OOddnddOdnd", &values_o, &index_o, &lo, &hi, &n, &origin, &width,
                          &inner_o, &at, &first, &width2))
        return NULL;
    Arr values = {0}, index = {0}, inner = {0};
    PyObject *result = NULL;
    if (take(values_o, &values, 2, K_F32, 0, 0, "values") < 0) {     /* or float64 */
        PyErr_Clear();
        drop(&values);
        if (take(values_o, &values, 2, K_F64, 0, 0, "values") < 0) goto done;
    }
    if (take(index_o, &index, 2, K_UINT, 1, 0, "index") < 0
        || take(inner_o, &inner, 1, K_F64, 0, 1, "inner") < 0)
        goto done;
    Py_ssize_t h = values.b.shape[0], w = values.b.shape[1];
    if (index.b.itemsize != 2 || index.b.shape[0] != h || index.b.shape[1] != w
        || !PyBuffer_IsContiguous(&index.b, 'C') || n < 1 || n + 2 > 65535
        || (!(width > 0) && (!inner.held || !PyBuffer_IsContiguous(&inner.b, 'C')))) {
        PyErr_SetString(PyExc_ValueError, "lut_index: shapes do not fit");
        goto done;
    }
    uint16_t *dst = (uint16_t *)index.b.buf;
    const int f32 = values.kind == K_F32;
    const Py_ssize_t vj = values.b.strides[1];
    const double *edges = inner.held ? (const double *)inner.b.buf : NULL;
    const Py_ssize_t k = inner.held ? inner.b.shape[0] : 0;
    const double top = (double)(n - 1);
    const int split = first >= 0;
    const double above_top = split ? (double)(n - 1 - first) : 0.0;
    /* clip(floor(t), 0, n - 1) equals clip(trunc(t), 0, n - 1) for every finite t (they differ
       only below 0, where both clip to 0), so the clipped double is truncated by the cast */
    Py_BEGIN_ALLOW_THREADS
    for (Py_ssize_t i = 0; i < h; i++) {
        const char *row = AT2(values, i, 0);
        uint16_t *d = dst + i * w;
        if (width > 0 && !split && f32 && vj == (Py_ssize_t)sizeof(float)) {
            const float *fv = (const float *)row;
            for (Py_ssize_t j = 0; j < w; j++) {       /* branch-free: vectorised */
                double v = (double)fv[j];
                double t = v - origin;
                t /= width;
                t = t > 0.0 ? t : 0.0;
                t = t < top ? t : top;
                int32_t e = (int32_t)t;
                e = v < lo ? (int32_t)n : e;
                e = v > hi ? (int32_t)(n + 1) : e;
                e = v != v ? (int32_t)(n + 2) : e;
                d[j] = (uint16_t)e;
            }
            continue;
        }
        for (Py_ssize_t j = 0; j < w; j++) {
            const char *q = row + j * vj;
            double v = f32 ? (double)*(const float *)q : *(const double *)q;
            if (isnan(v)) { d[j] = (uint16_t)(n + 2); continue; }
            /* numpy writes outside low, then outside high, then no-data: the last one wins */
            if (v > hi) { d[j] = (uint16_t)(n + 1); continue; }
            if (v < lo) { d[j] = (uint16_t)n; continue; }
            int32_t e;
            if (width > 0) {
                double t = v - origin;
                t /= width;
                t = t > 0.0 ? t : 0.0;
                t = t < top ? t : top;
                e = (int32_t)t;
                if (split) {
                    if (v >= at) {          /* first + floor(u), u >= 0, at most n - 1 */
                        double u = v - at;
                        u /= width2;
                        u = u < above_top ? u : above_top;
                        e = (int32_t)first + (int32_t)u;
                    } else {                /* min(floor(t), first - 1), clipped */
                        e = e < (int32_t)first - 1 ? e : (int32_t)first - 1;
                        e = e > 0 ? e : 0;
                    }
                }
            } else {                        /* np.searchsorted(inner, v, side="right") */
                Py_ssize_t a = 0, b = k;
                while (a < b) {
                    Py_ssize_t m = (a + b) / 2;
                    if (edges[m] <= v) a = m + 1; else b = m;
                }
                e = (int32_t)(a < n - 1 ? a : n - 1);
            }
            d[j] = (uint16_t)e;
        }
    }
    Py_END_ALLOW_THREADS
    Py_INCREF(Py_None);
    result = Py_None;
done:
    drop(&values); drop(&index); drop(&inner);
    return result;
}

PyDoc_STRVAR(box_sums_doc,
"box_sums(planes, table, index, weight, ro, co, k, out)\n\n"
"compose.previews.block_sums in float32, sum by sum in numpy's order: the values (planes\n"
"(C, h, w) float32, or, with planes None, table (3, n) float32 C-contiguous at index (h, w),\n"
"wrapped as np.take's 'wrap'), each times weight ((h, w) float32) when it is not None, summed\n"
"over blocks of k x k pixels of a grid offset by (ro, co) < k: first down each column of a\n"
"block row (rows in order, from 0), then across (columns in order, from 0), into out (nr, nc,\n"
"C) float32, C-contiguous, overwritten.");

static PyObject *box_sums(PyObject *self, PyObject *args) {
    PyObject *planes_o, *table_o, *index_o, *weight_o, *out_o;
    Py_ssize_t ro, co, k;
    if (!PyArg_ParseTuple(args, "OOOOnnnO", &planes_o, &table_o, &index_o, &weight_o, &ro, &co,
                          &k, &out_o))
        return NULL;
    Arr planes = {0}, table = {0}, index = {0}, weight = {0}, out = {0};
    PyObject *result = NULL;
    float *rows = NULL;
    if (take(planes_o, &planes, 3, K_F32, 0, 1, "planes") < 0
        || take(table_o, &table, 2, K_F32, 0, 1, "table") < 0
        || take(index_o, &index, 2, K_INT, 0, 1, "index") < 0
        || take(weight_o, &weight, 2, K_F32, 0, 1, "weight") < 0
        || take(out_o, &out, 3, K_F32, 1, 0, "out") < 0)
        goto done;
    Py_ssize_t nch, h, w, n = 0;
    if (planes.held) {
        nch = planes.b.shape[0]; h = planes.b.shape[1]; w = planes.b.shape[2];
    } else if (table.held && index.held) {
        nch = 3; h = index.b.shape[0]; w = index.b.shape[1]; n = table.b.shape[1];
    } else {
        nch = h = w = -1;
    }
    if (nch < 1 || (planes.held && (table.held || index.held))
        || (table.held && (table.b.shape[0] != 3 || n < 1 || !PyBuffer_IsContiguous(&table.b, 'C')))
        || (weight.held && (weight.b.shape[0] != h || weight.b.shape[1] != w))
        || k < 1 || ro < 0 || co < 0 || ro >= k || co >= k
        || !PyBuffer_IsContiguous(&out.b, 'C') || out.b.shape[2] != nch
        || out.b.shape[0] != (ro + h + k - 1) / k || out.b.shape[1] != (co + w + k - 1) / k) {
        PyErr_SetString(PyExc_ValueError, "box_sums: shapes do not fit");
        goto done;
    }
    Py_ssize_t nr = out.b.shape[0], nc = out.b.shape[1];
    rows = (float *)PyMem_RawCalloc((size_t)(nch * nr * (w > 0 ? w : 1)), sizeof(float));
    if (!rows) {
        PyErr_NoMemory();
        goto done;
    }
    float *dst = (float *)out.b.buf;
    const float *tab = table.held ? (const float *)table.b.buf : NULL;
    Py_ssize_t *idx = tab ? (Py_ssize_t *)PyMem_RawMalloc(sizeof(Py_ssize_t) * (size_t)(w + 1)) : NULL;
    float *vals = (float *)PyMem_RawMalloc(sizeof(float) * (size_t)(w + 1));
    if ((tab && !idx) || !vals) {
        PyMem_RawFree(idx);
        PyMem_RawFree(vals);
        PyErr_NoMemory();
        goto done;
    }
    Py_BEGIN_ALLOW_THREADS
    const Py_ssize_t wj = weight.held ? weight.b.strides[1] : 0;
    const Py_ssize_t pj = planes.held ? planes.b.strides[2] : 0;
    const Py_ssize_t ij = index.held ? index.b.strides[1] : 0;
    const int isize = index.held ? (int)index.b.itemsize : 0, isigned = index.kind == K_INT;
    for (Py_ssize_t y = 0; y < h; y++) {
        Py_ssize_t b = (y + ro) / k;
        const char *wrow = weight.held ? AT2(weight, y, 0) : NULL;
        if (tab) {                              /* the row's entries, wrapped as np.take's */
            const char *irow = AT2(index, y, 0);
            for (Py_ssize_t x = 0; x < w; x++) {
                const char *q = irow + x * ij;
                int64_t e = isize == 2 && !isigned ? (int64_t)*(const uint16_t *)q
                            : read_int(q, &index);
                if (e < 0 || e >= n) {
                    e %= n;
                    if (e < 0) e += n;
                }
                idx[x] = (Py_ssize_t)e;
            }
        }
        for (Py_ssize_t c = 0; c < nch; c++) {
            float *restrict acc = rows + (c * nr + b) * w;
            const float *v;
            if (tab) {
                const float *tc = tab + c * n;
                for (Py_ssize_t x = 0; x < w; x++) vals[x] = tc[idx[x]];
                v = vals;
            } else if (pj == (Py_ssize_t)sizeof(float)) {
                v = (const float *)AT3(planes, c, y, 0);
            } else {
                const char *prow = AT3(planes, c, y, 0);
                for (Py_ssize_t x = 0; x < w; x++) vals[x] = *(const float *)(prow + x * pj);
                v = vals;
            }
            if (wrow && wj == (Py_ssize_t)sizeof(float)) {
                const float *wt = (const float *)wrow;
                for (Py_ssize_t x = 0; x < w; x++) {
                    float t = v[x] * wt[x];
                    acc[x] = acc[x] + t;
                }
            } else if (wrow) {
                for (Py_ssize_t x = 0; x < w; x++) {
                    float t = v[x] * *(const float *)(wrow + x * wj);
                    acc[x] = acc[x] + t;
                }
            } else {
                for (Py_ssize_t x = 0; x < w; x++) acc[x] = acc[x] + v[x];
            }
        }
    }
    /* then across: each block's columns in order, from 0 */
    for (Py_ssize_t c = 0; c < nch; c++)
        for (Py_ssize_t b = 0; b < nr; b++) {
            const float *acc = rows + (c * nr + b) * w;
            for (Py_ssize_t q = 0; q < nc; q++) {
                Py_ssize_t x0 = q * k - co, x1 = x0 + k;
                x0 = x0 > 0 ? x0 : 0;
                x1 = x1 < w ? x1 : w;
                float sum = 0.0f;
                for (Py_ssize_t x = x0; x < x1; x++) sum = sum + acc[x];
                dst[(b * nc + q) * nch + c] = sum;
            }
        }
    Py_END_ALLOW_THREADS
    PyMem_RawFree(idx);
    PyMem_RawFree(vals);
    Py_INCREF(Py_None);
    result = Py_None;
done:
    PyMem_RawFree(rows);
    drop(&planes); drop(&table); drop(&index); drop(&weight); drop(&out);
    return result;
}

/* flat's float32 steps on one contiguous row of one channel (a function of its own, so that
 * its loops vectorise; built for AVX2 too: the same float32 operations) */
WIDE static __attribute__((noinline)) void flat_row(float *restrict cb,
                                                           const float *restrict a, float s,
                                                           int mode, int opaque, Py_ssize_t w) {
    if (mode == 0 && opaque)
        for (Py_ssize_t j = 0; j < w; j++) cb[j] = over(cb[j], s, 0, 1, 1.0f);
    else if (mode == 0)
        for (Py_ssize_t j = 0; j < w; j++) cb[j] = over(cb[j], s, 0, 0, a[j]);
    else if (opaque)
        for (Py_ssize_t j = 0; j < w; j++) cb[j] = over(cb[j], s, 1, 1, 1.0f);
    else
        for (Py_ssize_t j = 0; j < w; j++) cb[j] = over(cb[j], s, 1, 0, a[j]);
}

PyDoc_STRVAR(flat_doc,
"flat(backdrop, color, alpha, mode, opaque)\n\n"
"compose.composite.composite_over of one flat colour, in place on backdrop (3, H, W) float32:\n"
"color (3,) float32, alpha (H, W) float32; mode 0 'normal' (mix = Cs - Cb) or 1 'multiply'\n"
"(mix = Cb Cs - Cb), mix times alpha unless opaque, Cb + mix (the same float32 operations).");

static PyObject *flat(PyObject *self, PyObject *args) {
    PyObject *back_o, *color_o, *alpha_o;
    int mode, opaque;
    if (!PyArg_ParseTuple(args, "OOOii", &back_o, &color_o, &alpha_o, &mode, &opaque)) return NULL;
    Arr back = {0}, color = {0}, alpha = {0};
    PyObject *result = NULL;
    if (take(back_o, &back, 3, K_F32, 1, 0, "backdrop") < 0
        || take(color_o, &color, 1, K_F32, 0, 0, "color") < 0
        || take(alpha_o, &alpha, 2, K_F32, 0, 0, "alpha") < 0)
        goto done;
    Py_ssize_t h = back.b.shape[1], w = back.b.shape[2];
    if (back.b.shape[0] != 3 || color.b.shape[0] != 3 || alpha.b.shape[0] != h
        || alpha.b.shape[1] != w || mode < 0 || mode > 1) {
        PyErr_SetString(PyExc_ValueError, "flat: shapes do not fit");
        goto done;
    }
    float cs[3];
    for (int c = 0; c < 3; c++) cs[c] = *(const float *)AT(color, c);
    Py_BEGIN_ALLOW_THREADS
    const Py_ssize_t bj = back.b.strides[2], aj = alpha.b.strides[1];
    for (Py_ssize_t i = 0; i < h; i++) {
        const char *arow = AT2(alpha, i, 0);
        for (int c = 0; c < 3; c++) {
            char *brow = (char *)AT3(back, c, i, 0);
            const float s = cs[c];
            if (bj == (Py_ssize_t)sizeof(float) && aj == (Py_ssize_t)sizeof(float)) {
                flat_row((float *)brow, (const float *)arow, s, mode, opaque, w);
            } else {
                for (Py_ssize_t j = 0; j < w; j++) {
                    float *cb = (float *)(brow + j * bj);
                    *cb = over(*cb, s, mode, opaque, opaque ? 1.0f : *(const float *)(arow + j * aj));
                }
            }
        }
    }
    Py_END_ALLOW_THREADS
    Py_INCREF(Py_None);
    result = Py_None;
done:
    drop(&back); drop(&color); drop(&alpha);
    return result;
}

/* ==== lean: reprojected reads (compose.sources.grid, compose.sources.resample) ==============
 * A reprojected window's positions and its plain bilinear read without the GIL (the walk's
 * read-ahead thread makes them while Agg holds the GIL in the window thread): grid_interp is
 * TransformGrid._interpolate, span the cells sample_centres reads, bilinear_at the taps,
 * gathers, lerps and no-data renormalisation of sample_centres; grid_span and grid_bilinear do
 * the last two at the positions grid_interp gives, made on the fly from the nodes (no arrays
 * of positions). The same float64 / float32 operations in the same order as the numpy paths,
 * so the same bits (tests/sources/test_resample_kernels.py compiles and compares). */

/* The node rows a window of h x w pixels needs (TransformGrid._interpolate's band): the first,
 * i0, and how many, nb. 0, or -1 with ValueError set when a pixel lies before the first node
 * or a position is not finite. */
static int grid_band(Py_ssize_t nr, Py_ssize_t nc, double uoff, double voff, double step,
                     Py_ssize_t h, Py_ssize_t w, Py_ssize_t *i0, Py_ssize_t *nb) {
    if (nr < 2 || nc < 2 || h < 1 || w < 1 || !(step > 0)) {
        PyErr_SetString(PyExc_ValueError, "grid: shapes or step do not fit");
        return -1;
    }
    const double v0 = ((double)0 + voff) / step, v1 = ((double)(h - 1) + voff) / step;
    const double u0 = ((double)0 + uoff) / step, u1 = ((double)(w - 1) + uoff) / step;
    if (!(v0 >= 0) || !(u0 >= 0) || !(v1 < 1e15) || !(u1 < 1e15)) {
        PyErr_SetString(PyExc_ValueError, "grid: pixels outside the nodes");
        return -1;
    }
    Py_ssize_t a = (Py_ssize_t)floor(v0), b = (Py_ssize_t)floor(v1);
    if (a > nr - 2) a = nr - 2;
    if (b > nr - 2) b = nr - 2;
    *i0 = a;
    *nb = b - a + 2;
    return 0;
}

/* Pixel columns 0..w-1: the node column left of each (col) and the fraction from it (sfrac). */
static void grid_columns(Py_ssize_t nc, double uoff, double step, Py_ssize_t w,
                         Py_ssize_t *restrict col, double *restrict sfrac) {
    for (Py_ssize_t j = 0; j < w; j++) {
        const double u = ((double)j + uoff) / step;
        Py_ssize_t c = (Py_ssize_t)floor(u);
        if (c > nc - 2) c = nc - 2;
        col[j] = c;
        sfrac[j] = u - (double)c;
    }
}

/* The node rows i0.. (nb of them) of N (nc columns) interpolated at every pixel column. */
WIDE static void grid_across(const double *restrict N, Py_ssize_t nc, Py_ssize_t i0,
                             Py_ssize_t nb, Py_ssize_t w, const Py_ssize_t *restrict col,
                             const double *restrict sfrac, double *restrict across) {
    for (Py_ssize_t r = 0; r < nb; r++) {
        const double *row = N + (i0 + r) * nc;
        double *a = across + r * w;
        for (Py_ssize_t j = 0; j < w; j++) {
            const double s = sfrac[j];
            a[j] = row[col[j]] * (1.0 - s) + row[col[j] + 1] * s;
        }
    }
}

/* Pixel row i between the node rows: the fraction t and the offset of its upper node row's
 * interpolated values in across. */
static inline double grid_row(Py_ssize_t i, double voff, double step, Py_ssize_t nr,
                              Py_ssize_t i0, Py_ssize_t w, Py_ssize_t *at) {
    const double v = ((double)i + voff) / step;
    Py_ssize_t k = (Py_ssize_t)floor(v);
    if (k > nr - 2) k = nr - 2;
    *at = (k - i0) * w;
    return v - (double)k;
}

WIDE static void grid_rows(const double *restrict across, Py_ssize_t nr, double voff,
                           double step, Py_ssize_t i0, double *restrict O, Py_ssize_t h,
                           Py_ssize_t w) {
    for (Py_ssize_t i = 0; i < h; i++) {
        Py_ssize_t at;
        const double t = grid_row(i, voff, step, nr, i0, w, &at);
        const double *a = across + at, *b = a + w;
        double *o = O + i * w;
        for (Py_ssize_t j = 0; j < w; j++) {
            double m = t * (b[j] - a[j]);
            o[j] = m + a[j];
        }
    }
}

PyDoc_STRVAR(grid_interp_doc,
"grid_interp(nodes, uoff, voff, step, out)\n\n"
"compose.sources.grid.TransformGrid._interpolate: nodes (rows, cols) float64, C-contiguous;\n"
"out (h, w) float64, C-contiguous, gets the nodes interpolated bilinearly at u = (j + uoff) /\n"
"step, v = (i + voff) / step (node units) for pixel column j, row i: along node rows first,\n"
"then between them, as the numpy path does. ValueError if a pixel lies before the first node.");

static PyObject *grid_interp(PyObject *self, PyObject *args) {
    PyObject *nodes_o, *out_o;
    double uoff, voff, step;
    if (!PyArg_ParseTuple(args, "OdddO", &nodes_o, &uoff, &voff, &step, &out_o)) return NULL;
    Arr no = {0}, out = {0};
    PyObject *result = NULL;
    double *across = NULL, *sfrac = NULL;
    Py_ssize_t *col = NULL, i0, nb;
    if (take(nodes_o, &no, 2, K_F64, 0, 0, "nodes") < 0
        || take(out_o, &out, 2, K_F64, 1, 0, "out") < 0)
        goto done;
    const Py_ssize_t nr = no.b.shape[0], nc = no.b.shape[1];
    const Py_ssize_t h = out.b.shape[0], w = out.b.shape[1];
    if (!PyBuffer_IsContiguous(&no.b, 'C') || !PyBuffer_IsContiguous(&out.b, 'C')) {
        PyErr_SetString(PyExc_ValueError, "grid_interp: shapes, types or strides do not fit");
        goto done;
    }
    if (grid_band(nr, nc, uoff, voff, step, h, w, &i0, &nb) < 0) goto done;
    across = PyMem_RawMalloc((size_t)(nb * w) * sizeof(double));
    sfrac = PyMem_RawMalloc((size_t)w * sizeof(double));
    col = PyMem_RawMalloc((size_t)w * sizeof(Py_ssize_t));
    if (across == NULL || sfrac == NULL || col == NULL) {
        PyErr_NoMemory();
        goto done;
    }
    const double *N = (const double *)no.b.buf;
    double *O = (double *)out.b.buf;
    Py_BEGIN_ALLOW_THREADS
    grid_columns(nc, uoff, step, w, col, sfrac);
    grid_across(N, nc, i0, nb, w, col, sfrac, across);
    grid_rows(across, nr, voff, step, i0, O, h, w);
    Py_END_ALLOW_THREADS
    Py_INCREF(Py_None);
    result = Py_None;
done:
    PyMem_RawFree(across); PyMem_RawFree(sfrac); PyMem_RawFree(col);
    drop(&no); drop(&out);
    return result;
}

PyDoc_STRVAR(span_doc,
"span(x, y) -> (xmin, xmax, ymin, ymax)\n\n"
"floor of the smallest and largest of x and of y (float64, C-contiguous, same size), as\n"
"floats. ValueError if any is NaN.");

static PyObject *span(PyObject *self, PyObject *args) {
    PyObject *x_o, *y_o;
    if (!PyArg_ParseTuple(args, "OO", &x_o, &y_o)) return NULL;
    Arr xa = {0}, ya = {0};
    PyObject *result = NULL;
    if (PyObject_GetBuffer(x_o, &xa.b, PyBUF_STRIDES | PyBUF_FORMAT) < 0) goto done;
    xa.held = 1;
    if (PyObject_GetBuffer(y_o, &ya.b, PyBUF_STRIDES | PyBUF_FORMAT) < 0) goto done;
    ya.held = 1;
    if (kind_of(&xa.b) != K_F64 || kind_of(&ya.b) != K_F64
        || !PyBuffer_IsContiguous(&xa.b, 'C') || !PyBuffer_IsContiguous(&ya.b, 'C')
        || xa.b.len != ya.b.len || xa.b.len < 8) {
        PyErr_SetString(PyExc_ValueError, "span: shapes, types or strides do not fit");
        goto done;
    }
    const Py_ssize_t m = xa.b.len / 8;
    const double *X = (const double *)xa.b.buf, *Y = (const double *)ya.b.buf;
    double xl = X[0], xh = X[0], yl = Y[0], yh = Y[0];
    int nan = 0;
    Py_BEGIN_ALLOW_THREADS
    for (Py_ssize_t i = 0; i < m; i++) {
        const double a = X[i], b = Y[i];
        if (a != a || b != b) { nan = 1; break; }
        xl = a < xl ? a : xl; xh = a > xh ? a : xh;
        yl = b < yl ? b : yl; yh = b > yh ? b : yh;
    }
    Py_END_ALLOW_THREADS
    if (nan) {
        PyErr_SetString(PyExc_ValueError, "span: NaN position");
        goto done;
    }
    result = Py_BuildValue("dddd", floor(xl), floor(xh), floor(yl), floor(yh));
done:
    drop(&xa); drop(&ya);
    return result;
}

/* resample._triangle of one float32 distance */
static inline float tri(float d) {
    const float t = 1.0f - fabsf(d);
    return t > 0.0f ? t : 0.0f;
}

/* bilinear_one's no-data renormalisation for a position whose lerps gave NaN: p its first tap,
 * dx, dy the fractions from it. *bad = 1 when the cell holding it lies outside the cells. */
static inline float bilinear_renorm(const float *restrict f, int64_t bh, int64_t bw,
                                    int64_t row0, int64_t col0, double x, double y,
                                    const float *restrict p, float dx, float dy, int *bad) {
    const float wx[2] = {tri((dx - 0.0f) / 1.0f), tri((dx - 1.0f) / 1.0f)};
    const float wy[2] = {tri((dy - 0.0f) / 1.0f), tri((dy - 1.0f) / 1.0f)};
    float acc = 0.0f, norm = 0.0f;
    for (int ky = 0; ky < 2; ky++)
        for (int kx = 0; kx < 2; kx++) {
            const float cell = p[ky * bw + kx];
            const int ok = isfinite(cell);
            float wk = wy[ky] * wx[kx];
            wk *= ok ? 1.0f : 0.0f;
            acc += wk * (ok ? cell : 0.0f);
            norm += wk;
        }
    float v = acc / norm;
    if (fabsf(norm) < 1e-5f) v = NAN;
    /* the cell holding the position (u = x + 0.5) must hold data */
    const int64_t cr = (int64_t)floor(y + 0.5) - row0, cc = (int64_t)floor(x + 0.5) - col0;
    if (cr < 0 || cr >= bh || cc < 0 || cc >= bw) {
        *bad = 1;
        return v;
    }
    if (!isfinite(f[cr * bw + cc])) v = NAN;
    return v;
}

/* sample_centres' plain bilinear value at cell-centre position (x, y) from the cells f (bh x bw
 * from row0, col0): resample._taps, _lerp2 and, where that gives NaN, _weighted over the valid
 * taps with the containing cell's test, step for step. 1 when a tap lies outside the cells. */
static inline int bilinear_one(const float *restrict f, int64_t bh, int64_t bw, int64_t row0,
                               int64_t col0, double x, double y, float *restrict out) {
    const double fx = floor(x), fy = floor(y);         /* the first tap: left / above */
    const float dx = (float)(x - fx), dy = (float)(y - fy);
    if (!(fx >= -9e15 && fx <= 9e15 && fy >= -9e15 && fy <= 9e15)) return 1;
    const int64_t c = (int64_t)fx - col0, r = (int64_t)fy - row0;
    if (c < 0 || c > bw - 2 || r < 0 || r > bh - 2) return 1;
    const float *p = f + r * bw + c;
    float ta = p[0], tb = p[1], tc = p[bw], td = p[bw + 1];
    tb -= ta; tb *= dx; ta += tb;                     /* resample._lerp2, step for step */
    td -= tc; td *= dx; tc += td;
    tc -= ta; tc *= dy;
    float v = ta + tc;
    if (v != v) {                                       /* resample._weighted over valid taps */
        int bad = 0;
        v = bilinear_renorm(f, bh, bw, row0, col0, x, y, p, dx, dy, &bad);
        if (bad) return 1;
    }
    *out = v;
    return 0;
}

/* bilinear_at's loop: 1 when a tap lies outside the cells (the positions after it not made) */
WIDE static int bilinear_at_loop(const float *restrict f, const int64_t bh, const int64_t bw,
                                 const int64_t row0, const int64_t col0,
                                 const double *restrict X, const double *restrict Y,
                                 float *restrict o, const Py_ssize_t m) {
    for (Py_ssize_t i = 0; i < m; i++)
        if (bilinear_one(f, bh, bw, row0, col0, X[i], Y[i], o + i)) return 1;
    return 0;
}

PyDoc_STRVAR(bilinear_at_doc,
"bilinear_at(cells, row0, col0, x, y, out)\n\n"
"compose.sources.resample.sample_centres' plain bilinear read at cell-centre positions x, y\n"
"(float64, C-contiguous, same size): cells (bh, bw) float32, C-contiguous, source cells from\n"
"row0, col0 (NaN = no data); out (float32, same size as x) gets, per position, the float32\n"
"lerps of its 4 taps (resample._taps, resample._lerp2) and, where that is NaN, the triangle\n"
"kernel's mean over the valid taps (no data below 1e-5 of weight, or when the cell holding\n"
"the position is no data), step for step as the numpy path. ValueError if a tap lies outside\n"
"the cells.");

static PyObject *bilinear_at(PyObject *self, PyObject *args) {
    PyObject *cells_o, *x_o, *y_o, *out_o;
    long long row0, col0;
    if (!PyArg_ParseTuple(args, "OLLOOO", &cells_o, &row0, &col0, &x_o, &y_o, &out_o))
        return NULL;
    Arr ce = {0}, xa = {0}, ya = {0}, out = {0};
    PyObject *result = NULL;
    if (take(cells_o, &ce, 2, K_F32, 0, 0, "cells") < 0) goto done;
    if (PyObject_GetBuffer(x_o, &xa.b, PyBUF_STRIDES | PyBUF_FORMAT) < 0) goto done;
    xa.held = 1;
    if (PyObject_GetBuffer(y_o, &ya.b, PyBUF_STRIDES | PyBUF_FORMAT) < 0) goto done;
    ya.held = 1;
    if (PyObject_GetBuffer(out_o, &out.b, PyBUF_STRIDES | PyBUF_FORMAT | PyBUF_WRITABLE) < 0)
        goto done;
    out.held = 1;
    if (kind_of(&xa.b) != K_F64 || kind_of(&ya.b) != K_F64 || kind_of(&out.b) != K_F32
        || !PyBuffer_IsContiguous(&ce.b, 'C') || !PyBuffer_IsContiguous(&xa.b, 'C')
        || !PyBuffer_IsContiguous(&ya.b, 'C') || !PyBuffer_IsContiguous(&out.b, 'C')
        || xa.b.len != ya.b.len || out.b.len * 2 != xa.b.len || ce.b.shape[1] < 2) {
        PyErr_SetString(PyExc_ValueError, "bilinear_at: shapes, types or strides do not fit");
        goto done;
    }
    const int64_t bh = ce.b.shape[0], bw = ce.b.shape[1];
    const Py_ssize_t m = out.b.len / 4;
    const float *f = (const float *)ce.b.buf;
    const double *X = (const double *)xa.b.buf, *Y = (const double *)ya.b.buf;
    float *o = (float *)out.b.buf;
    int outside = 0;
    Py_BEGIN_ALLOW_THREADS
    outside = bilinear_at_loop(f, bh, bw, row0, col0, X, Y, o, m);
    Py_END_ALLOW_THREADS
    if (outside) {
        PyErr_SetString(PyExc_ValueError, "bilinear_at: a tap lies outside the cells");
        goto done;
    }
    Py_INCREF(Py_None);
    result = Py_None;
done:
    drop(&ce); drop(&xa); drop(&ya); drop(&out);
    return result;
}

/* grid_bilinear's loop, per pixel row: the positions as grid_interp makes them (x from
 * across_x, y from across_y) with their first taps' flat indices (int32: cells of fewer than
 * 2**31 - bw - 2) and fractions into the row scratch, then the 4 gathers and float32 lerps,
 * then bilinear_renorm where they gave NaN: bilinear_one's steps, in passes the compiler can
 * vectorise. 1 when a tap lies outside the cells. */
WIDE static int grid_walk(const double *restrict ax_, const double *restrict ay_,
                          Py_ssize_t nr, double voff, double step, Py_ssize_t i0,
                          Py_ssize_t h, Py_ssize_t w, double *restrict scratch,
                          const float *restrict f, int64_t bh, int64_t bw, int64_t row0,
                          int64_t col0, float *restrict o) {
    double *restrict xr = scratch, *restrict yr = scratch + w;
    int32_t *restrict idx = (int32_t *)(scratch + 2 * w);
    float *restrict dxs = (float *)(idx + w), *restrict dys = dxs + w;
    const double c0 = (double)col0, r0 = (double)row0, bwd = (double)bw;
    const double cmax = (double)(bw - 2), rmax = (double)(bh - 2);
    const int32_t bw32 = (int32_t)bw;
    for (Py_ssize_t i = 0; i < h; i++) {
        Py_ssize_t at;
        const double t = grid_row(i, voff, step, nr, i0, w, &at);
        const double *xa = ax_ + at, *xb = xa + w, *ya = ay_ + at, *yb = ya + w;
        int bad = 0;
        for (Py_ssize_t j = 0; j < w; j++) {
            double mx = t * (xb[j] - xa[j]), my = t * (yb[j] - ya[j]);
            const double x = mx + xa[j], y = my + ya[j];
            xr[j] = x;
            yr[j] = y;
            const double fx = floor(x), fy = floor(y);     /* the first tap: left / above */
            dxs[j] = (float)(x - fx);
            dys[j] = (float)(y - fy);
            const double c = fx - c0, r = fy - r0;          /* whole numbers, exact */
            const int ok = (c >= 0.0) & (c <= cmax) & (r >= 0.0) & (r <= rmax);
            bad |= !ok;
            idx[j] = (int32_t)(ok ? r * bwd + c : 0.0);
        }
        if (bad) return 1;
        float *restrict orow = o + i * w;
        for (int32_t j = 0; j < (int32_t)w; j++) {
            const int32_t k = idx[j];
            float ta = f[k], tb = f[k + 1], tc = f[k + bw32], td = f[k + bw32 + 1];
            const float dx = dxs[j], dy = dys[j];
            tb -= ta; tb *= dx; ta += tb;                 /* resample._lerp2, step for step */
            td -= tc; td *= dx; tc += td;
            tc -= ta; tc *= dy;
            orow[j] = ta + tc;
        }
        for (Py_ssize_t j = 0; j < w; j++)
            if (orow[j] != orow[j]) {
                orow[j] = bilinear_renorm(f, bh, bw, row0, col0, xr[j], yr[j], f + idx[j],
                                          dxs[j], dys[j], &bad);
                if (bad) return 1;
            }
    }
    return 0;
}

/* grid_span's bounds: the positions (grid_interp's arithmetic) at the first and last pixel
 * row and column of every node cell the window covers -- the corners of the pixels inside
 * each cell, where a bilinear interpolation takes its extremes -- into b (xmin, xmax, ymin,
 * ymax). 1 when one is NaN. */
static int grid_corners(const double *restrict ax_, const double *restrict ay_, Py_ssize_t nr,
                        double voff, double step, Py_ssize_t i0, Py_ssize_t h, Py_ssize_t w,
                        const Py_ssize_t *restrict col, double *b) {
    double xl = INFINITY, xh = -INFINITY, yl = INFINITY, yh = -INFINITY;
    int nan = 0;
    Py_ssize_t prev_at = -1;
    for (Py_ssize_t i = 0; i < h; i++) {
        Py_ssize_t at, next_at = -1;
        const double t = grid_row(i, voff, step, nr, i0, w, &at);
        if (i + 1 < h) grid_row(i + 1, voff, step, nr, i0, w, &next_at);
        if (at == prev_at && at == next_at) {           /* inside a node cell's run of rows */
            prev_at = at;
            continue;
        }
        prev_at = at;
        const double *xa = ax_ + at, *xb = xa + w, *ya = ay_ + at, *yb = ya + w;
        for (Py_ssize_t j = 0; j < w; j++) {
            if (j > 0 && j + 1 < w && col[j - 1] == col[j] && col[j + 1] == col[j]) continue;
            double mx = t * (xb[j] - xa[j]), my = t * (yb[j] - ya[j]);
            const double x = mx + xa[j], y = my + ya[j];
            if (x != x || y != y) nan = 1;
            xl = x < xl ? x : xl; xh = x > xh ? x : xh;
            yl = y < yl ? y : yl; yh = y > yh ? y : yh;
        }
    }
    b[0] = xl; b[1] = xh; b[2] = yl; b[3] = yh;
    return nan;
}

/* The shared part of grid_span and grid_bilinear: the node arrays, their band and the
 * interpolation along the node rows (across: x's nb x w values, then y's). */
typedef struct {
    Arr nx, ny;
    Py_ssize_t nr, nc, i0, nb;
    double *across;
    Py_ssize_t *col;
} GridPass;

static int grid_pass_open(GridPass *g, PyObject *nx_o, PyObject *ny_o, double uoff, double voff,
                          double step, Py_ssize_t h, Py_ssize_t w) {
    g->across = NULL;
    g->col = NULL;
    g->nx.held = g->ny.held = 0;
    if (take(nx_o, &g->nx, 2, K_F64, 0, 0, "nodes x") < 0
        || take(ny_o, &g->ny, 2, K_F64, 0, 0, "nodes y") < 0)
        return -1;
    g->nr = g->nx.b.shape[0];
    g->nc = g->nx.b.shape[1];
    if (!PyBuffer_IsContiguous(&g->nx.b, 'C') || !PyBuffer_IsContiguous(&g->ny.b, 'C')
        || g->ny.b.shape[0] != g->nr || g->ny.b.shape[1] != g->nc) {
        PyErr_SetString(PyExc_ValueError, "grid: node arrays do not fit");
        return -1;
    }
    if (grid_band(g->nr, g->nc, uoff, voff, step, h, w, &g->i0, &g->nb) < 0) return -1;
    g->across = PyMem_RawMalloc((size_t)(2 * g->nb * w + 4 * w) * sizeof(double));
    double *sfrac = PyMem_RawMalloc((size_t)w * sizeof(double));
    Py_ssize_t *col = g->col = PyMem_RawMalloc((size_t)w * sizeof(Py_ssize_t));
    if (g->across == NULL || sfrac == NULL || col == NULL) {
        PyMem_RawFree(sfrac);
        PyErr_NoMemory();
        return -1;
    }
    const double *X = (const double *)g->nx.b.buf, *Y = (const double *)g->ny.b.buf;
    Py_BEGIN_ALLOW_THREADS
    grid_columns(g->nc, uoff, step, w, col, sfrac);
    grid_across(X, g->nc, g->i0, g->nb, w, col, sfrac, g->across);
    grid_across(Y, g->nc, g->i0, g->nb, w, col, sfrac, g->across + g->nb * w);
    Py_END_ALLOW_THREADS
    PyMem_RawFree(sfrac);
    return 0;
}

static void grid_pass_close(GridPass *g) {
    PyMem_RawFree(g->across);
    PyMem_RawFree(g->col);
    g->across = NULL;
    g->col = NULL;
    drop(&g->nx); drop(&g->ny);
}

PyDoc_STRVAR(grid_span_doc,
"grid_span(nodes_x, nodes_y, uoff, voff, step, h, w) -> (xmin, xmax, ymin, ymax)\n\n"
"Whole cells around the positions grid_interp gives for an h x w window, from its positions\n"
"at the corners of the pixels inside every node cell (a bilinear interpolation's extremes),\n"
"floored, a cell more on every side: nodes_x, nodes_y (rows, cols) float64, C-contiguous.\n"
"ValueError if a position is NaN.");

static PyObject *grid_span(PyObject *self, PyObject *args) {
    PyObject *nx_o, *ny_o;
    double uoff, voff, step;
    Py_ssize_t h, w;
    if (!PyArg_ParseTuple(args, "OOdddnn", &nx_o, &ny_o, &uoff, &voff, &step, &h, &w))
        return NULL;
    GridPass g;
    PyObject *result = NULL;
    double b[4];
    int nan = 0;
    if (grid_pass_open(&g, nx_o, ny_o, uoff, voff, step, h, w) < 0) goto done;
    Py_BEGIN_ALLOW_THREADS
    nan = grid_corners(g.across, g.across + g.nb * w, g.nr, voff, step, g.i0, h, w, g.col, b);
    Py_END_ALLOW_THREADS
    if (nan) {
        PyErr_SetString(PyExc_ValueError, "grid_span: NaN position");
        goto done;
    }
    /* a cell more on every side: the positions between the corners may round past them */
    result = Py_BuildValue("dddd", floor(b[0]) - 1.0, floor(b[1]) + 1.0, floor(b[2]) - 1.0,
                           floor(b[3]) + 1.0);
done:
    grid_pass_close(&g);
    return result;
}

PyDoc_STRVAR(grid_bilinear_doc,
"grid_bilinear(nodes_x, nodes_y, uoff, voff, step, cells, row0, col0, out)\n\n"
"bilinear_at at the positions grid_interp gives for the window of out (h, w) float32,\n"
"C-contiguous, made on the fly from nodes_x, nodes_y (rows, cols) float64: the same values.\n"
"cells (bh, bw) float32 from row0, col0. ValueError if a tap lies outside the cells.");

static PyObject *grid_bilinear(PyObject *self, PyObject *args) {
    PyObject *nx_o, *ny_o, *cells_o, *out_o;
    double uoff, voff, step;
    long long row0, col0;
    if (!PyArg_ParseTuple(args, "OOdddOLLO", &nx_o, &ny_o, &uoff, &voff, &step, &cells_o,
                          &row0, &col0, &out_o))
        return NULL;
    GridPass g;
    g.across = NULL;
    g.nx.held = g.ny.held = 0;
    Arr ce = {0}, out = {0};
    PyObject *result = NULL;
    int outside = 0;
    if (take(cells_o, &ce, 2, K_F32, 0, 0, "cells") < 0
        || take(out_o, &out, 2, K_F32, 1, 0, "out") < 0)
        goto done;
    if (!PyBuffer_IsContiguous(&ce.b, 'C') || !PyBuffer_IsContiguous(&out.b, 'C')
        || ce.b.shape[1] < 2) {
        PyErr_SetString(PyExc_ValueError, "grid_bilinear: shapes, types or strides do not fit");
        goto done;
    }
    const Py_ssize_t h = out.b.shape[0], w = out.b.shape[1];
    if (grid_pass_open(&g, nx_o, ny_o, uoff, voff, step, h, w) < 0) goto done;
    const float *f = (const float *)ce.b.buf;
    float *o = (float *)out.b.buf;
    const int64_t bh = ce.b.shape[0], bw = ce.b.shape[1];
    if (bh * bw > (int64_t)INT32_MAX - bw - 2) {          /* not for int32 indices */
        PyErr_SetString(PyExc_ValueError, "grid_bilinear: too many cells");
        goto done;
    }
    Py_BEGIN_ALLOW_THREADS
    outside = grid_walk(g.across, g.across + g.nb * w, g.nr, voff, step, g.i0, h, w,
                        g.across + 2 * g.nb * w, f, bh, bw, row0, col0, o);
    Py_END_ALLOW_THREADS
    if (outside) {
        PyErr_SetString(PyExc_ValueError, "grid_bilinear: a tap lies outside the cells");
        goto done;
    }
    Py_INCREF(Py_None);
    result = Py_None;
done:
    grid_pass_close(&g);
    drop(&ce); drop(&out);
    return result;
}
/* ==== end of lean's section ================================================================ */

/* ---- An overlay's flat colour composited and measured in one pass (compose.measure) ----
 * flat_gather composites like flat and, row by row before a row is composited, gathers what
 * overlay's first pass gathers from the backdrop (the drawn pixels' weights and 8-bit colours
 * beneath): the backdrop's and alpha's rows are read once, where compositing and measuring
 * apart read them twice. overlay_bins is overlay's second pass on what was gathered. */

PyDoc_STRVAR(flat_gather_doc,
"flat_gather(backdrop, color, alpha, mode, opaque, r0, r1, c0, c1, scratch_w, scratch_c)\n"
"    -> (pixels, least weight, largest weight) or None\n\n"
"flat(backdrop, color, alpha, mode, opaque), and before each row of rows r0..r1-1 is\n"
"composited, overlay's first pass over its columns c0..c1-1: the pixels drawn (alpha > 0),\n"
"row-major, their weights (alpha) to scratch_w (float32) and the 8-bit codes of the backdrop\n"
"beneath (r << 16 | g << 8 | b) to scratch_c (uint32), each at least the region's size.\n"
"None (nothing done) unless the backdrop's and alpha's rows are contiguous.");

static PyObject *flat_gather(PyObject *self, PyObject *args) {
    PyObject *back_o, *color_o, *alpha_o, *sw_o, *sc_o;
    int mode, opaque;
    Py_ssize_t r0, r1, c0, c1;
    if (!PyArg_ParseTuple(args, "OOOiinnnnOO", &back_o, &color_o, &alpha_o, &mode, &opaque,
                          &r0, &r1, &c0, &c1, &sw_o, &sc_o))
        return NULL;
    Arr back = {0}, color = {0}, alpha = {0}, scratch_w = {0}, scratch_c = {0};
    PyObject *result = NULL;
    if (take(back_o, &back, 3, K_F32, 1, 0, "backdrop") < 0
        || take(color_o, &color, 1, K_F32, 0, 0, "color") < 0
        || take(alpha_o, &alpha, 2, K_F32, 0, 0, "alpha") < 0
        || take(sw_o, &scratch_w, 1, K_F32, 1, 0, "scratch_w") < 0
        || take(sc_o, &scratch_c, 1, K_UINT, 1, 0, "scratch_c") < 0)
        goto done;
    Py_ssize_t h = back.b.shape[1], w = back.b.shape[2];
    if (back.b.shape[0] != 3 || color.b.shape[0] != 3 || alpha.b.shape[0] != h
        || alpha.b.shape[1] != w || mode < 0 || mode > 1
        || r0 < 0 || c0 < 0 || r1 > h || c1 > w || r0 > r1 || c0 > c1
        || c1 - c0 >= ((Py_ssize_t)1 << 30)
        || !PyBuffer_IsContiguous(&scratch_w.b, 'C') || !PyBuffer_IsContiguous(&scratch_c.b, 'C')
        || scratch_c.b.itemsize != 4 || scratch_w.b.shape[0] < (r1 - r0) * (c1 - c0)
        || scratch_c.b.shape[0] < (r1 - r0) * (c1 - c0)) {
        PyErr_SetString(PyExc_ValueError, "flat_gather: shapes do not fit");
        goto done;
    }
    if (back.b.strides[2] != (Py_ssize_t)sizeof(float)
        || alpha.b.strides[1] != (Py_ssize_t)sizeof(float)) {
        Py_INCREF(Py_None);
        result = Py_None;
        goto done;
    }
    float cs[3];
    for (int c = 0; c < 3; c++) cs[c] = *(const float *)AT(color, c);
    float range[2] = {INFINITY, 0.0f};
    Py_ssize_t pixels = 0;
    float *wbuf = (float *)scratch_w.b.buf;
    uint32_t *cbuf = (uint32_t *)scratch_c.b.buf;
    int32_t *cols = (int32_t *)PyMem_RawMalloc(sizeof(int32_t) * (size_t)(c1 - c0 + 4));
    if (!cols) {
        PyErr_NoMemory();
        goto done;
    }
    Py_BEGIN_ALLOW_THREADS
    for (Py_ssize_t i = 0; i < h; i++) {
        if (i >= r0 && i < r1)      /* measured before the row is composited */
            pixels += overlay_gather(AT2(alpha, 0, 0), alpha.b.strides[0], AT3(back, 0, 0, 0),
                                     AT3(back, 1, 0, 0), AT3(back, 2, 0, 0), back.b.strides[1],
                                     i, i + 1, c0, c1, cols, wbuf + pixels, cbuf + pixels, range);
        const float *a = (const float *)AT2(alpha, i, 0);
        for (int c = 0; c < 3; c++)
            flat_row((float *)AT3(back, c, i, 0), a, cs[c], mode, opaque, w);
    }
    Py_END_ALLOW_THREADS
    PyMem_RawFree(cols);
    result = Py_BuildValue("nff", pixels, (double)range[0], (double)range[1]);
done:
    drop(&back); drop(&color); drop(&alpha); drop(&scratch_w); drop(&scratch_c);
    return result;
}

PyDoc_STRVAR(overlay_bins_doc,
"overlay_bins(scratch_w, scratch_c, pixels, least, largest, y_part, step, ytab, lbin, ctab,\n"
"             contrast, lightness, bits, dense, touched) -> (pixels, touched_count, total)\n\n"
"overlay's second pass on the first pixels of what flat_gather gathered (their weights\n"
"float32 and 8-bit colours uint32, the weights' least and largest): the same histograms and\n"
"result as overlay (see there).");

static PyObject *overlay_bins(PyObject *self, PyObject *args) {
    PyObject *sw_o, *sc_o, *ytab_o, *lbin_o, *ctab_o, *contrast_o, *light_o, *dense_o, *touched_o;
    Py_ssize_t pixels;
    float wmin, wmax;
    double y_part, step;
    int bits;
    if (!PyArg_ParseTuple(args, "OOnffddOOOOOiOO", &sw_o, &sc_o, &pixels, &wmin, &wmax, &y_part,
                          &step, &ytab_o, &lbin_o, &ctab_o, &contrast_o, &light_o, &bits,
                          &dense_o, &touched_o))
        return NULL;
    Arr scratch_w = {0}, scratch_c = {0}, ytab = {0}, lbin = {0}, ctab = {0}, con = {0},
        light = {0}, dense = {0}, touched = {0};
    Tables t;
    PyObject *result = NULL;
    if (take(sw_o, &scratch_w, 1, K_F32, 0, 0, "scratch_w") < 0
        || take(sc_o, &scratch_c, 1, K_UINT, 0, 0, "scratch_c") < 0
        || tables(ytab_o, lbin_o, &ytab, &lbin, &t) < 0
        || take(ctab_o, &ctab, 1, K_INT, 0, 0, "ctab") < 0
        || take(contrast_o, &con, 1, K_F64, 1, 0, "contrast") < 0
        || take(light_o, &light, 1, K_F64, 1, 1, "lightness") < 0
        || take(dense_o, &dense, 1, K_F64, 1, 1, "dense") < 0
        || take(touched_o, &touched, 1, K_INT, 1, 1, "touched") < 0)
        goto done;
    if (pixels < 0 || !PyBuffer_IsContiguous(&scratch_w.b, 'C')
        || !PyBuffer_IsContiguous(&scratch_c.b, 'C') || scratch_c.b.itemsize != 4
        || scratch_w.b.shape[0] < pixels || scratch_c.b.shape[0] < pixels
        || !PyBuffer_IsContiguous(&con.b, 'C') || !PyBuffer_IsContiguous(&ctab.b, 'C')
        || ctab.b.itemsize != 2 || ctab.kind != K_INT || ctab.b.shape[0] != t.ncell
        || (light.held && (!PyBuffer_IsContiguous(&light.b, 'C') || light.b.shape[0] < 101))
        || (dense.held != touched.held) || bits < 1 || bits > 8
        || (dense.held && (!PyBuffer_IsContiguous(&dense.b, 'C')
                           || dense.b.shape[0] < ((Py_ssize_t)1 << (3 * bits))
                           || !PyBuffer_IsContiguous(&touched.b, 'C')
                           || touched.b.itemsize != sizeof(Py_ssize_t) || touched.kind != K_INT))) {
        PyErr_SetString(PyExc_ValueError, "overlay_bins: shapes do not fit");
        goto done;
    }
    double total = 0.0;
    Py_ssize_t nt;
    Py_BEGIN_ALLOW_THREADS
    nt = overlay_bins_all((const float *)scratch_w.b.buf, (const uint32_t *)scratch_c.b.buf,
                          pixels, &t, (const int16_t *)ctab.b.buf, y_part, step, con.b.shape[0],
                          (double *)con.b.buf, light.held ? (double *)light.b.buf : NULL,
                          dense.held ? (double *)dense.b.buf : NULL,
                          touched.held ? (Py_ssize_t *)touched.b.buf : NULL,
                          touched.held ? touched.b.shape[0] : 0, bits, &total);
    Py_END_ALLOW_THREADS
    if (nt < 0) {
        PyErr_SetString(PyExc_ValueError, "overlay_bins: touched is too short");
        goto done;
    }
    result = overlay_result(pixels, nt, total, wmin, wmax);
done:
    drop(&scratch_w); drop(&scratch_c); drop(&ytab); drop(&lbin); drop(&ctab); drop(&con);
    drop(&light); drop(&dense); drop(&touched);
    return result;
}

/* lean: a draft's lines thinned (compose.sources.vector._thin_rows) */

PyDoc_STRVAR(thin_lines_doc,
"thin_lines(xy, counts, tolerance, out_xy, out_counts) -> vertices or None\n\n"
"Rows of 2D lines (counts[i] vertices each, in turn in xy: (N, 2) float64, C-contiguous; 0\n"
"for an empty row) thinned within tolerance as GEOS 3.14 does (shapely 2\n"
"remove_repeated_points, then simplify without topology): a vertex within tolerance of the\n"
"last one kept dropped, the last vertex kept (the one kept before it dropped when within\n"
"tolerance), then Douglas-Peucker keeping both ends (a point's distance to a segment by\n"
"GEOS's Distance::pointToSegment, the same float64 operations in the same order). Writes the\n"
"rows' vertices to out_xy ((N, 2) float64) and their counts to out_counts (int64); returns the\n"
"vertices written. None (nothing written) when a coordinate is not finite or a row has 1\n"
"vertex: the caller thins those with shapely.");

/* d[k] for i < k < j: the distance from vertex k of pts (x, y pairs) to the segment from vertex
 * i to vertex j, as GEOS's algorithm::Distance::pointToSegment computes it (the same float64
 * operations in the same order; each of its three cases computed and the one it takes kept,
 * so the loop has no branch and runs on vectors too). */
static WIDE void segment_distances(const double *pts, Py_ssize_t i, Py_ssize_t j, double *d) {
    double ax = pts[2 * i], ay = pts[2 * i + 1], bx = pts[2 * j], by = pts[2 * j + 1];
    if (ax == bx && ay == by) {
        for (Py_ssize_t k = i + 1; k < j; k++) {
            double dx = pts[2 * k] - ax, dy = pts[2 * k + 1] - ay;
            d[k] = sqrt(dx * dx + dy * dy);
        }
        return;
    }
    double ex = bx - ax, ey = by - ay;
    double len2 = ex * ex + ey * ey, root = sqrt(len2);
    for (Py_ssize_t k = i + 1; k < j; k++) {
        double px = pts[2 * k], py = pts[2 * k + 1];
        double dax = px - ax, day = py - ay, dbx = px - bx, dby = py - by;
        double r = (dax * ex + day * ey) / len2;
        double s = ((ay - py) * ex - (ax - px) * ey) / len2;
        double da = sqrt(dax * dax + day * day), db = sqrt(dbx * dbx + dby * dby);
        double mid = fabs(s) * root;
        d[k] = r <= 0.0 ? da : (r >= 1.0 ? db : mid);
    }
}

static double dist2(const double *p, const double *q) {
    double dx = p[0] - q[0], dy = p[1] - q[1];
    return dx * dx + dy * dy;
}

/* One row of n >= 2 vertices from src thinned into dst (2 * n doubles; may not overlap);
 * use, stack and d: n, 2 n and n entries. Returns the vertices written. */
static Py_ssize_t thin_row(const double *src, Py_ssize_t n, double tol, double *dst,
                           unsigned char *use, Py_ssize_t *stack, double *d) {
    double tol2 = tol * tol;
    Py_ssize_t m = 0;
    if (n <= 2) {                   /* too short to filter: as it is */
        memcpy(dst, src, sizeof(double) * 2 * (size_t)n);
        m = n;
    } else {
        memcpy(dst, src, sizeof(double) * 2);
        m = 1;
        const double *prev = src;
        for (Py_ssize_t k = 1; k < n; k++) {
            const double *c = src + 2 * k;
            if ((c[0] == prev[0] && c[1] == prev[1]) || dist2(c, prev) <= tol2) continue;
            dst[2 * m] = c[0];
            dst[2 * m + 1] = c[1];
            m++;
            prev = c;
        }
        const double *end = src + 2 * (n - 1);
        if (m < 2) {
            dst[2 * m] = end[0];
            dst[2 * m + 1] = end[1];
            m++;
        }
        double *last = dst + 2 * (m - 1);
        if (!(end[0] == last[0] && end[1] == last[1])) {
            if (dist2(end, last) <= tol2) m--;
            dst[2 * m] = end[0];
            dst[2 * m + 1] = end[1];
            m++;
        }
    }
    /* Douglas-Peucker on dst[0..m) keeping both ends; sections in any order (each decides
     * only the vertices strictly inside it) */
    memset(use, 1, (size_t)m);
    Py_ssize_t top = 0;
    if (m > 2) {
        stack[top++] = 0;
        stack[top++] = m - 1;
    }
    while (top) {
        Py_ssize_t j = stack[--top], i = stack[--top];
        if (i + 1 == j) continue;
        double best = -1.0;
        Py_ssize_t at = i;
        segment_distances(dst, i, j, d);
        for (Py_ssize_t k = i + 1; k < j; k++) {
            if (d[k] > best) {
                best = d[k];
                at = k;
            }
        }
        if (best <= tol) {
            memset(use + i + 1, 0, (size_t)(j - i - 1));
        } else {
            stack[top++] = i;
            stack[top++] = at;
            stack[top++] = at;
            stack[top++] = j;
        }
    }
    Py_ssize_t out = 0;
    for (Py_ssize_t k = 0; k < m; k++) {
        if (use[k]) {
            dst[2 * out] = dst[2 * k];
            dst[2 * out + 1] = dst[2 * k + 1];
            out++;
        }
    }
    return out;
}

static PyObject *thin_lines(PyObject *self, PyObject *args) {
    PyObject *xy_o, *counts_o, *oxy_o, *ocounts_o;
    double tol;
    if (!PyArg_ParseTuple(args, "OOdOO", &xy_o, &counts_o, &tol, &oxy_o, &ocounts_o))
        return NULL;
    Arr xy = {0}, counts = {0}, oxy = {0}, ocounts = {0};
    PyObject *result = NULL;
    unsigned char *use = NULL;
    Py_ssize_t *stack = NULL;
    double *dist = NULL;
    if (take(xy_o, &xy, 2, K_F64, 0, 0, "xy") < 0
        || take(counts_o, &counts, 1, K_INT, 0, 0, "counts") < 0
        || take(oxy_o, &oxy, 2, K_F64, 1, 0, "out_xy") < 0
        || take(ocounts_o, &ocounts, 1, K_INT, 1, 0, "out_counts") < 0)
        goto done;
    Py_ssize_t n = xy.b.shape[0], rows = counts.b.shape[0];
    if (xy.b.shape[1] != 2 || !PyBuffer_IsContiguous(&xy.b, 'C') || oxy.b.shape[1] != 2
        || !PyBuffer_IsContiguous(&oxy.b, 'C') || oxy.b.shape[0] < n
        || counts.b.itemsize != 8 || counts.kind != K_INT || ocounts.b.itemsize != 8
        || ocounts.kind != K_INT || ocounts.b.shape[0] != rows || !(tol >= 0.0)) {
        PyErr_SetString(PyExc_ValueError, "thin_lines: shapes do not fit");
        goto done;
    }
    const double *src = (const double *)xy.b.buf;
    double *dst = (double *)oxy.b.buf;
    Py_ssize_t total = 0, longest = 0;
    int plain = 1;
    for (Py_ssize_t r = 0; r < rows; r++) {
        int64_t c = *(const int64_t *)AT(counts, r);
        if (c < 0 || c == 1) plain = 0;
        total += c;
        if (c > longest) longest = c;
    }
    if (total != n) {
        PyErr_SetString(PyExc_ValueError, "thin_lines: the counts do not add up to the vertices");
        goto done;
    }
    for (Py_ssize_t k = 0; plain && k < 2 * n; k++)
        if (!isfinite(src[k])) plain = 0;
    if (!plain) {
        Py_INCREF(Py_None);
        result = Py_None;
        goto done;
    }
    use = (unsigned char *)PyMem_RawMalloc((size_t)longest + 1);
    stack = (Py_ssize_t *)PyMem_RawMalloc(sizeof(Py_ssize_t) * (2 * (size_t)longest + 2));
    dist = (double *)PyMem_RawMalloc(sizeof(double) * ((size_t)longest + 1));
    if (!use || !stack || !dist) {
        PyErr_NoMemory();
        goto done;
    }
    Py_ssize_t written = 0;
    Py_BEGIN_ALLOW_THREADS
    Py_ssize_t at = 0;
    for (Py_ssize_t r = 0; r < rows; r++) {
        Py_ssize_t c = (Py_ssize_t)*(const int64_t *)AT(counts, r);
        Py_ssize_t got = c ? thin_row(src + 2 * at, c, tol, dst + 2 * written, use, stack, dist) : 0;
        *(int64_t *)AT(ocounts, r) = got;
        at += c;
        written += got;
    }
    Py_END_ALLOW_THREADS
    result = PyLong_FromSsize_t(written);
done:
    PyMem_RawFree(use);
    PyMem_RawFree(stack);
    PyMem_RawFree(dist);
    drop(&xy); drop(&counts); drop(&oxy); drop(&ocounts);
    return result;
}

static PyMethodDef methods[] = {
    /* lean: reprojected reads */
    {"grid_interp", grid_interp, METH_VARARGS, grid_interp_doc},
    {"span", span, METH_VARARGS, span_doc},
    {"bilinear_at", bilinear_at, METH_VARARGS, bilinear_at_doc},
    {"grid_span", grid_span, METH_VARARGS, grid_span_doc},
    {"grid_bilinear", grid_bilinear, METH_VARARGS, grid_bilinear_doc},
    {"flat", flat, METH_VARARGS, flat_doc},
    {"box_sums", box_sums, METH_VARARGS, box_sums_doc},
    {"levels", levels, METH_VARARGS, levels_doc},
    {"lut_index", lut_index, METH_VARARGS, lut_index_doc},
    {"palette", palette, METH_VARARGS, palette_doc},
    {"hillshade", hillshade, METH_VARARGS, hillshade_doc},
    {"to8", to8, METH_VARARGS, to8_doc},
    {"overlay", overlay, METH_VARARGS, overlay_doc},
    {"flat_gather", flat_gather, METH_VARARGS, flat_gather_doc},
    {"overlay_bins", overlay_bins, METH_VARARGS, overlay_bins_doc},
    {"index_range", index_range, METH_VARARGS, index_range_doc},
    {"gray", gray, METH_VARARGS, gray_doc},
    {"thin_lines", thin_lines, METH_VARARGS, thin_lines_doc},
    {NULL, NULL, 0, NULL},
};

static struct PyModuleDef module = {
    PyModuleDef_HEAD_INIT, "compose._kernels",
    "Per-pixel loops of the window task (see compose.kernels).", -1, methods,
    NULL, NULL, NULL, NULL,
};

PyMODINIT_FUNC PyInit__kernels(void) { return PyModule_Create(&module); }
