"""Compiled kernel for a nearest-neighbour Hamiltonian with a coefficient on every link.

The BenDaniel-Duke operator of :mod:`core.hamiltonian_regions` on a block
``X`` shaped ``(m, n0, n1, n2)`` (1D and 2D grids padded in front, as in
:mod:`core.kernels`):

    (H X)_p = D_p X_p - sum_a [ W_a[p] X_{p + e_a} + conj(W_a[p - e_a]) X_{p - e_a} ]

``D`` is the diagonal (potential plus the links' kinetic terms), ``W_a[p]`` the
hop amplitude from p to its next neighbour along axis a (real, or complex with
the Peierls phase folded in).  The neighbour tables of :func:`core.kernels.neighbour_table`
(radius 1) give the boundary: sign 0 beyond a hard wall, a wrapped index on a
periodic axis.  One call performs the fused step Y = alpha (H - shift) X + beta Z.

The loop runs over grid lines outermost and over the block's vectors inside,
so that the coefficient lines of a grid line are loaded once for the whole
block and stay in cache: the memory traffic per vector is then close to that
of the constant-coefficient kernel.
"""
from __future__ import annotations

import numpy as np
from numba import njit, prange

__all__ = ["link_step", "link_chebyshev_rows_2d"]


def link_step(X, D, Wx, Wy, Wz, ix, sx, iy, sy, iz, sz, alpha, shift, beta, Z, Y):
    """Y = alpha * (H - shift) X + beta * Z (see the module docstring); all arrays contiguous."""
    m, n0, n1, _ = X.shape
    lines = n0 * n1
    chunks = 1 if lines >= 32 else m        # a 1D grid: split the block over the threads instead
    _link_step(X, D, Wx, Wy, Wz, ix, sx, iy, sy, iz, sz, float(alpha), float(shift), float(beta), Z, Y,
               chunks)


@njit(parallel=True, cache=True, nogil=True, fastmath=False, error_model="numpy")
def _link_step(X, D, Wx, Wy, Wz, ix, sx, iy, sy, iz, sz, alpha, shift, beta, Z, Y, chunks):  # pragma: no cover
    m, n0, n1, n2 = X.shape
    lines = n0 * n1
    per = (m + chunks - 1) // chunks
    with_z = beta != 0.0
    for t in prange(lines * chunks):
        line = t // chunks
        c = t - line * chunks
        i = line // n1
        j = line - i * n1
        ixp = ix[2, i]
        ixm = ix[0, i]
        jp = iy[2, j]
        jm = iy[0, j]
        gxp = sx[2, i]
        gxm = sx[0, i]
        gyp = sy[2, j]
        gym = sy[0, j]
        dl = D[i, j]
        wx0 = Wx[i, j]
        wx1 = Wx[ixm, j]
        wy0 = Wy[i, j]
        wy1 = Wy[i, jm]
        wz = Wz[i, j]
        kp0 = iz[2, 0]
        km1 = iz[0, n2 - 1]
        gzp0 = sz[2, 0]
        gzm0 = sz[0, 0]
        gzp1 = sz[2, n2 - 1]
        gzm1 = sz[0, n2 - 1]
        for b in range(c * per, min((c + 1) * per, m)):
            xl = X[b, i, j]
            xxp = X[b, ixp, j]
            xxm = X[b, ixm, j]
            xyp = X[b, i, jp]
            xym = X[b, i, jm]
            yl = Y[b, i, j]
            zl = Z[b, i, j]
            for k in range(1, n2 - 1):          # interior: one branch-free contiguous pass
                acc = ((dl[k] - shift) * xl[k] - gxp * wx0[k] * xxp[k] - gxm * np.conj(wx1[k]) * xxm[k]
                       - gyp * wy0[k] * xyp[k] - gym * np.conj(wy1[k]) * xym[k]
                       - wz[k] * xl[k + 1] - np.conj(wz[k - 1]) * xl[k - 1])
                if with_z:
                    yl[k] = alpha * acc + beta * zl[k]
                else:
                    yl[k] = alpha * acc
            for e in range(2):                  # the two ends of the line: boundary tables
                k = e * (n2 - 1)
                acc = ((dl[k] - shift) * xl[k] - gxp * wx0[k] * xxp[k] - gxm * np.conj(wx1[k]) * xxm[k]
                       - gyp * wy0[k] * xyp[k] - gym * np.conj(wy1[k]) * xym[k])
                if e == 0:
                    acc -= gzp0 * wz[0] * xl[kp0] + gzm0 * np.conj(wz[n2 - 1]) * xl[iz[0, 0]]
                else:
                    acc -= gzp1 * wz[k] * xl[iz[2, k]] + gzm1 * np.conj(wz[k - 1]) * xl[km1]
                if with_z:
                    yl[k] = alpha * acc + beta * zl[k]
                else:
                    yl[k] = alpha * acc


@njit(inline="always", error_model="numpy")
def _link_line_2d(x, y, z, D, Wy, Wz, j, shift, iy, sy, iz, sz, alpha, beta, with_z):  # pragma: no cover
    """Line j of y = alpha * (H - shift) x (+ beta * z) on a real 2D block (n1 lines of n2 points)."""
    n2 = x.shape[1]
    jp = iy[2, j]
    jm = iy[0, j]
    gyp = sy[2, j]
    gym = sy[0, j]
    xl = x[j]
    xyp = x[jp]
    xym = x[jm]
    dl = D[j]
    wy0 = Wy[j]
    wy1 = Wy[jm]
    wz = Wz[j]
    yl = y[j]
    zl = z[j]
    for k in range(1, n2 - 1):
        acc = ((dl[k] - shift) * xl[k] - gyp * wy0[k] * xyp[k] - gym * wy1[k] * xym[k]
               - wz[k] * xl[k + 1] - wz[k - 1] * xl[k - 1])
        yl[k] = alpha * acc + beta * zl[k] if with_z else alpha * acc
    for e in range(2):
        k = e * (n2 - 1)
        acc = (dl[k] - shift) * xl[k] - gyp * wy0[k] * xyp[k] - gym * wy1[k] * xym[k]
        if e == 0:
            acc -= sz[2, 0] * wz[0] * xl[iz[2, 0]] + sz[0, 0] * wz[n2 - 1] * xl[iz[0, 0]]
        else:
            acc -= sz[2, k] * wz[k] * xl[iz[2, k]] + sz[0, k] * wz[k - 1] * xl[iz[0, k]]
        yl[k] = alpha * acc + beta * zl[k] if with_z else alpha * acc


def link_chebyshev_rows_2d(X, W0, W1, rows, D, Wy, Wz, iy, sy, iz, sz, alphas, betas, degree, shift):
    """The scaled Chebyshev recurrence of :func:`core.kernels.chebyshev_rows_real_2d` (Zhou et al.,
    J. Comput. Phys. 219, 172 (2006), Algorithm 4.1) for the link operator on a real 1D/2D block
    ``(m, n1, n2)``: rows ``X[rows[t]]`` filtered in place, one row per thread."""
    _link_chebyshev_rows_2d(X, W0, W1, rows, D, Wy, Wz, iy, sy, iz, sz, alphas, betas, degree, float(shift))


@njit(parallel=True, cache=True, nogil=True, fastmath=False, error_model="numpy")
def _link_chebyshev_rows_2d(X, W0, W1, rows, D, Wy, Wz, iy, sy, iz, sz, alphas, betas, degree,
                            shift):  # pragma: no cover
    n1 = X.shape[1]
    for t in prange(rows.shape[0]):
        i = rows[t]
        if i < 0:
            continue
        d = degree[i]
        b0 = X[i]
        b1 = W0[t]
        b2 = W1[t]
        for j in range(n1):
            _link_line_2d(b0, b1, b0, D, Wy, Wz, j, shift, iy, sy, iz, sz, alphas[1], 0.0, False)
        for step in range(2, d + 1):        # buffers rotate: step s lands in (b0, b1, b2)[s % 3]
            r = step % 3
            for j in range(n1):
                if r == 0:
                    _link_line_2d(b2, b0, b1, D, Wy, Wz, j, shift, iy, sy, iz, sz, alphas[step], betas[step], True)
                elif r == 1:
                    _link_line_2d(b0, b1, b2, D, Wy, Wz, j, shift, iy, sy, iz, sz, alphas[step], betas[step], True)
                else:
                    _link_line_2d(b1, b2, b0, D, Wy, Wz, j, shift, iy, sy, iz, sz, alphas[step], betas[step], True)
        r = d % 3
        if r == 1:
            b0[:] = b1
        elif r == 2:
            b0[:] = b2
