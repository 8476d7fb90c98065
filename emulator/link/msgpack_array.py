"""A telegram's msgpack array of numbers, packed and unpacked compiled, with no Python
object per value: the fixed layout is known, so each frame needs only its integers.

Packing writes what ``msgpack.packb`` writes for a list of integers, byte for byte: an
array header (fixarray, array 16, array 32), each integer in the shortest form of the
msgpack specification (github.com/msgpack/msgpack/blob/master/spec.md, "int format
family": positive fixint, uint 8/16/32/64 for the non-negative, negative fixint, int
8/16/32/64 for the negative). tests/link/test_msgpack_array.py compares it with the
msgpack package on random telegrams.

Unpacking reads an array of integers and floats (float 32/64) into a float array. It
answers only the plain case; anything else (another type, a length that does not
match, bytes left over, an integer past int64, a float that is not finite) returns a
negative status and the caller takes the msgpack package's full path, which names the
fault.
"""

from __future__ import annotations

import math

import numba as nb
import numpy as np

from emulator.kernel_cache import WITHOUT_RUNTIME


#: room for a telegram of n values: array header, header fields and values at their
#: longest (9 bytes each)
def buffer_size(n_values: int, n_header: int = 6) -> int:
    """Bytes enough for any telegram of n_values numbers after n_header header fields."""
    return 5 + 9 * (n_values + n_header)


WIRE_LIMIT = 2.0**63  # a wire value's magnitude stays below this (int64)


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def _put(buf, pos, value, n_bytes):
    """value big-endian in n_bytes at pos; returns the position after it."""
    for j in range(n_bytes):
        buf[pos + j] = (value >> (8 * (n_bytes - 1 - j))) & 0xFF
    return pos + n_bytes


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def pack_int(buf, pos, v):
    """One integer in msgpack's shortest form at pos; returns the position after it."""
    if v >= 0:
        if v < 128:
            buf[pos] = v
            return pos + 1
        if v <= 0xFF:
            buf[pos] = 0xCC
            return _put(buf, pos + 1, v, 1)
        if v <= 0xFFFF:
            buf[pos] = 0xCD
            return _put(buf, pos + 1, v, 2)
        if v <= 0xFFFFFFFF:
            buf[pos] = 0xCE
            return _put(buf, pos + 1, v, 4)
        buf[pos] = 0xCF
        return _put(buf, pos + 1, v, 8)
    if v >= -32:
        buf[pos] = v & 0xFF
        return pos + 1
    if v >= -128:
        buf[pos] = 0xD0
        return _put(buf, pos + 1, v & 0xFF, 1)
    if v >= -32768:
        buf[pos] = 0xD1
        return _put(buf, pos + 1, v & 0xFFFF, 2)
    if v >= -2147483648:
        buf[pos] = 0xD2
        return _put(buf, pos + 1, v & 0xFFFFFFFF, 4)
    buf[pos] = 0xD3
    return _put(buf, pos + 1, v, 8)


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def pack(header, values, inv_scales, buf):
    """[*header, *rint(values x inv_scales)] as a msgpack array into buf; returns its
    length in bytes, or -1 - i where value i is not finite or past int64 in wire units
    (nothing an integer telegram can carry). header: int64 array; the values in physical
    units, rounded half to even into wire units."""
    n = header.shape[0] + values.shape[0]
    if n <= 15:
        buf[0] = 0x90 | n
        pos = 1
    elif n <= 0xFFFF:
        buf[0] = 0xDC
        pos = _put(buf, 1, n, 2)
    else:
        buf[0] = 0xDD
        pos = _put(buf, 1, n, 4)
    for i in range(header.shape[0]):
        pos = pack_int(buf, pos, header[i])
    for i in range(values.shape[0]):
        wire = np.rint(values[i] * inv_scales[i])
        if not -WIRE_LIMIT < wire < WIRE_LIMIT:  # NaN fails this too
            return -1 - i
        pos = pack_int(buf, pos, np.int64(wire))
    return pos


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def _get(data, pos, n_bytes):
    v = np.uint64(0)
    for j in range(n_bytes):
        v = (v << np.uint64(8)) | np.uint64(data[pos + j])
    return v


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def _signed(u, bits):
    """The two's complement value of the low ``bits`` of u."""
    v = np.int64(u)
    if bits < 64 and v >= (np.int64(1) << (bits - 1)):
        v -= np.int64(1) << bits
    return v


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def unpack(data, header, values, scratch):
    """A msgpack array of len(header) integers then len(values) numbers from data
    (bytes, or an array of uint8): the header into header (int64), the numbers into
    values (float64).
    Returns 0, or -1 where the telegram is not that plain case (the caller decodes it
    the long way). scratch: a uint64 array of one element (for the floats' bits)."""
    n_data = len(data)
    if n_data < 1:
        return -1
    b = data[0]
    if b & 0xF0 == 0x90:
        n, pos = b & 0x0F, 1
    elif b == 0xDC and n_data >= 3:
        n, pos = np.int64(_get(data, 1, 2)), 3
    elif b == 0xDD and n_data >= 5:
        n, pos = np.int64(_get(data, 1, 4)), 5
    else:
        return -1
    n_header = header.shape[0]
    if n != n_header + values.shape[0]:
        return -1
    bits = scratch.view(np.float64)
    bits32 = scratch[:1].view(np.uint32)
    for i in range(n):
        if pos >= n_data:
            return -1
        b = data[pos]
        is_float = False
        x = 0.0
        v = np.int64(0)
        if b < 0x80:
            v, pos = np.int64(b), pos + 1
        elif b >= 0xE0:
            v, pos = np.int64(b) - 256, pos + 1
        else:
            if b in (0xCC, 0xD0):
                size = 1
            elif b in (0xCD, 0xD1):
                size = 2
            elif b in (0xCE, 0xD2, 0xCA):
                size = 4
            elif b in (0xD3, 0xCB, 0xCF):
                size = 8
            else:  # another type: the long way
                return -1
            if pos + 1 + size > n_data:
                return -1
            u = _get(data, pos + 1, size)
            pos += 1 + size
            if b == 0xCB:
                scratch[0] = u
                x, is_float = bits[0], True
            elif b == 0xCA:
                scratch[0] = 0
                bits32[0] = np.uint32(u)
                x, is_float = np.float64(scratch[:1].view(np.float32)[0]), True
            if is_float and not math.isfinite(x):  # NaN or infinite: the long way
                return -1
            elif b == 0xCF:
                if u >= np.uint64(1) << np.uint64(63):  # past int64: the long way
                    return -1
                v = np.int64(u)
            elif b <= 0xCE:
                v = np.int64(u)
            else:
                v = _signed(u, 8 * size)
        if i < n_header:
            if is_float:
                return -1
            header[i] = v
        else:
            values[i - n_header] = x if is_float else np.float64(v)
    if pos != n_data:
        return -1
    return 0


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def unpack_scaled(data, header, values, scratch, scales):
    """unpack(), then each value times its scale (wire units to physical ones, the same
    products as numpy's ``values *= scales``). Returns unpack()'s code."""
    code = unpack(data, header, values, scratch)
    if code == 0:
        for i in range(values.shape[0]):
            values[i] *= scales[i]
    return code
