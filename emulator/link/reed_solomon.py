"""Reed-Solomon code over GF(2^8), compiled: the serial link's forward error correction.

The code (Reed & Solomon, J. SIAM 8(2), 1960), in the conventions most byte-oriented
codecs use: field GF(2^8) with the primitive polynomial x^8 + x^4 + x^3 + x^2 + 1
(0x11D), primitive element alpha = 2, generator polynomial
g(x) = (x - alpha^0)(x - alpha^1)...(x - alpha^(n_parity - 1)) (first consecutive root
0). Systematic: a codeword is the message bytes followed by n_parity parity bytes, the
first byte the coefficient of the highest power; parity = message x x^n_parity mod g(x).
A codeword holds at most 255 bytes (a shorter one is the shortened code).

Decoding corrects up to n_parity // 2 wrong bytes, in the textbook steps (Blahut,
"Algebraic Codes for Data Transmission", 2003, ch. 7; Lin & Costello, "Error Control
Coding", 2nd ed., 2004, sec. 7.4-7.5): syndromes S_j = r(alpha^j); the error locator
Lambda(x) by Berlekamp-Massey; its roots by Chien search; the error values by Forney,
e_k = X_k Omega(X_k^-1) / Lambda'(X_k^-1) with Omega(x) = S(x) Lambda(x) mod x^n_parity
(first root 0). More wrong bytes than that are either detected (a locator of degree
above n_parity // 2, or fewer roots than its degree, or a root outside a shortened
codeword) or, rarely, miscorrected into another codeword: the link's CRC-16 under the
code catches those.

tests/link/test_reed_solomon.py checks parity and corrections against the ``reedsolo``
package from PyPI (a pure-Python codec of the same conventions, too slow for a 1 kHz
frame: ~0.35 ms to encode and ~0.45 ms to check one 240-byte block here).
"""

from __future__ import annotations

import numba as nb
import numpy as np

PRIMITIVE = 0x11D
#: bytes of a whole codeword (message and parity)
CODEWORD_MAX = 255


def _tables() -> tuple[np.ndarray, np.ndarray]:
    exp = np.zeros(512, dtype=np.int64)
    log = np.zeros(256, dtype=np.int64)
    x = 1
    for i in range(255):
        exp[i] = x
        log[x] = i
        x <<= 1
        if x & 0x100:
            x ^= PRIMITIVE
    exp[255:510] = exp[:255]  # exp[log a + log b] without a modulo
    return exp, log


EXP, LOG = _tables()


@nb.njit(cache=True)
def _mul(a, b):
    if a == 0 or b == 0:
        return 0
    return EXP[LOG[a] + LOG[b]]


@nb.njit(cache=True)
def _div(a, b):
    if a == 0:
        return 0
    return EXP[LOG[a] + 255 - LOG[b]]


@nb.njit(cache=True)
def generator(n_parity):
    """g(x) = prod_{i<n_parity} (x - alpha^i), highest power first (n_parity + 1 terms)."""
    g = np.zeros(n_parity + 1, dtype=np.int64)
    g[0] = 1
    for i in range(n_parity):
        root = EXP[i]
        # g <- g(x) (x + root): shift and add root x g, from the low end up
        for j in range(i + 1, 0, -1):
            g[j] ^= _mul(g[j - 1], root)
    return g


@nb.njit(cache=True)
def parity(message, gen, out):
    """The n_parity = len(gen) - 1 parity bytes of message (uint8) into out (uint8):
    the remainder of message(x) x^n_parity divided by g(x), by an LFSR division. The
    generator's coefficients are all non-zero for every n_parity the link uses
    (tests/link/test_reed_solomon.py), so each step is one logarithm and n_parity
    antilogarithms."""
    n_parity = gen.shape[0] - 1
    if n_parity < 1:
        return
    log_gen = np.empty(n_parity + 1, dtype=np.int64)
    for j in range(n_parity + 1):
        log_gen[j] = LOG[gen[j]]
    reg = np.zeros(n_parity, dtype=np.int64)
    for i in range(message.shape[0]):
        feedback = message[i] ^ reg[0]
        if feedback == 0:
            for j in range(n_parity - 1):
                reg[j] = reg[j + 1]
            reg[n_parity - 1] = 0
        else:
            lf = LOG[feedback]
            for j in range(n_parity - 1):
                reg[j] = reg[j + 1] ^ EXP[lf + log_gen[j + 1]]
            reg[n_parity - 1] = EXP[lf + log_gen[n_parity]]
    for j in range(n_parity):
        out[j] = reg[j]


@nb.njit(cache=True)
def correct(codeword, n_parity):
    """Correct codeword (uint8: message then parity, at most 255 bytes) in place.

    Returns the number of bytes corrected (0: it was a codeword), or -1 when the errors
    are more than the code can locate (codeword left as it was) or the lengths are not
    a code's (n_parity outside 1..len, a codeword past 255 bytes)."""
    if n_parity < 1:
        return -1
    return correct_with(codeword, generator(n_parity))


@nb.njit(cache=True)
def correct_with(codeword, gen):
    """correct() with the generator g(x) of its n_parity = len(gen) - 1 given (a caller
    that mends many blocks builds it once)."""
    n = codeword.shape[0]
    n_parity = gen.shape[0] - 1
    if n_parity < 1 or n_parity > n or n > CODEWORD_MAX:
        return -1
    # the common case first: the parity of the message part is the parity received
    # (a codeword), at the cost of encoding; the syndromes only otherwise
    again = np.empty(n_parity, dtype=np.uint8)
    parity(codeword[:n - n_parity], gen, again)
    clean = True
    for j in range(n_parity):
        if again[j] != codeword[n - n_parity + j]:
            clean = False
    if clean:
        return 0
    synd = np.zeros(n_parity, dtype=np.int64)
    for j in range(n_parity):
        s = 0
        for i in range(n):  # Horner: r(alpha^j), each step s alpha^j + r_i
            if s != 0:
                s = EXP[LOG[s] + j]
            s ^= codeword[i]
        synd[j] = s
    # Berlekamp-Massey: lam[k] is the coefficient of x^k
    lam = np.zeros(n_parity + 1, dtype=np.int64)
    prev = np.zeros(n_parity + 1, dtype=np.int64)
    tmp = np.zeros(n_parity + 1, dtype=np.int64)
    lam[0] = 1
    prev[0] = 1
    length = 0
    shift = 1
    b = 1
    for r in range(n_parity):
        d = synd[r]
        for k in range(1, length + 1):
            d ^= _mul(lam[k], synd[r - k])
        if d == 0:
            shift += 1
            continue
        coef = _div(d, b)
        if 2 * length <= r:
            tmp[:] = lam
            for k in range(shift, n_parity + 1):
                lam[k] ^= _mul(coef, prev[k - shift])
            length = r + 1 - length
            prev[:] = tmp
            b = d
            shift = 1
        else:
            for k in range(shift, n_parity + 1):
                lam[k] ^= _mul(coef, prev[k - shift])
            shift += 1
    degree = 0
    for k in range(n_parity + 1):
        if lam[k] != 0:
            degree = k
    if degree != length or 2 * length > n_parity:
        return -1
    # Chien search over the codeword's positions: byte i is the power p = n - 1 - i,
    # X = alpha^p, and a root of lam is X^-1 = alpha^(255 - p)
    positions = np.zeros(length, dtype=np.int64)
    found = 0
    for i in range(n):
        p = n - 1 - i
        xinv = EXP[(255 - p) % 255]
        v = 0
        for k in range(length, -1, -1):
            v = _mul(v, xinv) ^ lam[k]
        if v == 0:
            if found == length:
                return -1
            positions[found] = i
            found += 1
    if found != length:
        return -1  # roots outside this (shortened) codeword: not correctable
    # Forney: omega = S(x) lam(x) mod x^n_parity, lam' the formal derivative
    omega = np.zeros(n_parity, dtype=np.int64)
    for k in range(n_parity):
        acc = 0
        for m in range(min(k, length) + 1):
            acc ^= _mul(lam[m], synd[k - m])
        omega[k] = acc
    values = np.zeros(length, dtype=np.int64)
    for e in range(length):
        p = n - 1 - positions[e]
        x = EXP[p]
        xinv = EXP[(255 - p) % 255]
        num = 0
        for k in range(n_parity - 1, -1, -1):
            num = _mul(num, xinv) ^ omega[k]
        den = 0
        for k in range(length, 0, -1):  # lam'(x) = sum over odd k of lam[k] x^(k-1)
            if k % 2 == 1:
                term = lam[k]
                for _ in range(k - 1):
                    term = _mul(term, xinv)
                den ^= term
        if den == 0:
            return -1
        values[e] = _mul(x, _div(num, den))
    for e in range(length):
        codeword[positions[e]] ^= values[e]
    return length
