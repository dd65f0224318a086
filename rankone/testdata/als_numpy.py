# Alternating least squares for the rank-one matrix nearest to a subspace,
# in NumPy: the reference that rankone's BenchmarkALSNumPy times the Go
# implementation against. Written for this project (not a port of any other
# program).
#
# Usage: python3 als_numpy.py DIR MODE
#
# DIR holds four .npy files written by the Go benchmark with
# subspace.WriteNPY (shape (r, m, n), little-endian float64):
#   basis.npy  (s, m, n)  the stored orthonormal vectors S_1..S_s
#   x.npy      (1, B, m)  the B start vectors x_b (unit)
#   y.npy      (1, B, n)  the B start vectors y_b (unit)
#   iters.npy  (1, 1, B)  how many iterations start b runs (the count the Go
#                         side's stopping rule took; integral values)
#   comp.npy   (1, 1, 1)  1 if the stored vectors span the complement of W,
#                         else 0
# MODE is "loop" (start after start, the plain way to write the method) or
# "batch" (all starts stepped together: the passes over the basis as
# matrix-matrix products, the eigenproblems as one stacked eigh).
#
# One iteration for a start (x, y), as rankone.ALS does it:
#   y <- top eigenvector of H(x) = Z_x^T Z_x,  Z_x[t, :] = S_t^T x
#   x <- top eigenvector of G(y) = Z_y^T Z_y,  Z_y[t, :] = S_t y
# (for a stored complement: H(x) = |x|^2 I - Z_x^T Z_x, likewise G). The
# value h = x^T G(y) x is the top eigenvalue of the last G.
#
# Output (stdout): the seconds spent in the iterations, wall clock
# (time.perf_counter) and processor time (time.process_time), around them
# only (loading and the one-time layouts are excluded); the BLAS libraries
# the process mapped; then one line per start with its final h (repr,
# round-trip exact).
import sys
import time

import numpy as np


def main():
    d, mode = sys.argv[1], sys.argv[2]
    q = np.load(d + "/basis.npy")
    xs = np.load(d + "/x.npy")[0].copy()
    ys = np.load(d + "/y.npy")[0].copy()
    iters = np.load(d + "/iters.npy")[0, 0].astype(np.int64)
    comp = bool(np.load(d + "/comp.npy")[0, 0, 0])
    s, m, n = q.shape
    # One-time layouts, so that each pass is one contiguous product:
    # qa[(t, i), j] = S_t[i, j] and qb[(t, j), i] = S_t[i, j].
    qa = np.ascontiguousarray(q.reshape(s * m, n))
    qb = np.ascontiguousarray(q.transpose(0, 2, 1)).reshape(s * n, m)
    t0, c0 = time.perf_counter(), time.process_time()
    if mode == "loop":
        vals = loop(qa, qb, s, m, n, xs, ys, iters, comp)
    elif mode == "batch":
        vals = batch(qa, qb, s, m, n, xs, ys, iters, comp)
    else:
        raise SystemExit("mode must be loop or batch")
    sec, cpu = time.perf_counter() - t0, time.process_time() - c0
    libs = sorted({l.split()[-1] for l in open("/proc/self/maps")
                   if "blas" in l.split()[-1] and "scipy" not in l})
    print(repr(sec), repr(cpu))
    print(",".join(libs) or "unknown")
    for v in vals:
        print(repr(float(v)))


def top(a):
    w, v = np.linalg.eigh(a)
    return w[-1], v[:, -1]


def loop(qa, qb, s, m, n, xs, ys, iters, comp):
    vals = np.zeros(len(xs))
    eye_m, eye_n = np.eye(m), np.eye(n)
    for b in range(len(xs)):
        x, y = xs[b].copy(), ys[b].copy()
        h = 0.0
        for _ in range(iters[b]):
            z = (qb @ x).reshape(s, n)
            a = z.T @ z
            if comp:
                a = (x @ x) * eye_n - a
            _, y = top(a)
            z = (qa @ y).reshape(s, m)
            a = z.T @ z
            if comp:
                a = (y @ y) * eye_m - a
            h, x = top(a)
        vals[b] = h
    return vals


def batch(qa, qb, s, m, n, xs, ys, iters, comp):
    vals = np.zeros(len(xs))
    x, y = xs.copy(), ys.copy()
    it = 0
    while True:
        live = np.nonzero(iters > it)[0]
        if len(live) == 0:
            return vals
        xl, yl = x[live], y[live]
        k = len(live)
        # (s*n, m) @ (m, k) -> per start b the s x n matrix Z_x.
        # (Stacked products of non-contiguous views fall back to a slow
        # loop in NumPy 1.24: make them contiguous first.)
        z = np.ascontiguousarray((qb @ xl.T).reshape(s, n, k).transpose(2, 0, 1))
        a = np.matmul(z.transpose(0, 2, 1), z)
        if comp:
            a = np.einsum("b,ij->bij", np.einsum("bi,bi->b", xl, xl), np.eye(n)) - a
        _, v = np.linalg.eigh(a)
        yl = v[:, :, -1]
        z = np.ascontiguousarray((qa @ yl.T).reshape(s, m, k).transpose(2, 0, 1))
        a = np.matmul(z.transpose(0, 2, 1), z)
        if comp:
            a = np.einsum("b,ij->bij", np.einsum("bi,bi->b", yl, yl), np.eye(m)) - a
        w, v = np.linalg.eigh(a)
        x[live], y[live] = v[:, :, -1], yl
        vals[live] = w[:, -1]
        it += 1


if __name__ == "__main__":
    main()
