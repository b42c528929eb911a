"""A logarithm and (exp(x) - 1)/x that LLVM can vectorise, for the generated fast kernels.

numba's ``np.log`` and ``np.expm1`` call the C library one value at a time, so a node loop
holding them is never turned into SIMD code; :func:`cable.kernels.elementary.exp` solves
this for the exponential, these two do the same for the other functions the generated
models need (Nernst potentials, float powers as exp(e log x), Rush-Larsen factors whose
coefficient depends on a state). Plain arithmetic and bit operations, no tables.

Methods (common practice, Muller 2016, Elementary Functions, ch. 11; the argument
reduction of fdlibm's ``log``):

* ``log``: x = 2^k m with m in [sqrt(1/2), sqrt(2)), f = m - 1 (exact), s = f/(2 + f),
  log(m) = 2 atanh(s) = f - s (f - R) with R = sum 2 s^(2j)/(2j + 1), j = 1..11
  (|s| <= 0.172: the first term left out is below 1e-18 of the result); then
  k ln2_hi + (log(m) + k ln2_lo). Measured against numpy in
  ``tests/membrane/equations/test_vecmath.py``.
* ``expm1_ratio``: (exp(x) - 1)/x, 1 at x = 0, from the reduction of the vectorisable
  ``exp`` (``cable.kernels.elementary.exp_reduction``: x = k ln 2 + r, exp(r) = 1 + r u):
  exp(x) - 1 = 2^k r u + (2^k - 1), which cancels nowhere (for k = 0 it is r u, r = x
  exactly; for k < 0, |x| > 0.34, the two terms differ in sign by at most a factor 2).
  One polynomial and one division, the cost of ``exp`` and a division (the 17-term Taylor
  series it replaces cost 16 more operations per gate); 2 ulp against numpy, measured.
"""

import numpy as np
from llvmlite import ir
from numba import types
from numba.extending import intrinsic

from cable.kernels.elementary import EXP_MAX, EXP_MIN, _bits_to_float, exp, exp_reduction, fma
from cable.kernels.jit import jit_inline


@intrinsic
def _float_to_bits(typingctx, x):
    """The int64 holding the IEEE 754 bit pattern of the float64 ``x``."""
    sig = types.int64(types.float64)

    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], ir.IntType(64))

    return sig, codegen


LN2_HI = 0.6931471805599453          # ln 2 rounded to double
LN2_LO = 2.3190468138462996e-17      # ln 2 - LN2_HI
SQRT2 = 1.4142135623730951
TINY = 2.2250738585072014e-308       # smallest normal double
TWO54 = 18014398509481984.0          # 2^54: subnormals scaled into the normal range
MANTISSA = (1 << 52) - 1
ONE_BITS = 1023 << 52
#: 2/(2j + 1), j = 1..11
L1, L2, L3, L4, L5, L6 = 2.0 / 3.0, 2.0 / 5.0, 2.0 / 7.0, 2.0 / 9.0, 2.0 / 11.0, 2.0 / 13.0
L7, L8, L9, L10, L11 = 2.0 / 15.0, 2.0 / 17.0, 2.0 / 19.0, 2.0 / 21.0, 2.0 / 23.0


@jit_inline
def log(x):
    """Natural logarithm, vectorisable: NaN for x < 0 or NaN, -inf at 0, inf at inf."""
    small = x < TINY
    xs = x * TWO54 if small else x
    bits = _float_to_bits(xs)
    k = (bits >> 52) - (1023 + 54 if small else 1023)
    m = _bits_to_float((bits & MANTISSA) | ONE_BITS)
    big = m > SQRT2
    m = 0.5 * m if big else m
    kf = np.float64(k + 1 if big else k)
    f = m - 1.0
    s = f / (2.0 + f)
    z = s * s
    r = fma(L11, z, L10)
    r = fma(r, z, L9)
    r = fma(r, z, L8)
    r = fma(r, z, L7)
    r = fma(r, z, L6)
    r = fma(r, z, L5)
    r = fma(r, z, L4)
    r = fma(r, z, L3)
    r = fma(r, z, L2)
    r = fma(r, z, L1)
    r = r * z
    lm = f - s * (f - r)
    out = fma(kf, LN2_HI, lm + kf * LN2_LO)
    out = -np.inf if x == 0.0 else out
    out = x if x == np.inf else out
    return np.nan if (x < 0.0) | (x != x) else out


@jit_inline
def expm1_ratio(x):
    """(exp(x) - 1)/x (1 at x = 0), vectorisable, for x <= EXP_MAX (709); NaN for a NaN argument."""
    s, r, u = exp_reduction(min(max(x, EXP_MIN), EXP_MAX))
    q = fma(s, r * u, s - 1.0) / x
    return 1.0 if x == 0.0 else q


@jit_inline
def power(x, e):
    """x**e for a non-integer e, as exp(e log x) (vectorisable; NaN for x < 0)."""
    return exp(e * log(x))


@jit_inline
def buffered(c, d_total, buf, k):
    """The free concentration of a species in rapid equilibrium with a buffer (total ``buf``,
    dissociation constant ``k``) after its total concentration c + buf c/(c + k) changed by
    ``d_total``: the positive root of c'^2 + (buf + k - T) c' - k T = 0, T the new total, in
    the form without cancellation (ten Tusscher & Panfilov 2006; the hand-written kernel's)."""
    bc = buf - buf * c / (c + k) - d_total - c + k
    cc = k * (buf * c / (c + k) + d_total + c)
    root = np.sqrt(bc * bc + 4.0 * cc)
    return 2.0 * cc / (root + bc) if bc >= 0.0 else 0.5 * (root - bc)
