//! The specification's basic operations on 16-bit words (held in `i32`) and 32-bit longs: saturating, rounding
//! and normalising exactly as GSM 06.10 defines them.

#[inline]
pub(super) fn sat16(x: i32) -> i32 {
    x.clamp(-32768, 32767)
}

#[inline]
pub(super) fn add(a: i32, b: i32) -> i32 {
    sat16(a + b)
}

#[inline]
pub(super) fn sub(a: i32, b: i32) -> i32 {
    sat16(a - b)
}

#[inline]
pub(super) fn mult(a: i32, b: i32) -> i32 {
    if a == -32768 && b == -32768 {
        32767
    } else {
        (a * b) >> 15
    }
}

#[inline]
pub(super) fn mult_r(a: i32, b: i32) -> i32 {
    if a == -32768 && b == -32768 {
        32767
    } else {
        (a * b + 16384) >> 15
    }
}

#[inline]
pub(super) fn abs_s(a: i32) -> i32 {
    if a == -32768 {
        32767
    } else {
        a.abs()
    }
}

#[inline]
pub(super) fn l_add(a: i32, b: i32) -> i32 {
    a.saturating_add(b)
}

/// A 16-bit word as C keeps it: the low 16 bits, two's complement.
#[inline]
pub(super) fn word(x: i32) -> i32 {
    x as i16 as i32
}

/// The left shifts that bring a non-zero 32-bit value to the normalised range (bit 30 differs from bit 31).
#[inline]
pub(super) fn norm(x: i32) -> i32 {
    let v = if x < 0 { !x } else { x };
    if v == 0 {
        31
    } else {
        v.leading_zeros() as i32 - 1
    }
}

/// `num / den` as a 15-bit fraction, for `0 ≤ num ≤ den` (restoring division, 15 steps).
#[inline]
pub(super) fn div(num: i32, den: i32) -> i32 {
    if num == 0 || den <= 0 {
        return 0;
    }
    let (mut n, mut q) = (num, 0);
    for _ in 0..15 {
        q <<= 1;
        n <<= 1;
        if n >= den {
            n -= den;
            q += 1;
        }
    }
    q
}

/// Arithmetic shift right by `n` (left for negative `n`), as the specification's `shr`, in 16 bits.
#[inline]
pub(super) fn shr(a: i32, n: i32) -> i32 {
    if n >= 16 {
        -((a < 0) as i32)
    } else if n <= -16 {
        0
    } else if n < 0 {
        word(a << -n)
    } else {
        a >> n
    }
}

/// Arithmetic shift left by `n` (right for negative `n`), as the specification's `shl`, in 16 bits.
#[inline]
pub(super) fn shl(a: i32, n: i32) -> i32 {
    if n >= 16 {
        0
    } else if n <= -16 {
        -((a < 0) as i32)
    } else if n < 0 {
        a >> -n
    } else {
        word(a << n)
    }
}
