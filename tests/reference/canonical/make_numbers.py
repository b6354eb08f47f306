"""Writes numbers.txt: IEEE 754 doubles and their RFC 8785 / ECMAScript Number::toString text.

The digits come from Python's float repr (the shortest string that round-trips; of those,
the one nearest to the double, ties to even: correctly rounded, CPython's dtoa); the layout
(plain or exponent form, e+/e-) is ECMAScript's Number::toString (ECMA-262, steps 6-10), as
RFC 8785 section 3.2.2.3 requires. Each line: 16 hex digits of the bit pattern, a space, the
text. Seeded, so the file is reproducible: python3 make_numbers.py > numbers.txt
"""

import random
import struct
from decimal import Decimal


def ecmascript(x):
    if x == 0.0:
        return "0"
    sign = "-" if x < 0 else ""
    _, digits, exp = Decimal(repr(abs(x))).normalize().as_tuple()
    d = "".join(map(str, digits))
    k = len(d)
    n = exp + k
    if k <= n <= 21:
        body = d + "0" * (n - k)
    elif 0 < n <= 21:
        body = d[:n] + "." + d[n:]
    elif -6 < n <= 0:
        body = "0." + "0" * (-n) + d
    else:
        e = n - 1
        body = d[0] + ("." + d[1:] if k > 1 else "") + "e" + ("-" if e < 0 else "+") + str(abs(e))
    return sign + body


def bits(x):
    return struct.unpack("<Q", struct.pack("<d", x))[0]


def from_bits(b):
    return struct.unpack("<d", struct.pack("<Q", b))[0]


def main():
    rng = random.Random(8785)
    values = []
    # Every power of two, and its neighbours (the rounding interval is asymmetric there).
    for p in range(-1074, 1024):
        b = ((p + 1023) << 52) if p >= -1022 else (1 << (p + 1074))
        values += [b, b + 1, b - 1]
    # Random bit patterns (finite), both signs.
    while len(values) < 6294 + 3000:
        b = rng.getrandbits(64)
        if (b >> 52) & 0x7FF != 0x7FF:
            values.append(b)
    # Dyadic fractions with few bits at every magnitude (where exact ties live).
    for _ in range(2000):
        x = rng.randrange(1, 1 << 20) * 2.0 ** rng.randrange(-60, 80)
        values.append(bits(x))
    # Integers, and doubles at x.0, x.25, x.5, x.75 above 2^50.
    for _ in range(1000):
        values.append(bits(float(rng.getrandbits(rng.randrange(1, 64)))))
        values.append(bits(float(1 << 50) + rng.randrange(0, 1 << 20) + 0.25 * rng.randrange(4)))
    for b in values:
        print(f"{b:016x} {ecmascript(from_bits(b))}")


if __name__ == "__main__":
    main()
