"""The vectorisable log and (exp(x) - 1)/x of cable/membrane/equations/vecmath.py against numpy."""

import numpy as np

from cable.kernels.jit import jit
from cable.membrane.equations import vecmath


@jit
def _log(x, out):
    for i in range(x.shape[0]):
        out[i] = vecmath.log(x[i])


@jit
def _ratio(x, out):
    for i in range(x.shape[0]):
        out[i] = vecmath.expm1_ratio(x[i])


def test_log_to_one_ulp_and_its_special_values():
    rng = np.random.default_rng(7)
    x = np.concatenate([10.0 ** rng.uniform(-320, 308, 50000), rng.uniform(0.5, 2.0, 50000),
                        1.0 + rng.uniform(-1e-6, 1e-6, 1000)])
    out = np.empty_like(x)
    _log(x, out)
    ref = np.log(x)
    nz = ref != 0.0
    # the method's error: the reduction f = m - 1 is exact, s = f/(2 + f) and the series carry
    # about 1 ulp (vecmath docstring; fdlibm's log is quoted at < 1 ulp); 2 ulp allowed
    assert np.max(np.abs(out - ref)[nz] / np.spacing(np.abs(ref[nz]))) <= 2.0
    special = np.array([0.0, np.inf, -1.0, np.nan, 5e-324])
    got = np.empty_like(special)
    _log(special, got)
    assert got[0] == -np.inf and got[1] == np.inf and np.isnan(got[2]) and np.isnan(got[3])
    assert got[4] == np.log(5e-324)


def test_expm1_ratio_against_numpy():
    rng = np.random.default_rng(8)
    x = np.concatenate([rng.uniform(-1.0, 1.0, 50000), rng.uniform(-50.0, 50.0, 50000),
                        rng.uniform(-1e-8, 1e-8, 1000), -10.0 ** rng.uniform(2.0, 2.9, 1000),
                        [-np.log(2) / 2, np.log(2) / 2, -1e-300, 0.0, 0.5, -0.5]])
    out = np.empty_like(x)
    _ratio(x, out)
    with np.errstate(all="ignore"):
        ref = np.where(x == 0.0, 1.0, np.expm1(x) / x)
    # exp(x) - 1 = 2^k r u + (2^k - 1) from exp's reduction (vecmath docstring): u carries
    # Horner's rounding (~1 ulp) and the polynomial's 0.05 ulp, r u and the sum one rounding
    # each, the division one more; no cancellation (for k < 0 the terms differ by at most a
    # factor 2, doubling one ulp): 1e-15 (4.5 ulp) allowed
    np.testing.assert_allclose(out, ref, rtol=1e-15, atol=0.0)
    assert out[-3] == 1.0  # x = 0
