//! Arbitrary models and readings: whenever validation accepts a model, the kernel's score equals
//! the exact i128 computation for every in-range reading, and out-of-range readings are refused.
#![no_main]

use libfuzzer_sys::fuzz_target;
use shared_model::{ChannelSpec, CheckedModel, Fault, FixedModel};

struct Bytes<'a>(&'a [u8]);

impl Bytes<'_> {
    fn take<const N: usize>(&mut self) -> [u8; N] {
        let mut out = [0u8; N];
        for (o, b) in out.iter_mut().zip(self.0.iter()) {
            *o = *b;
        }
        self.0 = self.0.get(N..).unwrap_or(&[]);
        out
    }
    fn i32(&mut self) -> i32 {
        i32::from_le_bytes(self.take())
    }
    fn i64(&mut self) -> i64 {
        i64::from_le_bytes(self.take())
    }
    fn u8(&mut self) -> u8 {
        self.take::<1>()[0]
    }
}

fuzz_target!(|data: &[u8]| {
    let mut b = Bytes(data);
    let mut m = FixedModel::example_two_channel();
    m.channels.clear();
    let n = usize::from(b.u8() % 33);
    for _ in 0..n {
        let c = ChannelSpec {
            name: heapless::String::new(),
            raw_min: b.i32(),
            raw_max: b.i32(),
            offset: b.i32(),
            multiplier: b.i32(),
            shift: b.u8(),
            weight: b.i32(),
        };
        let _ = m.channels.push(c);
    }
    m.input_bits = if b.u8() % 2 == 0 { 16 } else { 8 };
    m.weight_bits = b.u8();
    m.acc_bits = if b.u8() % 2 == 0 { 64 } else { 32 };
    m.bias = b.i64();
    m.nogo_max = b.i64();
    m.go_min = b.i64();
    let Ok(checked) = CheckedModel::new(m.clone()) else {
        return;
    };
    let raw: Vec<i32> = m.channels.iter().map(|_| b.i32()).collect();
    let exact = m
        .channels
        .iter()
        .zip(&raw)
        .try_fold(i128::from(m.bias), |acc, (c, &r)| {
            if r < c.raw_min || r > c.raw_max {
                return None;
            }
            let p = (i128::from(r) - i128::from(c.offset)) * i128::from(c.multiplier);
            let x = if c.shift == 0 {
                p
            } else {
                (p + (1i128 << (c.shift - 1))) >> c.shift
            };
            Some(acc + i128::from(c.weight) * x)
        });
    match (checked.classify(&raw), exact) {
        (Ok(d), Some(e)) => {
            assert_eq!(i128::from(d.score), e);
            assert!(
                e.unsigned_abs() < 1u128 << (m.acc_bits - 1),
                "score beyond the declared accumulator"
            );
        }
        (Err(Fault::OutOfRange { .. }), None) => {}
        (got, want) => panic!("kernel {got:?} vs reference {want:?}"),
    }
});
