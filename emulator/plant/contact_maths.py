"""The contact law's exponential and arctangent (Polach's exp(-B |w|) and
arctan(k_S eps)), in arithmetic the compiler can vectorise.

The C library's ``exp`` and ``atan`` are calls: a loop over the axles that makes them
cannot use the processor's vector units. At 128 motors the contact law makes 1024 of
each a frame (128 axles, 8 sub-steps); measured side by side, the two calls cost about
6 and 10 ns each, and in straight-line arithmetic about 3 ns each, the loops running
several axles an instruction (shaft.contact_forces).

Both are S. L. Moshier's approximations (Cephes Math Library, ``exp.c`` and ``atan.c``;
*Methods and Programs for Mathematical Functions*, 1989), their coefficients as
published there; the branches of the range reduction are selects here.

arctan: reduce |x| by

    |x| <= 0.66:                    atan x = atan x
    0.66 < |x| <= tan(3 pi/8):      atan x = pi/4 + atan((|x| - 1) / (|x| + 1))
    |x| > tan(3 pi/8):              atan x = pi/2 + atan(-1 / |x|)

then atan t = t + t^3 P(t^2) / Q(t^2), P of degree 4, Q of degree 5 (monic), pi/4 and
pi/2 each carried in two parts. The file's header quotes a peak relative error of
1.8e-16 from 10^6 random trials over -10..10 (from memory); held here to 1 ulp, the C
library's bound. Odd (the sign copied from x, so atan(-0) = -0), atan(+-inf) = +-pi/2.

exponential: x = n ln 2 + r with n = floor(x log2(e) + 1/2) and ln 2 in two parts (C1
exact in few bits, so n C1 is exact), exp r = 1 + 2 r P(r^2) / (Q(r^2) - r P(r^2)), then
times 2^n built from its bits, in two factors 2^(n>>1) 2^(n - n>>1) so that a result
below the smallest normal number (x < -708.4) is still reached. Held to 2 ulp (the
approximation's own roundings reach about 1.8 ulp for small |x|, where the C library's
exp is within 1). 0 below -745.2, inf above 709.8, NaN in gives NaN.

tests/plant/test_contact_maths.py holds both to those bounds against an
extended-precision reference, and to the C library's results and its overflow and
underflow.
"""

from __future__ import annotations

import math

from numba import types
from numba.extending import intrinsic

from .jit import compiled_inline

# Cephes atan.c, the double-precision (IEEE) coefficients
_AP0 = -8.750608600031904122785e-01
_AP1 = -1.615753718733365076637e+01
_AP2 = -7.500855792314704667340e+01
_AP3 = -1.228866684490136173410e+02
_AP4 = -6.485021904942025371773e+01
_AQ0 = 2.485846490142306297962e+01
_AQ1 = 1.650270098316988542046e+02
_AQ2 = 4.328810604912902668951e+02
_AQ3 = 4.853903996359136964868e+02
_AQ4 = 1.945506571482613964425e+02
_TAN_3PI_8 = 2.41421356237309504880  # tan(3 pi / 8)
_MOREBITS = 6.123233995736765886130e-17  # pi/2 less its double
_PI_2 = 1.57079632679489661923
_PI_4 = 0.78539816339744830962

# Cephes exp.c
_EP0 = 1.26177193074810590878e-4
_EP1 = 3.02994407707441961300e-2
_EP2 = 9.99999999999999999910e-1
_EQ0 = 3.00198505138664455042e-6
_EQ1 = 2.52448340349684104192e-3
_EQ2 = 2.27265548208155028766e-1
_EQ3 = 2.00000000000000000009e0
_LN2_HI = 6.93145751953125e-1  # C1
_LN2_LO = 1.42860682030941723212e-6  # C2: C1 + C2 = ln 2
_LOG2E = 1.4426950408889634073599
_UNDER = -745.2  # exp(x) rounds to 0 below (the smallest subnormal is 2^-1074)
_OVER = 709.8  # and to inf above (the largest double is about e^709.78)


@intrinsic
def _double_from_bits(typingctx, bits):
    """The double whose IEEE 754 bit pattern is the int64 bits (a reinterpretation, as a
    C union does: numba's documented extension API, one LLVM bitcast)."""
    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], context.get_value_type(types.float64))
    return types.float64(types.int64), codegen


@compiled_inline
def _two_to(n):
    """2^n for an integer n in -1022..1023: exponent field n + 1023, fraction 0."""
    return _double_from_bits((n + 1023) << 52)


@compiled_inline
def arctan(x: float) -> float:
    """atan(x), rad (Cephes atan.c); vectorisable in a loop."""
    ax = abs(x)
    far = ax > _TAN_3PI_8
    mid = ax > 0.66
    num = -1.0 if far else (ax - 1.0 if mid else ax)
    den = ax if far else (ax + 1.0 if mid else 1.0)
    t = num / den
    base = _PI_2 if far else (_PI_4 if mid else 0.0)
    low = _MOREBITS if far else (0.5 * _MOREBITS if mid else 0.0)
    z = t * t
    p = (((_AP0 * z + _AP1) * z + _AP2) * z + _AP3) * z + _AP4
    q = ((((z + _AQ0) * z + _AQ1) * z + _AQ2) * z + _AQ3) * z + _AQ4
    y = base + ((t * (z * p / q) + t) + low)
    return math.copysign(y, x)


@compiled_inline
def exponential(x: float) -> float:
    """e^x (Cephes exp.c); vectorisable in a loop."""
    xc = min(max(x, -746.0), 710.0)  # (n stays in range; the ends are selected below)
    n = math.floor(_LOG2E * xc + 0.5)
    fn = float(n)
    r = xc - fn * _LN2_HI
    r = r - fn * _LN2_LO
    rr = r * r
    p = r * ((_EP0 * rr + _EP1) * rr + _EP2)
    q = ((_EQ0 * rr + _EQ1) * rr + _EQ2) * rr + _EQ3
    y = 1.0 + 2.0 * (p / (q - p))
    half = n >> 1
    y = y * _two_to(half) * _two_to(n - half)
    y = 0.0 if x < _UNDER else y
    y = math.inf if x > _OVER else y
    return x if x != x else y
