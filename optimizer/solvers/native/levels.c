/* Depth-first Schnorr–Euchner enumeration over prepared levels: the compiled twin of
 * optimizer/integer_search.py (same levels, same bounds, same visiting order).
 *
 * For every feasible point on the levels
 *     f(x) >= K + sum_i phi_i,  phi_i = (R_ii d_i + sum_{j>i} R_ij d_j)^2 + psi_i(y_i) - psimin_i,
 * with d = y - z. Levels are fixed from n-1 down to 0; the partial sum over the fixed levels bounds
 * every completion. Below a node the free levels 0..i contribute at least
 *     (y - c)^T Q (y - c),  Q = R[:i+1,:i+1]^T R[:i+1,:i+1],  c their free centre,
 * which for integer y is at least the separable integrality bound
 *     sum_l D_l (c_l - round c_l)^2,   0 <= D <= Q diagonal.
 *
 * The Python side (optimizer/integer_native.py) prepares every array; this file only searches.
 * Built as the extension module optimizer.native._levels (the module object is empty; the
 * function is called through ctypes).
 */
#include <Python.h>

#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#define BW_TOL 1e-9

typedef struct {
    int n, m, g;
    const double *R;       /* n*n row-major, upper triangular */
    const double *z, *sl, *aw, *pm;
    const long long *lo, *hi;
    const double *G;       /* g*n row-major, rows on the levels */
    const double *h;       /* g */
    const double *rest;    /* n*g: cheapest row contribution of the levels below i */
    int has_m;
    const double *mg, *mrest;
    double budget, mtol;
    const double *Mp;      /* m*n row-major: residual map of the levels */
    const double *u;       /* m */
    double off, fz;
    const double *g2;      /* n: twice the gradient at z */
    int sep;               /* separable bound on */
    const double *W;       /* (n+1)*n: centre update of level i, W[i*n + l], l < i */
    const double *D;       /* (n+1)*n: diagonal of level i */
    const double *capsep;  /* n+1: largest value of the separable bound of level i */
    double K;
    double best_f;         /* in/out: incumbent value */
    double *best_y;        /* n, out: incumbent on the levels (when improved) */
    int improved;          /* out */
    double time_limit;     /* seconds from the call */
    long long nodes;       /* out */
    int stopped;           /* out */
    double frontier;       /* out: lower bound on every unexplored point when stopped */
    volatile int *cancel;  /* when set non-zero by another thread, stop as at the time limit */
} BwProblem;

typedef struct {
    BwProblem *p;
    double *delta, *xs, *gs;
    double *cvs;      /* (n+1)*(n+1): centre of levels 0..i at depth i */
    double *scratch;  /* n+1 */
    int *rptr, *ridx; /* rows touching each level (CSR) */
    double *rcoef, *rrest;
    struct timespec deadline;
    int stop;
    double stop_bound;
} Ctx;

static double now_minus(const struct timespec *t) {
    struct timespec c;
    clock_gettime(CLOCK_MONOTONIC, &c);
    return (double)(c.tv_sec - t->tv_sec) + 1e-9 * (double)(c.tv_nsec - t->tv_nsec);
}

/* Separable bound on the free levels 0..i of a node whose centre is cv. */
static double below(const BwProblem *p, int i, const double *cv) {
    const double *D = p->D + (size_t)(i + 1) * p->n;
    double s = 0.0;
    for (int l = 0; l <= i; l++) {
        double d = cv[l] - nearbyint(cv[l]);
        s += D[l] * d * d;
    }
    return s;
}

/* centre of node level i (levels 0..i free) from its parent's at level i+1, fixed at py */
static void child_centre(Ctx *x, int i, double py) {
    BwProblem *p = x->p;
    int n = p->n, k = i + 1;
    const double *pc = x->cvs + (size_t)(k) * (n + 1);
    double *cv = x->cvs + (size_t)i * (n + 1);
    double step = py - pc[k];
    const double *W = p->W + (size_t)k * n;
    for (int l = 0; l < k; l++) cv[l] = pc[l] + W[l] * step;
    cv[k] = 0.0;
}

static inline double phi(double v, double rd, double tz, double si, double wi, double cz) {
    double q = rd * v + tz;
    return q * q + si * v + wi * fabs(v) + cz;
}

/* lower bound on the values of level i not yet entered (left..L and right..U) */
static double unexplored(Ctx *x, int i, double partial, int has_cv, long long left,
                         long long right, long long L, long long U, double rd, double tz,
                         double si, double wi, double cz) {
    BwProblem *p = x->p;
    if (!has_cv) {
        double a = left >= L ? phi((double)left, rd, tz, si, wi, cz) : INFINITY;
        double b = right <= U ? phi((double)right, rd, tz, si, wi, cz) : INFINITY;
        return partial + (a < b ? a : b);
    }
    double low = p->best_f;
    int n = p->n;
    const double *cv = x->cvs + (size_t)i * (n + 1);
    const double *W = p->W + (size_t)i * n;
    double *c2 = x->scratch;
    for (int side = 0; side < 2; side++) {
        long long v = side == 0 ? left : right;
        long long end = side == 0 ? L : U;
        int stepd = side == 0 ? -1 : 1;
        for (; side == 0 ? v >= end : v <= end; v += stepd) {
            double q = partial + phi((double)v, rd, tz, si, wi, cz);
            if (q >= low) break;
            double st = (double)v - cv[i];
            for (int l = 0; l < i; l++) c2[l] = cv[l] + W[l] * st;
            if (i >= 1) q += below(p, i - 1, c2);
            if (q < low) low = q;
        }
    }
    return low;
}

static void visit(Ctx *x, int i, double partial, double ms, double qa, double t, int has_cv,
                  double py) {
    BwProblem *p = x->p;
    int n = p->n;
    p->nodes++;
    if (!(p->nodes & 1023) && (now_minus(&x->deadline) > 0.0 || (p->cancel && *p->cancel))) {
        double b = partial;
        if (has_cv) {
            child_centre(x, i, py);
            b += below(p, i, x->cvs + (size_t)i * (n + 1));
        }
        x->stop = 1;
        x->stop_bound = b;
        return;
    }
    long long L = p->lo[i], U = p->hi[i];
    for (int e = x->rptr[i]; e < x->rptr[i + 1]; e++) {
        int r = x->ridx[e];
        double c = x->rcoef[e];
        double cap = p->h[r] - x->gs[r] - x->rrest[e];
        if (c > 0) {
            long long k = (long long)floor(cap / c + BW_TOL);
            if (k < U) U = k;
        } else {
            long long k = (long long)ceil(cap / c - BW_TOL);
            if (k > L) L = k;
        }
    }
    double mi = p->has_m ? p->mg[i] : 0.0;
    if (p->has_m) {
        double capm = p->budget - ms - p->mrest[i];
        if (capm < -p->mtol) return;
        if (mi > 0) {
            long long k = (long long)floor(capm / mi + BW_TOL);
            if (k < U) U = k;
            if (-k > L) L = -k;
        }
    }
    if (L > U) return;
    double rd = p->R[(size_t)i * n + i], zi = p->z[i], si = p->sl[i], wi = p->aw[i];
    double tz = t - rd * zi, cz = -si * zi - p->pm[i];
    double cand;
    if (rd * rd > 1e-14) {
        double c0 = -tz / rd, d2 = 2 * rd * rd;
        cand = c0 - (si + wi) / d2;
        if (cand <= 0) {
            cand = c0 - (si - wi) / d2;
            if (cand > 0) cand = 0.0;
        }
    } else {
        cand = wi >= fabs(si) ? 0.0 : (si > 0 ? (double)L : (double)U);
    }
    double cr = nearbyint(cand);
    long long s;
    if (cr < (double)L) s = L;
    else if (cr > (double)U) s = U;
    else s = (long long)cr;
    double ps = phi((double)s, rd, tz, si, wi, cz);
    while (s > L) {
        double v = phi((double)(s - 1), rd, tz, si, wi, cz);
        if (v >= ps) break;
        s--;
        ps = v;
    }
    while (s < U) {
        double v = phi((double)(s + 1), rd, tz, si, wi, cz);
        if (v >= ps) break;
        s++;
        ps = v;
    }
    double best = p->best_f;
    if (partial + ps >= best) return;
    const double *cv = NULL;
    if (has_cv) {
        child_centre(x, i, py);
        cv = x->cvs + (size_t)i * (n + 1);
        if (partial + p->capsep[i + 1] >= best && partial + below(p, i, cv) >= best) return;
    }
    if (i == 0) {
        double g0 = p->g2[0], a0 = rd * rd;
        long long v;
        if (a0 > 0) {
            double w = nearbyint(-(tz * rd + 0.5 * g0) / a0);
            v = w < (double)L ? L : (w > (double)U ? U : (long long)w);
        } else {
            v = rd * tz + 0.5 * g0 > 0 ? L : U;
        }
        double q = rd * (double)v + tz;
        if (p->fz + qa + q * q + g0 * ((double)v - zi) >= best + 1e-13 * (1.0 + fabs(best)))
            return;
        x->xs[0] = (double)v;
        double fv = p->off;
        for (int a = 0; a < p->m; a++) {
            const double *row = p->Mp + (size_t)a * n;
            double r = p->u[a];
            for (int j = 0; j < n; j++) r += row[j] * x->xs[j];
            fv += r * r;
        }
        if (fv < best) {
            p->best_f = fv;
            memcpy(p->best_y, x->xs, sizeof(double) * (size_t)n);
            p->improved = 1;
        }
        return;
    }
    double g2i = p->g2[i];
    double tb = 0.0;
    const double *Rn = p->R + (size_t)(i - 1) * n;
    for (int j = i + 1; j < n; j++) tb += Rn[j] * x->delta[j];
    double rc = Rn[i];
    long long left = s - 1, right = s + 1;
    double pl = left >= L ? phi((double)left, rd, tz, si, wi, cz) : INFINITY;
    double pr = right <= U ? phi((double)right, rd, tz, si, wi, cz) : INFINITY;
    long long cur = s;
    double pc = ps;
    int child_cv = has_cv && i > 2;
    for (;;) {
        double v = partial + pc;
        if (v >= p->best_f) break;
        double dc = (double)cur - zi;
        double tc = tb + rc * dc;
        x->delta[i] = dc;
        x->xs[i] = (double)cur;
        for (int e = x->rptr[i]; e < x->rptr[i + 1]; e++) x->gs[x->ridx[e]] += x->rcoef[e] * cur;
        double q = rd * (double)cur + tz;
        visit(x, i - 1, v, ms + mi * fabs((double)cur), qa + q * q + g2i * dc, tc, child_cv,
              (double)cur);
        if (x->stop) {
            double u = unexplored(x, i, partial, cv != NULL, left, right, L, U, rd, tz, si, wi,
                                  cz);
            if (u < x->stop_bound) x->stop_bound = u;
            return;
        }
        for (int e = x->rptr[i]; e < x->rptr[i + 1]; e++) x->gs[x->ridx[e]] -= x->rcoef[e] * cur;
        if (pl <= pr) {
            if (pl == INFINITY) break;
            cur = left;
            pc = pl;
            left--;
            pl = left >= L ? phi((double)left, rd, tz, si, wi, cz) : INFINITY;
        } else {
            cur = right;
            pc = pr;
            right++;
            pr = right <= U ? phi((double)right, rd, tz, si, wi, cz) : INFINITY;
        }
    }
}

/* Size of the problem struct, so that the Python side can check that its layout matches. */
int bw_problem_size(void) { return (int)sizeof(BwProblem); }

/* Returns 0 on success, 1 when out of memory. */
int bw_enumerate(BwProblem *p) {
    int n = p->n, g = p->g;
    Ctx x;
    memset(&x, 0, sizeof x);
    x.p = p;
    x.delta = calloc((size_t)n + 1, sizeof(double));
    x.xs = calloc((size_t)n + 1, sizeof(double));
    x.gs = calloc((size_t)g + 1, sizeof(double));
    x.cvs = calloc((size_t)(n + 1) * (n + 2), sizeof(double));
    x.scratch = calloc((size_t)n + 1, sizeof(double));
    x.rptr = calloc((size_t)n + 1, sizeof(int));
    int nnz = 0;
    for (int r = 0; r < g; r++)
        for (int j = 0; j < n; j++)
            if (p->G[(size_t)r * n + j] != 0.0) nnz++;
    x.ridx = calloc((size_t)nnz + 1, sizeof(int));
    x.rcoef = calloc((size_t)nnz + 1, sizeof(double));
    x.rrest = calloc((size_t)nnz + 1, sizeof(double));
    if (!x.delta || !x.xs || !x.gs || !x.cvs || !x.scratch || !x.rptr || !x.ridx || !x.rcoef ||
        !x.rrest) {
        free(x.delta); free(x.xs); free(x.gs); free(x.cvs); free(x.scratch);
        free(x.rptr); free(x.ridx); free(x.rcoef); free(x.rrest);
        return 1;
    }
    int e = 0;
    for (int j = 0; j < n; j++) {
        x.rptr[j] = e;
        for (int r = 0; r < g; r++) {
            double c = p->G[(size_t)r * n + j];
            if (c != 0.0) {
                x.ridx[e] = r;
                x.rcoef[e] = c;
                x.rrest[e] = p->rest[(size_t)j * g + r];
                e++;
            }
        }
    }
    x.rptr[n] = e;
    clock_gettime(CLOCK_MONOTONIC, &x.deadline);
    double tl = p->time_limit;
    if (!(tl < 1e9)) tl = 1e9;
    if (tl < 0) tl = 0;
    x.deadline.tv_sec += (time_t)tl;
    x.deadline.tv_nsec += (long)((tl - floor(tl)) * 1e9);
    if (x.deadline.tv_nsec >= 1000000000L) {
        x.deadline.tv_sec += 1;
        x.deadline.tv_nsec -= 1000000000L;
    }
    /* root: the centre of every level is z; a virtual level n fixed at its centre 0 */
    double *top = x.cvs + (size_t)n * (n + 1);
    for (int l = 0; l < n; l++) top[l] = p->z[l];
    top[n] = 0.0;
    p->nodes = 0;
    p->improved = 0;
    p->stopped = 0;
    visit(&x, n - 1, p->K, 0.0, 0.0, 0.0, p->sep, 0.0);
    if (x.stop) {
        p->stopped = 1;
        p->frontier = x.stop_bound;
    }
    free(x.delta); free(x.xs); free(x.gs); free(x.cvs); free(x.scratch);
    free(x.rptr); free(x.ridx); free(x.rcoef); free(x.rrest);
    return 0;
}

static struct PyModuleDef levels_module = {
    PyModuleDef_HEAD_INIT, "_levels", "Compiled level enumeration (called via ctypes).", -1,
    NULL, NULL, NULL, NULL, NULL};

PyMODINIT_FUNC PyInit__levels(void) { return PyModule_Create(&levels_module); }
