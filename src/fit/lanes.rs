//! Sums in eight lanes that every instruction set adds alike.
//!
//! One running sum is limited by the adder's latency: each addition waits for the one
//! before. Eight sums side by side are not. Point `j` of a loop goes into lane `j % 8`,
//! each lane adds its points in order, and the lanes are folded in one fixed order
//! ([`L8::fold`]). The lanes sit in one AVX-512 register, two AVX2 registers or eight
//! scalars, whichever `pulp::Arch::dispatch` picks, and no multiply is fused into an
//! add, so a sum is the same number on every processor.
//!
//! Code that is not inlined into the function `pulp` compiles for the wide registers is
//! compiled without them, and then every vector operation becomes a call: a closure given
//! to `pulp::Arch::dispatch` that only reads what it captures (an `Fn`) is called through
//! a shim that is not inlined, and a closure inside a kernel may not be inlined either.
//! So the kernels here are `pulp::WithSimd` types, and their helpers
//! `#[inline(always)]` functions, not closures.

use pulp::Simd;

/// Lanes of a sum.
pub const LANES: usize = 8;

/// Eight lanes of `f64` in the registers of `S` (the first `8 / S::F64_LANES` used).
#[derive(Clone, Copy)]
pub struct L8<S: Simd>([S::f64s; LANES]);

// Index loops over the registers: a count fixed per instruction set, fully unrolled (an
// iterator adaptor is one more thing that must be inlined; see the module's notes).
#[allow(clippy::needless_range_loop)]
impl<S: Simd> L8<S> {
    /// Registers that hold the eight lanes.
    const REGS: usize = LANES / S::F64_LANES;

    /// Every lane `v`.
    #[inline(always)]
    pub fn splat(s: S, v: f64) -> Self {
        L8([s.splat_f64s(v); LANES])
    }

    /// The eight values of `a`.
    #[inline(always)]
    pub fn load(s: S, a: &[f64; LANES]) -> Self {
        let (regs, _) = S::as_simd_f64s(a);
        let mut out = [s.splat_f64s(0.0); LANES];
        out[..Self::REGS].copy_from_slice(&regs[..Self::REGS]);
        L8(out)
    }

    /// `v[j0..j0 + 8]`; past the end of `v`, `pad`.
    #[inline(always)]
    pub fn get(s: S, v: &[f64], j0: usize, pad: f64) -> Self {
        match v.get(j0..j0 + LANES).map(<&[f64; LANES]>::try_from) {
            Some(Ok(block)) => Self::load(s, block),
            _ => {
                let mut block = [pad; LANES];
                let rest = v.get(j0..).unwrap_or(&[]);
                block[..rest.len()].copy_from_slice(rest);
                Self::load(s, &block)
            }
        }
    }

    /// `self + b`, lane by lane.
    #[inline(always)]
    pub fn add(self, s: S, b: Self) -> Self {
        let mut out = self.0;
        for r in 0..Self::REGS {
            out[r] = s.add_f64s(self.0[r], b.0[r]);
        }
        L8(out)
    }

    /// `self − b`, lane by lane.
    #[inline(always)]
    pub fn sub(self, s: S, b: Self) -> Self {
        let mut out = self.0;
        for r in 0..Self::REGS {
            out[r] = s.sub_f64s(self.0[r], b.0[r]);
        }
        L8(out)
    }

    /// `self · b`, lane by lane.
    #[inline(always)]
    pub fn mul(self, s: S, b: Self) -> Self {
        let mut out = self.0;
        for r in 0..Self::REGS {
            out[r] = s.mul_f64s(self.0[r], b.0[r]);
        }
        L8(out)
    }

    /// `self / b`, lane by lane.
    #[inline(always)]
    pub fn div(self, s: S, b: Self) -> Self {
        let mut out = self.0;
        for r in 0..Self::REGS {
            out[r] = s.div_f64s(self.0[r], b.0[r]);
        }
        L8(out)
    }

    /// Lane by lane: `if_true` where `self ≥ b`, else `if_false` (false where either is
    /// NaN).
    #[inline(always)]
    pub fn select_ge(self, s: S, b: Self, if_true: Self, if_false: Self) -> Self {
        let mut out = self.0;
        for r in 0..Self::REGS {
            let m = s.greater_than_or_equal_f64s(self.0[r], b.0[r]);
            out[r] = s.select_f64s(m, if_true.0[r], if_false.0[r]);
        }
        L8(out)
    }

    /// Lane by lane: `if_true` where `self > b`, else `if_false` (false where either is
    /// NaN).
    #[inline(always)]
    pub fn select_gt(self, s: S, b: Self, if_true: Self, if_false: Self) -> Self {
        let mut out = self.0;
        for r in 0..Self::REGS {
            let m = s.greater_than_f64s(self.0[r], b.0[r]);
            out[r] = s.select_f64s(m, if_true.0[r], if_false.0[r]);
        }
        L8(out)
    }

    /// The lanes as numbers.
    #[inline(always)]
    pub fn lanes(self) -> [f64; LANES] {
        let mut out = [0.0; LANES];
        let (regs, _) = S::as_mut_simd_f64s(&mut out);
        regs[..Self::REGS].copy_from_slice(&self.0[..Self::REGS]);
        out
    }

    /// The sum of the lanes, in a fixed order.
    #[inline(always)]
    pub fn fold(self) -> f64 {
        let a = self.lanes();
        ((a[0] + a[4]) + (a[2] + a[6])) + ((a[1] + a[5]) + (a[3] + a[7]))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use pulp::WithSimd;

    /// A sum in lanes, the same on every instruction set this processor has: the same
    /// lanes in the same order, folded alike. Source: common practice (IEEE 754 addition
    /// and multiplication are correctly rounded, so the same operations in the same order
    /// give the same bits).
    #[test]
    fn every_instruction_set_gives_the_same_bits() {
        struct Dot<'a>(&'a [f64], &'a [f64]);
        impl WithSimd for Dot<'_> {
            type Output = f64;
            #[inline(always)]
            fn with_simd<S: Simd>(self, s: S) -> f64 {
                let mut acc = L8::splat(s, 0.0);
                for j0 in (0..self.0.len()).step_by(LANES) {
                    let (a, b) = (L8::get(s, self.0, j0, 0.0), L8::get(s, self.1, j0, 0.0));
                    acc = acc.add(s, a.mul(s, b));
                }
                acc.fold()
            }
        }
        let a: Vec<f64> = (0..1003).map(|i| (i as f64 * 0.731).sin() * 1e3).collect();
        let b: Vec<f64> = (0..1003).map(|i| (i as f64 * 0.117).cos()).collect();
        let mut want = [0.0; LANES];
        for (j, (x, y)) in a.iter().zip(&b).enumerate() {
            want[j % LANES] += x * y;
        }
        let want = ((want[0] + want[4]) + (want[2] + want[6]))
            + ((want[1] + want[5]) + (want[3] + want[7]));
        assert_eq!(
            Dot(&a, &b).with_simd(pulp::Scalar::new()).to_bits(),
            want.to_bits()
        );
        assert_eq!(
            pulp::Arch::new().dispatch(Dot(&a, &b)).to_bits(),
            want.to_bits()
        );
        #[cfg(target_arch = "x86_64")]
        if let Some(v3) = pulp::x86::V3::try_new() {
            assert_eq!(
                v3.vectorize(|| Dot(&a, &b).with_simd(v3)).to_bits(),
                want.to_bits()
            );
        }
    }
}
