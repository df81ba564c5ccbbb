//! Helpers of the perceptron's fast row loops (the mistake scan and the radius pass): a
//! channel count made a compile-time constant, runs of consecutive units, lanes of four.

use wide::i32x4;

/// Runs `$body` with the const `$D` equal to the channel count `$d` (1 to 32), or
/// `$fallback` beyond: a channel count known at compile time lets the compiler unroll and
/// vectorise per-row loops, which run twice as fast as loops over a run-time length.
macro_rules! by_dim {
    ($d:expr, $D:ident => $body:expr, _ => $fallback:expr) => {
        by_dim!(@arms $d, $D, $body, $fallback;
            1 2 3 4 5 6 7 8 9 10 11 12 13 14 15 16 17 18 19 20 21 22 23 24 25 26 27 28 29 30 31 32)
    };
    (@arms $d:expr, $D:ident, $body:expr, $fallback:expr; $($n:literal)*) => {
        match $d {
            $($n => {
                const $D: usize = $n;
                $body
            })*
            _ => $fallback,
        }
    };
}
pub(crate) use by_dim;

/// The first unit of `units` if they are consecutive.
pub(crate) fn consecutive(units: &[usize]) -> Option<usize> {
    let (&a, &z) = (units.first()?, units.last()?);
    (z >= a && z - a + 1 == units.len()).then_some(a)
}

/// Up to four values as one lane of four, padded with zeros.
#[inline(always)]
pub(crate) fn pad4<T: Copy + Default>(x: &[T]) -> [T; 4] {
    let mut v = [T::default(); 4];
    let n = x.len().min(4);
    v[..n].copy_from_slice(&x[..n]);
    v
}

/// Up to four readings as a lane, padded with zeros.
#[inline(always)]
pub(crate) fn lane(x: &[i32]) -> i32x4 {
    i32x4::new(pad4(x))
}
