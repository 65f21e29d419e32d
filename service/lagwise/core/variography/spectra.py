"""Pointwise products of 2-D spectra, written in place (compiled).

The FFT pair sums (:mod:`lagwise.core.variography.fft`) multiply spectra element by
element: conj(A) B for a cross-correlation, |A|^2 for an autocorrelation, and for
the squared differences 2 Re(conj(Q) C) - 2 |S|^2. numpy would build a temporary
array the size of a spectrum for each step; these loops make one pass each, over
flattened C-contiguous ``complex128`` arrays, and may write over an input (``out``
may be ``a`` or ``b``). Each result is the exact floating-point product of its
inputs' parts; nothing is rounded otherwise.
"""

from __future__ import annotations

from numba import njit, prange


@njit(parallel=True, cache=True)
def cross_into(out, a, b):
    """out[k] = conj(a[k]) * b[k] (the spectrum of the cross-correlation corr(a, b))."""
    for k in prange(out.size):
        ar, ai = a[k].real, a[k].imag
        br, bi = b[k].real, b[k].imag
        out[k] = complex(ar * br + ai * bi, ar * bi - ai * br)


@njit(parallel=True, cache=True)
def power_into(out, a):
    """out[k] = |a[k]|^2 (the spectrum of the autocorrelation corr(a, a)); imaginary part 0."""
    for k in prange(out.size):
        ar, ai = a[k].real, a[k].imag
        out[k] = complex(ar * ar + ai * ai, 0.0)


@njit(parallel=True, cache=True)
def twice_real_cross(q, c):
    """q[k] = 2 Re(conj(q[k]) c[k]): the spectrum of corr(q, c) + corr(c, q); imaginary part 0."""
    for k in prange(q.size):
        q[k] = complex(2.0 * (q[k].real * c[k].real + q[k].imag * c[k].imag), 0.0)


@njit(parallel=True, cache=True)
def less_twice_power(b, s):
    """b[k] = b[k] - 2 |s[k]|^2 (the real part; the imaginary part is left as it is)."""
    for k in prange(b.size):
        sr, si = s[k].real, s[k].imag
        b[k] = complex(b[k].real - 2.0 * (sr * sr + si * si), b[k].imag)
