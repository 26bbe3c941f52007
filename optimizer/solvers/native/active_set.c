/* Primal active-set iteration for  min x^T A x + 2 b^T x  subject to  C x <= d: the compiled twin
 * of optimizer.integer_bounds.polish (the same working-set rule, Nocedal & Wright 2006, §16.5).
 *
 * Each step solves the equality system [2A E^T; E 0] [x; nu] = [-2b; d_E] of the working set E by
 * Gaussian elimination with partial pivoting, then adds the most violated constraint outside the
 * set or drops the one with the most negative multiplier. A (numerically) singular system returns
 * 2 and the caller runs the numpy version, which falls back to least squares. The caller checks
 * the KKT conditions of the answer, so this code decides speed, never correctness.
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

/* Solve K s = r (K: N x N row-major, overwritten; r overwritten by s). 0, or 1 if singular. */
static int gauss(int N, double *K, double *r) {
    double big = 0.0;
    for (int i = 0; i < N * N; i++)
        if (fabs(K[i]) > big) big = fabs(K[i]);
    if (big == 0.0) return N == 0 ? 0 : 1;
    for (int c = 0; c < N; c++) {
        int p = c;
        double best = fabs(K[(size_t)c * N + c]);
        for (int i = c + 1; i < N; i++) {
            double v = fabs(K[(size_t)i * N + c]);
            if (v > best) {
                best = v;
                p = i;
            }
        }
        if (best <= 1e-13 * big) return 1;
        if (p != c) {
            for (int j = 0; j < N; j++) {
                double t = K[(size_t)c * N + j];
                K[(size_t)c * N + j] = K[(size_t)p * N + j];
                K[(size_t)p * N + j] = t;
            }
            double t = r[c];
            r[c] = r[p];
            r[p] = t;
        }
        double piv = K[(size_t)c * N + c];
        for (int i = c + 1; i < N; i++) {
            double f = K[(size_t)i * N + c] / piv;
            if (f == 0.0) continue;
            for (int j = c; j < N; j++) K[(size_t)i * N + j] -= f * K[(size_t)c * N + j];
            r[i] -= f * r[c];
        }
    }
    for (int i = N - 1; i >= 0; i--) {
        double s = r[i];
        for (int j = i + 1; j < N; j++) s -= K[(size_t)i * N + j] * r[j];
        r[i] = s / K[(size_t)i * N + i];
    }
    return 0;
}

/* A2 = 2A (n x n), b2 = -2b (n), C (m x n) rows, d (m), scale (m) = 1 + |d|.
 * active[0..*nact) in: the starting working set; x (n) out; mult (m) out: multipliers of the set
 * the returned x belongs to (negative ones set to 0). Returns 0, 1 (out of memory) or 2
 * (singular system). */
int bw_active_set(int n, int m, const double *A2, const double *b2, const double *C,
                  const double *d, const double *scale, int *active, int *nact, int max_iter,
                  double *x, double *mult) {
    int N = n + m;
    double *K = malloc(sizeof(double) * (size_t)N * N + 1);
    double *r = malloc(sizeof(double) * (size_t)N + 1);
    int *solved = malloc(sizeof(int) * (size_t)m + 1);
    char *in = calloc((size_t)m + 1, 1);
    if (!K || !r || !solved || !in) {
        free(K); free(r); free(solved); free(in);
        return 1;
    }
    int p = *nact, ns = 0, rc = 0;
    for (int k = 0; k < p; k++) in[active[k]] = 1;
    for (int it = 0; it < max_iter; it++) {
        int M = n + p;
        memcpy(solved, active, sizeof(int) * (size_t)p);
        ns = p;
        memset(K, 0, sizeof(double) * (size_t)M * M);
        for (int i = 0; i < n; i++) {
            for (int j = 0; j < n; j++) K[(size_t)i * M + j] = A2[(size_t)i * n + j];
            r[i] = b2[i];
        }
        for (int k = 0; k < p; k++) {
            const double *row = C + (size_t)active[k] * n;
            for (int j = 0; j < n; j++) {
                K[(size_t)(n + k) * M + j] = row[j];
                K[(size_t)j * M + n + k] = row[j];
            }
            r[n + k] = d[active[k]];
        }
        if (gauss(M, K, r)) {
            rc = 2;
            break;
        }
        memcpy(x, r, sizeof(double) * (size_t)n);
        int worst = -1;
        double wv = -INFINITY;
        for (int i = 0; i < m; i++) {
            if (in[i]) continue;
            const double *row = C + (size_t)i * n;
            double v = -d[i];
            for (int j = 0; j < n; j++) v += row[j] * x[j];
            if (v > wv) {
                wv = v;
                worst = i;
            }
        }
        if (worst >= 0 && wv > 1e-12 * scale[worst]) {
            active[p++] = worst;
            in[worst] = 1;
            continue;
        }
        if (p) {
            int low = 0;
            for (int k = 1; k < p; k++)
                if (r[n + k] < r[n + low]) low = k;
            if (r[n + low] < -1e-14) {
                in[active[low]] = 0;
                memmove(active + low, active + low + 1, sizeof(int) * (size_t)(p - low - 1));
                p--;
                continue;
            }
        }
        break;
    }
    if (rc == 0) {
        for (int i = 0; i < m; i++) mult[i] = 0.0;
        for (int k = 0; k < ns; k++) mult[solved[k]] = r[n + k] > 0.0 ? r[n + k] : 0.0;
    }
    *nact = p;
    free(K); free(r); free(solved); free(in);
    return rc;
}
