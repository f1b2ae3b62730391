"""The 4 x 4 linear solve of one Newton step of the closed-system iteration."""
import math

from ventsource.magma.degassing_context import _kernel


@_kernel
def _solve_newton(jac, r, out, m):
    """Newton step out = -J^-1 r for the 4 x 4 Jacobian (row-major) of _evaluate.

    Row 0 (sum of x) does not depend on g: eliminate g with the balance row whose g
    entry is largest, solve the remaining 3 x 3 system in u by Cramer's rule, and
    back-substitute g. Falls back to pivoted elimination if that pivot is tiny.
    """
    p = 1
    if abs(jac[11]) > abs(jac[4 * p + 3]):
        p = 2
    if abs(jac[15]) > abs(jac[4 * p + 3]):
        p = 3
    piv = jac[4 * p + 3]
    big = 0.0
    for k in range(16):
        big = max(big, abs(jac[k]))
    if not abs(piv) > 1e-12 * big:
        for i in range(4):
            m[16 + i] = -r[i]
        return _solve4(jac, m[16:20], out, m)
    q1 = 1 if p != 1 else 2
    q2 = 3 if p != 3 else 2
    f1 = jac[4 * q1 + 3] / piv
    f2 = jac[4 * q2 + 3] / piv
    # 3 x 3 system: row 0, and rows q1, q2 minus f * row p (g eliminated)
    a00 = jac[0]
    a01 = jac[1]
    a02 = jac[2]
    b0 = -r[0]
    a10 = jac[4 * q1] - f1 * jac[4 * p]
    a11 = jac[4 * q1 + 1] - f1 * jac[4 * p + 1]
    a12 = jac[4 * q1 + 2] - f1 * jac[4 * p + 2]
    b1 = -r[q1] + f1 * r[p]
    a20 = jac[4 * q2] - f2 * jac[4 * p]
    a21 = jac[4 * q2 + 1] - f2 * jac[4 * p + 1]
    a22 = jac[4 * q2 + 2] - f2 * jac[4 * p + 2]
    b2 = -r[q2] + f2 * r[p]
    c00 = a11 * a22 - a12 * a21
    c01 = a10 * a22 - a12 * a20
    c02 = a10 * a21 - a11 * a20
    det = a00 * c00 - a01 * c01 + a02 * c02
    if not (abs(det) > 0.0 and math.isfinite(det)):
        for i in range(4):
            m[16 + i] = -r[i]
        return _solve4(jac, m[16:20], out, m)
    inv = 1.0 / det
    out[0] = (b0 * c00 - a01 * (b1 * a22 - a12 * b2) + a02 * (b1 * a21 - a11 * b2)) * inv
    out[1] = (a00 * (b1 * a22 - a12 * b2) - b0 * c01 + a02 * (a10 * b2 - b1 * a20)) * inv
    out[2] = (a00 * (a11 * b2 - b1 * a21) - a01 * (a10 * b2 - b1 * a20) + b0 * c02) * inv
    out[3] = (-r[p] - jac[4 * p] * out[0] - jac[4 * p + 1] * out[1]
              - jac[4 * p + 2] * out[2]) / piv
    return True


@_kernel
def _solve4(a, b, out, m):
    """Gaussian elimination with partial pivoting for a 4x4 system (a row-major, 16);
    m: 20-element work array. False if singular."""
    for i in range(4):
        for j in range(4):
            m[i * 5 + j] = a[i * 4 + j]
        m[i * 5 + 4] = b[i]
    for col in range(4):
        piv = col
        for i in range(col + 1, 4):
            if abs(m[i * 5 + col]) > abs(m[piv * 5 + col]):
                piv = i
        if abs(m[piv * 5 + col]) < 1e-300 or not math.isfinite(m[piv * 5 + col]):
            return False
        if piv != col:
            for j in range(5):
                tmp = m[col * 5 + j]
                m[col * 5 + j] = m[piv * 5 + j]
                m[piv * 5 + j] = tmp
        for i in range(col + 1, 4):
            f = m[i * 5 + col] / m[col * 5 + col]
            for j in range(col, 5):
                m[i * 5 + j] -= f * m[col * 5 + j]
    for i in range(3, -1, -1):
        s = m[i * 5 + 4]
        for j in range(i + 1, 4):
            s -= m[i * 5 + j] * out[j]
        out[i] = s / m[i * 5 + i]
    return True
