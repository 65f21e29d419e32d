"""One compiled pass over a raw JSON body: the value count of :mod:`.prescan` and members named twice.

orjson keeps the last of two members with the same name (``{"width": 1, "width": 2}``)
without telling; such a body is refused instead (:func:`lagwise.api.jsonio.repeated_member`
names the pointer). Finding repeats in the parsed document would mean visiting every
object in Python (200,000 GeoJSON features are 600,000 dicts), so the raw bytes are read
once by :func:`_scan` (numba), which also takes the count the prescan used to take with
three ``bytes.count`` passes (commas, ``[`` and ``{``, strings included).

The pass reads 64 bytes at a time (a loop the compiler vectorises) into bit masks of
quotes, backslashes, braces and colons. Backslashes escape the byte after them (a run of
them is walked bit by bit), unescaped quotes open and close strings (the inside of strings
is the running exclusive-or of the quote mask, carried from block to block), and only
braces and colons outside strings are visited, in order: ``{`` opens an object, a colon
takes the string before it as a member name of the innermost open object (hashed, FNV-1a
64-bit (Fowler, Noll and Vo) of its UTF-8 bytes once escapes are decoded, so ``"a"`` and
``"\\u0061"`` hash alike), ``}`` closes the object and compares its names' hashes (all
pairs up to 16 names, a sort above). Equal hashes only say a repeat is possible (a
collision is not excluded): the caller then parses the body exactly.

The body is not yet known to be JSON when this runs: every index stays within it, a stray
``}`` is ignored, and beyond :data:`MAX_DEPTH` nested objects (orjson refuses more) or
:data:`MAX_OPEN_MEMBERS` names of open objects the pass stops looking for repeats and says
a repeat is possible, so the caller parses exactly. Both stacks are allocated once at
their largest (8 KB of depths; 8 bytes per possible name, at most a quarter of the body's
bytes and 8 MB): arrays swapped inside the loop made numba count references at every
step, which had tripled the pass's time.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numba import njit
from numba.cpython.unsafe.numbers import trailing_zeros

MAX_DEPTH = 1025  # one more than orjson's nesting limit
MAX_OPEN_MEMBERS = 1 << 20
_FNV_BASIS = np.uint64(0xCBF29CE484222325)
_FNV_PRIME = np.uint64(0x100000001B3)
_SMALL = 16  # objects with at most this many members compare every pair of names


@dataclass(frozen=True)
class BodyScan:
    """What one pass over a raw body found.

    Attributes
    ----------
    values : int
        Commas, ``[`` and ``{`` of the body (strings included) plus one: an upper bound on its JSON values.
    maybe_repeated : bool
        Some object may name a member twice, or the pass could not tell: parse exactly to decide.
    """

    values: int
    maybe_repeated: bool


@njit(cache=True, nogil=True, inline="always")
def _mix(h, byte):
    return (h ^ np.uint64(byte)) * _FNV_PRIME


@njit(cache=True, nogil=True)
def _hex4(buf, i, end):
    """The value of the 4 hex digits at ``i`` (-1 when they are not, or run past ``end``)."""
    if i + 4 > end:
        return -1
    value = 0
    for k in range(4):
        c = buf[i + k]
        if 48 <= c <= 57:
            digit = c - 48
        elif 65 <= c <= 70:
            digit = c - 55
        elif 97 <= c <= 102:
            digit = c - 87
        else:
            return -1
        value = value * 16 + digit
    return value


@njit(cache=True, nogil=True)
def _decoded_hash(buf, i, end):
    """FNV-1a of the UTF-8 bytes of the string text ``buf[i:end]`` once its escapes are decoded."""
    h = _FNV_BASIS
    while i < end:
        c = buf[i]
        if c != 92 or i + 1 >= end:
            h = _mix(h, c)
            i += 1
            continue
        e = buf[i + 1]
        if e != 117:  # \" \\ \/ \b \f \n \r \t
            if e == 98:
                e = 8
            elif e == 102:
                e = 12
            elif e == 110:
                e = 10
            elif e == 114:
                e = 13
            elif e == 116:
                e = 9
            h = _mix(h, e)
            i += 2
            continue
        cp = _hex4(buf, i + 2, end)
        if cp < 0:
            h = _mix(h, c)
            i += 1
            continue
        i += 6
        if 0xD800 <= cp < 0xDC00 and i + 1 < end and buf[i] == 92 and buf[i + 1] == 117:
            low = _hex4(buf, i + 2, end)
            if 0xDC00 <= low < 0xE000:
                cp = 0x10000 + ((cp - 0xD800) << 10) + (low - 0xDC00)
                i += 6
        if cp < 0x80:
            h = _mix(h, cp)
        elif cp < 0x800:
            h = _mix(_mix(h, 0xC0 | (cp >> 6)), 0x80 | (cp & 63))
        elif cp < 0x10000:
            h = _mix(_mix(_mix(h, 0xE0 | (cp >> 12)), 0x80 | ((cp >> 6) & 63)), 0x80 | (cp & 63))
        else:
            h = _mix(_mix(h, 0xF0 | (cp >> 18)), 0x80 | ((cp >> 12) & 63))
            h = _mix(_mix(h, 0x80 | ((cp >> 6) & 63)), 0x80 | (cp & 63))
    return h


@njit(cache=True, nogil=True, inline="always")
def _name_hash(buf, colon):
    """(found, hash) of the member name that ends before the colon at ``colon``."""
    j = colon - 1
    while j >= 0 and (buf[j] == 32 or buf[j] == 10 or buf[j] == 13 or buf[j] == 9):
        j -= 1
    if j < 0 or buf[j] != 34:
        return False, _FNV_BASIS
    end = j
    j -= 1
    while j >= 0:
        if buf[j] == 34:
            slashes = 0
            while j - 1 - slashes >= 0 and buf[j - 1 - slashes] == 92:
                slashes += 1
            if slashes % 2 == 0:
                break
        j -= 1
    if j < 0:
        return False, _FNV_BASIS
    h = _FNV_BASIS
    for k in range(j + 1, end):
        c = buf[k]
        if c == 92:
            return True, _decoded_hash(buf, j + 1, end)
        h = _mix(h, c)
    return True, h


@njit(cache=True, nogil=True, inline="always")
def _repeats(hashes, start, stop):
    """True when two of ``hashes[start:stop]`` are equal."""
    if stop - start <= _SMALL:
        for a in range(start, stop):
            for b in range(a + 1, stop):
                if hashes[a] == hashes[b]:
                    return True
        return False
    ordered = np.sort(hashes[start:stop])
    for a in range(1, ordered.size):
        if ordered[a] == ordered[a - 1]:
            return True
    return False


@njit(cache=True, nogil=True)
def _scan(buf):
    """(values, maybe_repeated) of the raw body ``buf`` (uint8); see the module notes."""
    n = buf.size
    one = np.uint64(1)
    values = 1
    # A member takes at least 4 bytes (two quotes, a colon, a value): at most n // 4 + 1 names.
    capacity = min(MAX_OPEN_MEMBERS, n // 4 + 1)
    hashes = np.empty(capacity, np.uint64)
    frames = np.empty(MAX_DEPTH, np.int64)
    depth = 0
    names = 0
    looking = True
    maybe = False
    inside_carry = np.uint64(0)
    escape_carry = np.uint64(0)
    pad = np.empty(64, np.uint8)
    for base in range(0, n, 64):
        if base + 64 <= n:
            block = buf[base : base + 64]
        else:
            pad[:] = 32
            pad[: n - base] = buf[base:n]
            block = pad
        quotes = np.uint64(0)
        slashes = np.uint64(0)
        marks = np.uint64(0)
        counted = 0
        for k in range(64):
            c = block[k]
            shift = np.uint64(k)
            quotes |= np.uint64(c == 34) << shift
            slashes |= np.uint64(c == 92) << shift
            marks |= np.uint64(((c | 6) == 127) | (c == 58)) << shift
            counted += (c == 44) + (c == 91) + (c == 123)
        values += counted
        if not looking:
            continue
        escaped = escape_carry
        escape_carry = np.uint64(0)
        rest = slashes
        while rest:
            t = trailing_zeros(rest)
            rest &= rest - one
            bit = one << np.uint64(t)
            if escaped & bit:
                continue
            if t == 63:
                escape_carry = one
            else:
                escaped |= bit << one
        quotes &= ~escaped
        inside = quotes
        for s in (1, 2, 4, 8, 16, 32):
            inside ^= inside << np.uint64(s)
        inside ^= inside_carry
        inside_carry = np.uint64(0) - (inside >> np.uint64(63))
        events = marks & ~inside
        while events and looking:
            t = trailing_zeros(events)
            events &= events - one
            p = base + t
            c = buf[p]
            if c == 123:
                if depth == MAX_DEPTH:
                    looking = False
                    maybe = True
                    break
                frames[depth] = names
                depth += 1
            elif c == 125:
                if depth == 0:
                    continue
                depth -= 1
                start = frames[depth]
                if names - start > 1 and _repeats(hashes, start, names):
                    looking = False
                    maybe = True
                    break
                names = start
            elif c == 58 and depth > 0:
                found, h = _name_hash(buf, p)
                if not found:
                    continue
                if names == capacity:
                    looking = False
                    maybe = True
                    break
                hashes[names] = h
                names += 1
    return values, maybe


def scan(body: bytes | bytearray) -> BodyScan:
    """Read the raw ``body`` once: its value bound and whether a member may be named twice."""
    buf = np.frombuffer(memoryview(body).toreadonly(), dtype=np.uint8)
    values, maybe = _scan(buf)
    return BodyScan(int(values), bool(maybe))


def warm() -> None:
    """Compile (or load from numba's cache) and run the pass once."""
    scan(b'{"a": [1, {"b": "\\u0062", "c": 2}], "d": {"e": 1, "e": 2}}')
