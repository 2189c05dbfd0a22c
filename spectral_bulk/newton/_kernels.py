"""Compiled kernels of the one-dimensional dense Newton workspace.

One kernel does, in a single pass, what the generic path does with a dozen small
numpy calls per Newton iteration: the finiteness check of the residual and of its
pointwise linearisation, the per-field weights, the componentwise backward error
(:func:`~spectral_bulk.newton.residual_norm`), the dense Jacobian assembly
(:func:`~spectral_bulk.newton.assemble_dense`) and its row equilibration
(:class:`~spectral_bulk.newton.DenseSolver`).  At the sizes of one-dimensional
problems the numpy calls cost microseconds each, far more than their arithmetic.

The kernels are plain Python functions ``_<name>_py``; :func:`dispatchers` gives their
compiled versions (``dispatchers().<name>``).  Two more steps of the Newton iteration are
fused the same way: the correction after the LAPACK factorisation (``newton_update``)
and everything the damping test needs at a trial point (``trial_point``,
``after_trial``).  For small systems the whole damped iteration is one kernel
(``drive``: :func:`_drive_py`), and the certificate's measures another (``certificate``).
The tests compare each compiled kernel with its plain body and with the generic path's
numpy functions (:func:`prepare_dense_reference`), LAPACK, or the Python loop.  numba
is imported when a kernel is first needed, so importing the package stays cheap.
"""

import types

import numpy as np

__all__ = ["dispatchers", "prepare_dense_reference"]

_COMPILED = {}
# Reassociation lets LLVM vectorise the sums and maxima over the (possibly cache-sized)
# Jacobian: they then differ from the reference by rounding only.  No other fast-math
# flag is set, so NaN and inf keep their meaning (the finiteness checks rely on it).
_FASTMATH = {"_prepare_dense_py": {"reassoc"}, "_check_norms_py": {"reassoc"}}


def _check_norms_py(A, R, F, u, scales, w):
    """The checks and norms of :func:`_prepare_dense_py`: ``(finite, rnorm)``, and ``w``."""
    nf, _, na, n = A.shape
    for r in range(nf * n):
        if not np.isfinite(F[r]):
            return False, np.nan
    for j in range(nf):
        for i in range(nf):
            for k in range(na):
                for p in range(n):
                    if not np.isfinite(A[j, i, k, p]):
                        return False, np.nan
    for i in range(nf):
        m = scales[i]
        for p in range(n):
            a = abs(u[i * n + p])
            if a > m:
                m = a
        w[i] = m
    rnorm = 0.0
    for j in range(nf):
        for p in range(n):
            s = 0.0
            for i in range(nf):
                for k in range(na):
                    s += abs(A[j, i, k, p]) * w[i] * R[k, p]
            f = abs(F[j * n + p])
            r = f / s if s > 0 else f
            if r > rnorm:
                rnorm = r
    return True, rnorm


def _prepare_dense_py(A, DT, R, F, u, scales, J, w, rscale, assemble):
    """Checks, norms, assembly and equilibration of one Newton step (``dispatchers().prepare_dense``).

    Parameters
    ----------
    A : (nf, nf, na, n) float
        Pointwise coefficients ``dF_j[p] / d(D^k U_i)[p]``.
    DT : (na, n, n) float
        Dense derivative operators, transposed: ``DT[k, q, p] = (D^k)[p, q]``; ``D^0`` is
        the identity and is not read.
    R : (na, n) float
        Absolute row sums of the operators.
    F : (nf * n,) float
        Residual.
    u : (nf * n,) float
        State.
    scales : (nf,) float
        Per-field size floors.
    J : (nf * n, nf * n) float, Fortran order
        Output: row-equilibrated Jacobian.
    w : (nf,) float
        Output: per-field weights ``max(max|u_f|, scale_f)``.
    rscale : (nf * n,) float
        Output: row scale factors (``1 / max_q |J[r, q]|``, 1 for zero rows).
    assemble : bool
        Whether to assemble ``J`` (``False``: only the checks and norms).

    Returns
    -------
    finite : bool
        Whether ``F`` and ``A`` are finite (when not, nothing else is computed).
    rnorm : float
        Componentwise backward error of ``F``.
    anorm : float
        1-norm of the equilibrated Jacobian (for the condition estimate).
    """
    finite, rnorm = _check_norms_py(A, R, F, u, scales, w)
    if not finite:
        return False, np.nan, np.nan
    if not assemble:
        return True, rnorm, np.nan
    nf, _, na, n = A.shape
    # column by column of the Fortran-ordered J: contiguous inner loops over one block
    # column (in cache while it is built and its row maxima gathered); one more pass over
    # J scales the rows
    size = nf * n
    for r in range(size):
        rscale[r] = 0.0
    for j in range(nf):
        for i in range(nf):
            for q in range(n):
                col = i * n + q
                for p in range(n):
                    J[j * n + p, col] = 0.0
                J[j * n + q, col] = A[j, i, 0, q]
                for k in range(1, na):
                    for p in range(n):
                        J[j * n + p, col] += A[j, i, k, p] * DT[k, q, p]
                for p in range(n):
                    rscale[j * n + p] = max(rscale[j * n + p], abs(J[j * n + p, col]))
    for r in range(size):
        rscale[r] = 1.0 / rscale[r] if rscale[r] > 0 else 1.0
    anorm = 0.0
    for q in range(size):
        c = 0.0
        for r in range(size):
            v = J[r, q] * rscale[r]
            J[r, q] = v
            c += abs(v)
        anorm = max(anorm, c)
    return True, rnorm, anorm


def _pivot_ratio_py(lu):
    """``min |U_ii| / max |U_ii|`` of an LU factor (0 for a zero or non-finite diagonal)."""
    n = lu.shape[0]
    lo, hi = np.inf, 0.0
    for i in range(n):
        d = abs(lu[i, i])
        if not np.isfinite(d):
            return 0.0
        lo = min(lo, d)
        hi = max(hi, d)
    return lo / hi if hi > 0 else 0.0


def _scaled_norm_py(dx, w):
    """``max_f max_p |dx_f[p]| / w_f`` (the update norm of :class:`NewtonOptions`)."""
    nf = w.shape[0]
    n = dx.shape[0] // nf
    out = 0.0
    for i in range(nf):
        m = 0.0
        for p in range(n):
            a = abs(dx[i * n + p])
            if a > m or a != a:  # a NaN sticks, as in numpy's max
                m = a
        r = m / w[i]
        if r > out or r != r:
            out = r
    return out


def _damping_norms_py(a, b, lam, w):
    """``(norm(a), norm(a - (1 - lam) b))`` in the scaled norm: both damping-test norms."""
    nf = w.shape[0]
    n = a.shape[0] // nf
    na, nd = 0.0, 0.0
    c = 1.0 - lam
    for i in range(nf):
        ma, md = 0.0, 0.0
        for p in range(n):
            x = abs(a[i * n + p])
            y = abs(a[i * n + p] - c * b[i * n + p])
            if x > ma or x != x:  # a NaN sticks, as in numpy's max
                ma = x
            if y > md or y != y:
                md = y
        if ma / w[i] > na or ma != ma:
            na = ma / w[i]
        if md / w[i] > nd or md != md:
            nd = md / w[i]
    return na, nd


def _chebyshev_tails_py(u, C, scales, out):
    """Tail measure of each field (as :meth:`Grid.tail` on a 1-D Chebyshev grid).

    ``C`` is the values -> coefficients matrix; the measure is the largest of the
    last ``max(2, n // 8)`` coefficients over ``max(max|c|, max|u_f|, scale_f)``.
    """
    nf = scales.shape[0]
    n = C.shape[0]
    m = max(2, n // 8)
    for i in range(nf):
        floor = scales[i]
        for p in range(n):
            floor = max(floor, abs(u[i * n + p]))
        top, tail = 0.0, 0.0
        for k in range(n):
            c = 0.0
            for p in range(n):
                c += C[k, p] * u[i * n + p]
            c = abs(c)
            top = max(top, c)
            if k >= n - m:
                tail = max(tail, c)
        denom = max(top, floor)
        out[i] = tail / denom if denom > 0 else 0.0


def _split_rows_py(rows, inv_h, F, A):
    """Compiled body of :func:`~spectral_bulk.newton._problem.split_rows` (same output).

    ``rows`` is ``(nf, nslot + 1, n)`` complex; ``F`` ``(nf * n,)`` and ``A``
    ``(nf, nf, na, n)`` are filled.
    """
    nf, ns1, n = rows.shape
    na = (ns1 - 1) // nf
    for j in range(nf):
        for p in range(n):
            b = rows[j, ns1 - 1, p]
            F[j * n + p] = b.real if b.imag == 0 else np.nan
        for s in range(ns1 - 1):
            i, k = s // na, s % na
            for p in range(n):
                A[j, i, k, p] = rows[j, s, p].imag * inv_h


def _field_weights_py(u, scales, w):
    """``w_f = max(max_p |u_f[p]|, scale_f)`` (as :func:`~spectral_bulk.newton.field_weights`)."""
    nf = scales.shape[0]
    n = u.shape[0] // nf
    for i in range(nf):
        m = scales[i]
        for p in range(n):
            m = max(m, abs(u[i * n + p]))
        w[i] = m


def _fill_batch_py(u, dstack, h, buf):
    """Derivatives of the state on every complex-step slot (the batch of the linearisation).

    ``buf[i, k, s, p] = (D^k u_i)[p] + i h [s == i * na + k]``, with ``dstack`` the
    transposed derivative operators side by side (``u_i @ dstack`` gives all of them) and
    the last slot unperturbed; as ``(u @ dstack).reshape(...) + perturbation``.
    """
    nf, na, ns1, n = buf.shape
    for i in range(nf):
        for k in range(na):
            for p in range(n):
                acc = 0.0
                for q in range(n):
                    acc += u[i * n + q] * dstack[q, k * n + p]
                for s in range(ns1):
                    buf[i, k, s, p] = acc
                buf[i, k, i * na + k, p] = complex(acc, h)


def _lu_solve_py(lu, piv, rscale, rhs, out):
    """``out = -M^{-1} (rscale * rhs)`` from LAPACK ``getrf`` factors of ``M`` (as ``getrs``).

    ``lu`` holds the unit lower and the upper triangular factors, ``piv`` the
    0-based row interchanges applied in order.  Column-oriented loops suit the
    Fortran-ordered factor.  The minus sign is the Newton correction's.
    """
    n = lu.shape[0]
    for r in range(n):
        out[r] = rscale[r] * rhs[r]
    for i in range(n):
        j = piv[i]
        if j != i:
            t = out[i]
            out[i] = out[j]
            out[j] = t
    _triangular_inverse_py(lu, out, False)
    for r in range(n):
        out[r] = -out[r]


def _triangular_inverse_py(lu, x, transpose):
    """``x <- (L U)^{-1} x`` (or ``(L U)^{-T} x``) in place, for the factors of LAPACK ``getrf``.

    ``M = P L U``: the row interchanges ``P`` are the caller's.  :func:`_lu_solve_py` applies
    them first; the condition estimate leaves them out, as ``gecon`` does, since
    ``||M^{-1}||_1 = ||U^{-1} L^{-1} P^T||_1 = ||U^{-1} L^{-1}||_1`` (a column permutation
    keeps the column sums).
    """
    n = lu.shape[0]
    if not transpose:
        for j in range(n):
            v = x[j]
            if v != 0.0:
                for i in range(j + 1, n):
                    x[i] -= lu[i, j] * v
        for j in range(n - 1, -1, -1):
            x[j] /= lu[j, j]
            v = x[j]
            if v != 0.0:
                for i in range(j):
                    x[i] -= lu[i, j] * v
        return
    # U^T (forward) then L^T (backward, unit diagonal); column j of the Fortran-ordered
    # factor is contiguous, hence the dot-product form
    for j in range(n):
        s = x[j]
        for i in range(j):
            s -= lu[i, j] * x[i]
        x[j] = s / lu[j, j]
    for j in range(n - 1, -1, -1):
        s = x[j]
        for i in range(j + 1, n):
            s -= lu[i, j] * x[i]
        x[j] = s


def _rcond_py(lu, anorm):
    """Reciprocal 1-norm condition estimate of ``M`` from its ``getrf`` factors (as LAPACK ``gecon``).

    ``||M^{-1}||_1`` is estimated by the iteration of "FORTRAN codes for estimating the
    one-norm of a real or complex matrix, with applications to condition estimation",
    ACM Trans. Math. Softw. 14 (1988) 381, doi:10.1145/50063.214386 (citation details from
    memory), the scheme of LAPACK ``lacn2``: power-like steps on ``sign`` vectors, at most
    five, then the alternating-sign test vector.  Every candidate is a lower bound of the
    norm; this keeps the largest (``lacn2`` keeps the last, which differs only when an
    iteration stops on a decrease).  The tests compare it with ``gecon`` and with the exact
    norm.  Returns ``1 / (anorm * est)``, and 0 for a zero, non-finite or overflowing
    estimate (``gecon`` guards overflow by scaling; here it means singular to working
    precision).
    """
    n = lu.shape[0]
    if n == 0 or not anorm > 0:
        return 0.0
    for i in range(n):  # exactly singular (and no division by zero below)
        if lu[i, i] == 0.0:
            return 0.0
    x = np.empty(n)
    xi = np.empty(n)
    for i in range(n):
        x[i] = 1.0 / n
    _triangular_inverse_py(lu, x, False)
    est = 0.0
    for i in range(n):
        est += abs(x[i])
    if n > 1:
        for i in range(n):
            xi[i] = 1.0 if x[i] >= 0 else -1.0
            x[i] = xi[i]
        _triangular_inverse_py(lu, x, True)
        j = 0
        for i in range(1, n):
            if abs(x[i]) > abs(x[j]):
                j = i
        for it in range(4):
            for i in range(n):
                x[i] = 0.0
            x[j] = 1.0
            _triangular_inverse_py(lu, x, False)
            old = est
            est = 0.0
            same = True
            for i in range(n):
                est += abs(x[i])
                s = 1.0 if x[i] >= 0 else -1.0
                if s != xi[i]:
                    same = False
                xi[i] = s
            if same or est <= old:
                est = max(est, old)
                break
            for i in range(n):
                x[i] = xi[i]
            _triangular_inverse_py(lu, x, True)
            last = j
            j = 0
            for i in range(1, n):
                if abs(x[i]) > abs(x[j]):
                    j = i
            if abs(x[last]) == abs(x[j]):
                break
        # alternating-sign vector: catches matrices that fool the iteration
        sign = 1.0
        for i in range(n):
            x[i] = sign * (1.0 + i / (n - 1))
            sign = -sign
        _triangular_inverse_py(lu, x, False)
        alt = 0.0
        for i in range(n):
            alt += abs(x[i])
        alt = 2.0 * alt / (3.0 * n)
        if alt > est:
            est = alt
    if not (est > 0 and est < np.inf):
        return 0.0
    r = (1.0 / est) / anorm
    return r if r == r else 0.0


def _newton_update_py(lu, piv, rscale, F, w, dx, min_ratio):
    """The Newton correction after ``getrf``: pivot screen, ``dx = -J^{-1} F`` and its norm.

    Returns ``(ratio, ndx)`` with ``ratio`` the pivot ratio of :func:`_pivot_ratio_py`;
    when ``ratio <= min_ratio`` (a suspect factorisation, left to the caller's condition
    estimate) ``dx`` is not computed and ``ndx`` is NaN.
    """
    ratio = _pivot_ratio_py(lu)
    if ratio <= min_ratio:
        return ratio, np.nan
    _lu_solve_py(lu, piv, rscale, F, dx)
    return ratio, _scaled_norm_py(dx, w)


def _lu_factor_py(a, piv):
    """LU factorisation with partial pivoting in place, as LAPACK ``getrf`` (unblocked).

    ``a`` (Fortran order) is overwritten by the unit lower and the upper triangular
    factors and ``piv`` by the 0-based row interchanges, applied in order; the pivot of
    each column is its first entry of largest modulus (as ``idamax``).  Returns ``info``:
    0, or ``k + 1`` when ``U[k, k]`` is exactly zero (the factorisation goes on, as
    LAPACK's does).  For the small matrices of one-dimensional problems, where the call
    into LAPACK costs more than the arithmetic.
    """
    n = a.shape[0]
    info = 0
    for k in range(n):
        p = k
        m = abs(a[k, k])
        for i in range(k + 1, n):
            v = abs(a[i, k])
            if v > m:
                m = v
                p = i
        piv[k] = p
        if a[p, k] == 0.0:
            if info == 0:
                info = k + 1
            continue
        if p != k:
            for j in range(n):
                t = a[k, j]
                a[k, j] = a[p, j]
                a[p, j] = t
        inv = 1.0 / a[k, k]
        for i in range(k + 1, n):
            a[i, k] *= inv
        for j in range(k + 1, n):
            f = a[k, j]
            if f != 0.0:
                for i in range(k + 1, n):
                    a[i, j] -= a[i, k] * f
    return info


def _small_step_py(A, DT, R, F, u, scales, J, w, rscale, piv, dx, min_ratio):
    """A whole Newton correction of a small problem in one call (``dispatchers().small_step``).

    :func:`_prepare_dense_py` (checks, norms, assembly, equilibration),
    :func:`_lu_factor_py` on ``J`` and :func:`_newton_update_py`.  Returns
    ``(finite, rnorm, anorm, info, ratio, ndx)``; when not ``finite`` nothing after the
    checks is computed (``info = -1``).
    """
    finite, rnorm, anorm = _prepare_dense_py(A, DT, R, F, u, scales, J, w, rscale, True)
    if not finite:
        return False, rnorm, anorm, -1, 0.0, np.nan
    info = _lu_factor_py(J, piv)
    ratio, ndx = _newton_update_py(J, piv, rscale, F, w, dx, min_ratio)
    return True, rnorm, anorm, info, ratio, ndx


def _trial_point_py(u, lam, dx, trial, dstack, h, buf):
    """``trial = u + lam dx`` and the complex-step batch at it (as :func:`_fill_batch_py`)."""
    for r in range(u.shape[0]):
        trial[r] = u[r] + lam * dx[r]
    _fill_batch_py(trial, dstack, h, buf)


def _after_trial_py(rows, inv_h, Ft, At, lu, piv, rscale, dx, lam, w, trial, scales, dxbar):
    """Everything the damping test needs from the linearisation at a trial point.

    Splits the complex-step ``rows`` into ``Ft`` and ``At`` (:func:`_split_rows_py`);
    if ``Ft`` is finite, computes the simplified correction ``dxbar = -J^{-1} Ft`` with the
    current factors and returns ``(True, nbar, dd, nnew)``: ``nbar, dd`` the two
    damping-test norms of :func:`_damping_norms_py` and ``nnew`` the norm of ``dxbar`` in
    the weights of ``trial``.  A non-finite ``Ft`` returns ``(False, nan, nan, nan)``.
    """
    _split_rows_py(rows, inv_h, Ft, At)
    for r in range(Ft.shape[0]):
        if not np.isfinite(Ft[r]):
            return False, np.nan, np.nan, np.nan
    _lu_solve_py(lu, piv, rscale, Ft, dxbar)
    nbar, dd = _damping_norms_py(dxbar, dx, lam, w)
    nf = scales.shape[0]
    wt = np.empty(nf)
    _field_weights_py(trial, scales, wt)
    return True, nbar, dd, _scaled_norm_py(dxbar, wt)


def _certificate_py(A, R, F, u, scales, C, tails):
    """The certificate's two measures in one call (``dispatchers().certificate``).

    Fills ``tails`` as :func:`_chebyshev_tails_py` and returns the backward error of
    :func:`_prepare_dense_py` (NaN when ``F`` or ``A`` is not finite).
    """
    _chebyshev_tails_py(u, C, scales, tails)
    finite, rnorm = _check_norms_py(A, R, F, u, scales, np.empty(scales.shape[0]))
    return rnorm if finite else np.nan


# Exit codes of _drive_py; the indices of its scalar state S and counters I.
DRIVE_EVALUATE, DRIVE_STEP_CONVERGED, DRIVE_TRIAL_CONVERGED, DRIVE_LAMBDA_MIN, DRIVE_MAX_ITER, \
    DRIVE_HAND_BACK = 1, 2, 3, 4, 5, 6
S_LAM, S_NDX, S_NDX_PREV, S_LAM_PREV, S_ANORM, S_NNEW, S_LAM_TOP, S_TOL, S_LAMBDA_MIN, \
    S_MIN_RATIO, S_H = range(11)
I_PHASE, I_NJEV, I_NFEV, I_NR, I_NU, I_ND, I_CUR, I_MAX_ITER, I_HAS_PREV, I_REDUCED, I_TOP = range(11)
#: Rows of the drive's vector store ``V`` (``size`` each): the state and the trial point, and
#: the residuals there, are pairs whose roles swap when a trial point is accepted
#: (``V[I_CUR]`` is the state, ``V[4 + I_CUR]`` its residual).
V_DX, V_DXBAR, V_RSCALE, V_DXBAR_PREV = 2, 3, 6, 7


def _min_py(a, b):
    """Python's ``min(a, b)`` for floats: ``b`` only when ``b < a`` (NaN handling included)."""
    return b if b < a else a


def _drive_py(rows, V, Ab, J, piv, W, H, S, I, DT, R, scales, dstack, buf):
    """The damped Newton iteration of :func:`~spectral_bulk.newton._newton._newton`, compiled.

    For small one-dimensional problems the Python loop costs more than its arithmetic.
    This kernel runs the same algorithm (the same steps, damping factors, tests and
    records, in the same order) and returns to Python only to have the callbacks
    evaluated at a trial point (``DRIVE_EVALUATE``: the complex-step batch ``buf`` holds
    it; call again with the rows) or when it ends.  State between calls lives in the
    arrays:

    ``V`` (8, size)
        state / trial point (rows ``I[I_CUR]`` / ``1 - I[I_CUR]``), the Newton correction,
        the simplified correction, residuals at the state / trial point (rows
        ``4 + cur`` / ``5 - cur``), row scales of ``J``, the previous simplified correction.
    ``Ab`` (2, nf, nf, na, n)
        pointwise coefficients at the state (``Ab[cur]``) and at the trial point.
    ``J, piv``
        the LU factors of the Jacobian at the state (:func:`_small_step_py`).
    ``W`` (2, nf)
        field weights at the state, and scratch.
    ``H`` (3, max_iter + 1)
        the records: residual norms, update norms, damping factors (counts ``I[I_NR]``,
        ``I[I_NU]``, ``I[I_ND]``).
    ``S``, ``I``
        scalars (``S_*``, ``I_*`` indices); ``I[I_PHASE]`` is 0 at the top of an iteration
        (the residual and coefficients of the state are in place) and 1 after an evaluation.

    Exit codes: ``DRIVE_STEP_CONVERGED`` (the state plus the Newton correction is the
    answer), ``DRIVE_TRIAL_CONVERGED`` (the accepted trial point, now the state, plus the
    simplified correction), ``DRIVE_LAMBDA_MIN`` (diverges), ``DRIVE_MAX_ITER`` and
    ``DRIVE_HAND_BACK``: something the compiled path leaves to the Python loop (a
    non-finite residual or coefficient, a factorisation that needs the condition
    estimate, a non-finite correction), which goes on from the top of the iteration:
    ``I[I_TOP:I_TOP + 4]`` hold the counters ``njev, nr, nu, nd`` there and
    ``S[S_LAM_TOP]`` the damping factor (the state, its residual and coefficients are
    still in their rows, and ``nfev`` counts every evaluation made).
    """
    size = V.shape[1]
    tol, lambda_min, min_ratio = S[S_TOL], S[S_LAMBDA_MIN], S[S_MIN_RATIO]
    cur = I[I_CUR]
    lam = S[S_LAM]
    ndx = S[S_NDX]
    reduced = I[I_REDUCED] != 0
    evaluated = I[I_PHASE] == 1
    while True:
        if evaluated:  # the callbacks were evaluated at the trial point: the damping test
            evaluated = False
            I[I_NFEV] += 1
            Ft, At, trial = V[5 - cur], Ab[1 - cur], V[1 - cur]
            _split_rows_py(rows, 1.0 / S[S_H], Ft, At)
            finite = True
            for r in range(size):
                if not np.isfinite(Ft[r]):
                    finite = False
                    break
            retry = True
            if not finite:
                lam /= 2
                reduced = True
            else:
                dxbar = V[V_DXBAR]
                _lu_solve_py(J, piv, V[V_RSCALE], Ft, dxbar)
                nbar, dd = _damping_norms_py(dxbar, V[V_DX], lam, W[0])
                _field_weights_py(trial, scales, W[1])
                nnew = _scaled_norm_py(dxbar, W[1])
                theta = nbar / ndx
                mu_p = 0.5 * ndx * lam**2 / dd if dd > 0 else np.inf
                if theta >= 1 - lam / 4:
                    lam = _min_py(mu_p, lam / 2)
                    reduced = True
                else:
                    lam_new = _min_py(1.0, mu_p)
                    if lam_new >= 4 * lam and lam < 1 and not reduced:
                        lam = lam_new
                        reduced = True  # one enlargement per iteration: no ping-pong
                    else:
                        retry = False
            if not retry:  # accepted: the trial point becomes the state
                H[2, I[I_ND]] = lam
                I[I_ND] += 1
                cur = 1 - cur
                I[I_CUR] = cur
                S[S_LAM] = lam
                if lam == 1.0 and nnew <= tol:
                    H[1, I[I_NU]] = nnew
                    I[I_NU] += 1
                    S[S_NNEW] = nnew
                    return DRIVE_TRIAL_CONVERGED
                S[S_NDX_PREV], S[S_LAM_PREV] = ndx, lam
                I[I_HAS_PREV] = 1
                for r in range(size):
                    V[V_DXBAR_PREV, r] = dxbar[r]
                continue  # the next iteration
        else:  # the top of an iteration: the Newton correction at the state
            I[I_TOP], I[I_TOP + 1], I[I_TOP + 2], I[I_TOP + 3] = I[I_NJEV], I[I_NR], I[I_NU], I[I_ND]
            S[S_LAM_TOP] = lam
            if I[I_NJEV] >= I[I_MAX_ITER]:
                return DRIVE_MAX_ITER
            u, F, A = V[cur], V[4 + cur], Ab[cur]
            finite, rnorm, anorm, info, ratio, ndx = _small_step_py(A, DT, R, F, u, scales, J, W[0],
                                                                    V[V_RSCALE], piv, V[V_DX], min_ratio)
            if not finite or info != 0 or ratio <= min_ratio or not ndx < np.inf:
                return DRIVE_HAND_BACK
            I[I_NJEV] += 1
            H[0, I[I_NR]] = rnorm
            H[1, I[I_NU]] = ndx
            I[I_NR] += 1
            I[I_NU] += 1
            S[S_ANORM], S[S_NDX] = anorm, ndx
            if ndx <= tol:
                H[2, I[I_ND]] = 1.0
                I[I_ND] += 1
                return DRIVE_STEP_CONVERGED
            if I[I_HAS_PREV]:
                nprev, denom = _damping_norms_py(V[V_DXBAR_PREV], V[V_DX], 0.0, W[0])
                denom *= ndx
                mu = S[S_NDX_PREV] * nprev / denom * S[S_LAM_PREV] if denom > 0 else 1.0
                lam = _min_py(1.0, mu)
            reduced = False
        # a trial point with the current damping factor
        if lam < lambda_min:
            S[S_LAM] = lam
            return DRIVE_LAMBDA_MIN
        _trial_point_py(V[cur], lam, V[V_DX], V[1 - cur], dstack, S[S_H], buf)
        S[S_LAM] = lam
        I[I_REDUCED] = 1 if reduced else 0
        I[I_PHASE] = 1
        return DRIVE_EVALUATE


def _compiled(fun):
    """The numba-compiled ``fun`` (compiled once per process, cached on disk).

    A kernel may call other ``*_py`` bodies of this module: those are compiled first
    and bound in place of the plain functions (numba calls only compiled functions).
    """
    name = fun.__name__
    if name not in _COMPILED:
        import numba

        helpers = {g: globals()[g] for g in fun.__code__.co_names
                   if g.endswith("_py") and g in globals() and g != fun.__name__}
        if helpers:
            scope = dict(fun.__globals__)
            scope.update({g: _compiled(h) for g, h in helpers.items()})
            fun = types.FunctionType(fun.__code__, scope, fun.__name__, fun.__defaults__)
        _COMPILED[name] = numba.njit(cache=True, nogil=True, fastmath=_FASTMATH.get(name, False))(fun)
    return _COMPILED[name]


_KERNELS = {"prepare_dense": "_prepare_dense_py", "newton_update": "_newton_update_py",
            "trial_point": "_trial_point_py", "after_trial": "_after_trial_py",
            "fill_batch": "_fill_batch_py", "split_rows": "_split_rows_py",
            "scaled_norm": "_scaled_norm_py", "damping_norms": "_damping_norms_py",
            "field_weights": "_field_weights_py", "chebyshev_tails": "_chebyshev_tails_py",
            "lu_solve": "_lu_solve_py", "pivot_ratio": "_pivot_ratio_py", "rcond": "_rcond_py",
            "lu_factor": "_lu_factor_py", "small_step": "_small_step_py",
            "certificate": "_certificate_py", "drive": "_drive_py"}
_DISPATCH = None


def dispatchers():
    """The compiled kernels, as attributes named after their bodies without ``_..._py``.

    ``dispatchers().prepare_dense`` is the compiled :func:`_prepare_dense_py`, and so on
    (numba compiles each on its first call; arguments must have the kernels' types, e.g.
    ``lam`` a float).  The plain ``*_py`` functions are the fallback and the reference the
    tests compare with.
    """
    global _DISPATCH
    if _DISPATCH is None:
        _DISPATCH = types.SimpleNamespace(**{k: _compiled(globals()[v]) for k, v in _KERNELS.items()})
    return _DISPATCH


def prepare_dense_reference(problem, A, F, u):
    """What :func:`_prepare_dense_py` computes, by the generic path's numpy functions.

    Returns
    -------
    finite : bool
    rnorm : float
    w : ndarray
    J : ndarray
        The row-equilibrated Jacobian.
    rscale : ndarray
    anorm : float
    """
    from ._linalg import assemble_dense
    from ._newton import field_weights, residual_norm

    if not (np.all(np.isfinite(F)) and np.all(np.isfinite(A))):
        return False, np.nan, None, None, None, np.nan
    w = field_weights(problem, u)
    rnorm = residual_norm(problem, F, A, u, w)
    J = assemble_dense(problem, A)
    rmax = np.abs(J).max(axis=1)
    rscale = np.where(rmax > 0, 1.0 / np.where(rmax > 0, rmax, 1.0), 1.0)
    J = J * rscale[:, None]
    return True, rnorm, w, J, rscale, float(np.abs(J).sum(axis=0).max())
