"""Elementary functions that LLVM can vectorise: a fused multiply-add and an exponential.

numba's ``np.exp`` calls the C library one value at a time, so a loop holding it is
never vectorised. :func:`exp` here is written in plain arithmetic (range reduction by
powers of two, a polynomial, the power of two built from its bits), so the loop
vectoriser turns a kernel loop that calls it into SIMD code. It is not an
approximation in the sense of a table or a truncated series of low order: it is
accurate to 1 ulp over the whole double range it accepts (measured against numpy's
``exp`` in ``tests/kernels/test_fast_paths.py``), the accuracy of a C library ``exp``.

:func:`fma` is the exactly rounded fused multiply-add (IEEE 754-2008), the LLVM
intrinsic ``llvm.fma``: one rounding instead of two, the same result on every machine
with the instruction. It is not fastmath (no reassociation, no contraction chosen by
the compiler).

Method (common practice, e.g. Muller 2016, Elementary Functions, ch. 11): with
k = round(x / ln 2) and r = x - k ln 2 (ln 2 split in two parts, Cody & Waite 1980),
|r| <= ln(2)/2 and exp(x) = 2^k exp(r); exp(r) = 1 + r + r^2 Q(r) with Q of degree 9
fitted for the least largest relative error on that interval (1.1e-17, 0.05 ulp;
``tools/bench/exp_coefficients.py`` derives the coefficients), by Horner's rule.
(Estrin's scheme, with a shorter chain of dependent operations, was measured: no
faster in the kernels, which are bound by the number of operations, and 2 ulp. The
Taylor polynomial needs degree 13 for the same accuracy: two more operations.)
"""

import numpy as np
from llvmlite import ir
from numba import types
from numba.extending import intrinsic

from cable.kernels.jit import jit_inline


@intrinsic
def fma(typingctx, a, b, c):
    """a * b + c with a single rounding (``llvm.fma.f64``)."""
    sig = types.float64(types.float64, types.float64, types.float64)

    def codegen(context, builder, signature, args):
        d = ir.DoubleType()
        fn = builder.module.declare_intrinsic("llvm.fma", [d], ir.FunctionType(d, [d, d, d]))
        return builder.call(fn, args)

    return sig, codegen


@intrinsic
def _bits_to_float(typingctx, bits):
    """The float64 whose IEEE 754 bit pattern is the int64 ``bits``."""
    sig = types.float64(types.int64)

    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], ir.DoubleType())

    return sig, codegen


LOG2E = 1.4426950408889634
LN2_HI = 0.6931471805599453          # ln 2 rounded to double
LN2_LO = 2.3190468138462996e-17      # ln 2 - LN2_HI
#: arguments are clamped to [EXP_MIN, EXP_MAX]: exp(-708) ~ 3e-308 (smallest normal
#: range), exp(709) ~ 8e307; beyond them the result is that of the bound
EXP_MIN = -708.0
EXP_MAX = 709.0
#: coefficients of r^2 .. r^11 (tools/bench/exp_coefficients.py)
P2 = 0.5000000000000011
P3 = 0.16666666666666413
P4 = 0.04166666666653014
P5 = 0.008333333333494234
P6 = 0.001388888894362831
P7 = 0.00019841269506939012
P8 = 2.4801493107168906e-05
P9 = 2.755758618880129e-06
P10 = 2.763024342982906e-07
P11 = 2.500007602189905e-08


@jit_inline
def exp_reduction(x):
    """(2^k, r, u) for x within [EXP_MIN, EXP_MAX]: x = k ln 2 + r with |r| <= ln(2)/2 and
    exp(r) = 1 + r u, u = 1 + r Q(r); so exp(x) = 2^k (1 + r u) and, without cancellation,
    exp(x) - 1 = 2^k r u + (2^k - 1) (used by ``equations.vecmath.expm1_ratio``)."""
    k = np.floor(fma(x, LOG2E, 0.5))
    r = fma(k, -LN2_HI, x)
    r = fma(k, -LN2_LO, r)
    p = fma(P11, r, P10)
    p = fma(p, r, P9)
    p = fma(p, r, P8)
    p = fma(p, r, P7)
    p = fma(p, r, P6)
    p = fma(p, r, P5)
    p = fma(p, r, P4)
    p = fma(p, r, P3)
    p = fma(p, r, P2)
    u = fma(p, r, 1.0)
    return _bits_to_float((int(k) + 1023) << 52), r, u


@jit_inline
def _exp_reduced(x):
    # exp(x) for x already within [EXP_MIN, EXP_MAX]
    s, r, u = exp_reduction(x)
    return fma(u, r, 1.0) * s


@jit_inline
def exp(x):
    """exp(x) to 1 ulp, vectorisable; a NaN argument gives exp(EXP_MIN) or exp(EXP_MAX)."""
    return _exp_reduced(min(max(x, EXP_MIN), EXP_MAX))


@jit_inline
def exp_nonpositive(x):
    """exp(x) for x <= 0 (a decay factor exp(-dt/tau)): one clamp fewer than :func:`exp`."""
    return _exp_reduced(max(x, EXP_MIN))
