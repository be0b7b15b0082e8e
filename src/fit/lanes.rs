//! Sums in eight lanes that every instruction set adds alike.
//!
//! One running sum is limited by the adder's latency: each addition waits for the one
//! before. Eight sums side by side are not. Point `j` of a loop goes into lane `j % 8`,
//! each lane adds its points in order, and the lanes are folded in one fixed order
//! ([`L8::fold`]). The eight lanes sit in one AVX-512 register, two AVX2 registers or
//! eight scalars ([`Wide`]), whichever [`dispatch`] finds on the processor, and no
//! multiply is fused into an add (but in [`L8::det`] and [`exceeds`], where the fused
//! multiply-add is what makes a comparison exact, and every instruction set fuses it), so
//! a kernel gives the same numbers on every processor.
//!
//! Code that is not inlined into the function compiled for the wide registers is compiled
//! without them, and then every vector operation becomes a call: a closure given to
//! `pulp::Arch::dispatch` that only reads what it captures (an `Fn`) is called through a
//! shim that is not inlined, and a closure inside a kernel may not be inlined either.
//! So kernels are [`Kernel`] types, and their helpers `#[inline(always)]` functions.

/// Lanes of a sum.
pub const LANES: usize = 8;

/// Eight lanes of `f64` and the operations on them, in the registers of one instruction
/// set. Every operation is the IEEE 754 one, lane by lane.
pub trait Wide: Copy {
    /// Eight lanes.
    type V: Copy;
    /// Every lane `v`.
    fn splat(self, v: f64) -> Self::V;
    /// The eight values of `a`.
    fn load(self, a: &[f64; LANES]) -> Self::V;
    /// The lanes as numbers.
    fn store(self, v: Self::V) -> [f64; LANES];
    /// `a + b`.
    fn add(self, a: Self::V, b: Self::V) -> Self::V;
    /// `a − b`.
    fn sub(self, a: Self::V, b: Self::V) -> Self::V;
    /// `a · b`.
    fn mul(self, a: Self::V, b: Self::V) -> Self::V;
    /// `a / b`.
    fn div(self, a: Self::V, b: Self::V) -> Self::V;
    /// `a · b + c` rounded once (a fused multiply-add; only for [`exceeds`]).
    fn mul_add(self, a: Self::V, b: Self::V, c: Self::V) -> Self::V;
    /// `t` where `a > b`, else `f` (false where either is NaN).
    fn select_gt(self, a: Self::V, b: Self::V, t: Self::V, f: Self::V) -> Self::V;
    /// `t` where `a ≥ b`, else `f` (false where either is NaN).
    fn select_ge(self, a: Self::V, b: Self::V, t: Self::V, f: Self::V) -> Self::V;
}

/// Eight scalars: the lanes on any processor.
#[derive(Clone, Copy)]
pub struct Plain;

macro_rules! lane_by_lane {
    ($a:expr, $b:expr, $op:tt) => {{
        let (a, b) = ($a, $b);
        [
            a[0] $op b[0], a[1] $op b[1], a[2] $op b[2], a[3] $op b[3],
            a[4] $op b[4], a[5] $op b[5], a[6] $op b[6], a[7] $op b[7],
        ]
    }};
}

impl Wide for Plain {
    type V = [f64; LANES];
    #[inline(always)]
    fn splat(self, v: f64) -> Self::V {
        [v; LANES]
    }
    #[inline(always)]
    fn load(self, a: &[f64; LANES]) -> Self::V {
        *a
    }
    #[inline(always)]
    fn store(self, v: Self::V) -> [f64; LANES] {
        v
    }
    #[inline(always)]
    fn add(self, a: Self::V, b: Self::V) -> Self::V {
        lane_by_lane!(a, b, +)
    }
    #[inline(always)]
    fn sub(self, a: Self::V, b: Self::V) -> Self::V {
        lane_by_lane!(a, b, -)
    }
    #[inline(always)]
    fn mul(self, a: Self::V, b: Self::V) -> Self::V {
        lane_by_lane!(a, b, *)
    }
    #[inline(always)]
    fn div(self, a: Self::V, b: Self::V) -> Self::V {
        lane_by_lane!(a, b, /)
    }
    #[inline(always)]
    fn mul_add(self, a: Self::V, b: Self::V, c: Self::V) -> Self::V {
        std::array::from_fn(|l| a[l].mul_add(b[l], c[l]))
    }
    #[inline(always)]
    fn select_gt(self, a: Self::V, b: Self::V, t: Self::V, f: Self::V) -> Self::V {
        std::array::from_fn(|l| if a[l] > b[l] { t[l] } else { f[l] })
    }
    #[inline(always)]
    fn select_ge(self, a: Self::V, b: Self::V, t: Self::V, f: Self::V) -> Self::V {
        std::array::from_fn(|l| if a[l] >= b[l] { t[l] } else { f[l] })
    }
}

#[cfg(target_arch = "x86_64")]
mod x86 {
    use super::{LANES, Wide};
    use pulp::x86::{V3, V4};
    use pulp::{f64x4, f64x8};

    impl Wide for V4 {
        type V = f64x8;
        #[inline(always)]
        fn splat(self, v: f64) -> f64x8 {
            self.splat_f64x8(v)
        }
        #[inline(always)]
        fn load(self, a: &[f64; LANES]) -> f64x8 {
            pulp::cast(*a)
        }
        #[inline(always)]
        fn store(self, v: f64x8) -> [f64; LANES] {
            pulp::cast(v)
        }
        #[inline(always)]
        fn add(self, a: f64x8, b: f64x8) -> f64x8 {
            self.add_f64x8(a, b)
        }
        #[inline(always)]
        fn sub(self, a: f64x8, b: f64x8) -> f64x8 {
            self.sub_f64x8(a, b)
        }
        #[inline(always)]
        fn mul(self, a: f64x8, b: f64x8) -> f64x8 {
            self.mul_f64x8(a, b)
        }
        #[inline(always)]
        fn div(self, a: f64x8, b: f64x8) -> f64x8 {
            self.div_f64x8(a, b)
        }
        #[inline(always)]
        fn mul_add(self, a: f64x8, b: f64x8, c: f64x8) -> f64x8 {
            self.mul_add_f64x8(a, b, c)
        }
        #[inline(always)]
        fn select_gt(self, a: f64x8, b: f64x8, t: f64x8, f: f64x8) -> f64x8 {
            self.select_f64x8(self.cmp_gt_f64x8(a, b), t, f)
        }
        #[inline(always)]
        fn select_ge(self, a: f64x8, b: f64x8, t: f64x8, f: f64x8) -> f64x8 {
            self.select_f64x8(self.cmp_ge_f64x8(a, b), t, f)
        }
    }

    impl Wide for V3 {
        type V = [f64x4; 2];
        #[inline(always)]
        fn splat(self, v: f64) -> Self::V {
            [self.splat_f64x4(v); 2]
        }
        #[inline(always)]
        fn load(self, a: &[f64; LANES]) -> Self::V {
            pulp::cast(*a)
        }
        #[inline(always)]
        fn store(self, v: Self::V) -> [f64; LANES] {
            pulp::cast(v)
        }
        #[inline(always)]
        fn add(self, a: Self::V, b: Self::V) -> Self::V {
            [self.add_f64x4(a[0], b[0]), self.add_f64x4(a[1], b[1])]
        }
        #[inline(always)]
        fn sub(self, a: Self::V, b: Self::V) -> Self::V {
            [self.sub_f64x4(a[0], b[0]), self.sub_f64x4(a[1], b[1])]
        }
        #[inline(always)]
        fn mul(self, a: Self::V, b: Self::V) -> Self::V {
            [self.mul_f64x4(a[0], b[0]), self.mul_f64x4(a[1], b[1])]
        }
        #[inline(always)]
        fn div(self, a: Self::V, b: Self::V) -> Self::V {
            [self.div_f64x4(a[0], b[0]), self.div_f64x4(a[1], b[1])]
        }
        #[inline(always)]
        fn mul_add(self, a: Self::V, b: Self::V, c: Self::V) -> Self::V {
            [
                self.mul_add_f64x4(a[0], b[0], c[0]),
                self.mul_add_f64x4(a[1], b[1], c[1]),
            ]
        }
        #[inline(always)]
        fn select_gt(self, a: Self::V, b: Self::V, t: Self::V, f: Self::V) -> Self::V {
            [
                self.select_f64x4(self.cmp_gt_f64x4(a[0], b[0]), t[0], f[0]),
                self.select_f64x4(self.cmp_gt_f64x4(a[1], b[1]), t[1], f[1]),
            ]
        }
        #[inline(always)]
        fn select_ge(self, a: Self::V, b: Self::V, t: Self::V, f: Self::V) -> Self::V {
            [
                self.select_f64x4(self.cmp_ge_f64x4(a[0], b[0]), t[0], f[0]),
                self.select_f64x4(self.cmp_ge_f64x4(a[1], b[1]), t[1], f[1]),
            ]
        }
    }
}

/// A loop over lanes, run with the registers of any [`Wide`].
pub trait Kernel {
    /// What it computes.
    type Output;
    /// Runs it with the registers of `w`.
    fn run<W: Wide>(self, w: W) -> Self::Output;
}

/// Runs `k` with the widest registers the processor has (AVX-512, AVX2, or eight
/// scalars): the same numbers either way.
#[inline(always)]
pub fn dispatch<K: Kernel>(k: K) -> K::Output {
    #[cfg(target_arch = "x86_64")]
    {
        if let Some(v4) = pulp::x86::V4::try_new() {
            // A closure that consumes `k` is `FnOnce` only, so it is inlined into the
            // function compiled for the wide registers.
            return v4.vectorize(
                #[inline(always)]
                move || k.run(v4),
            );
        }
        if let Some(v3) = pulp::x86::V3::try_new() {
            return v3.vectorize(
                #[inline(always)]
                move || k.run(v3),
            );
        }
    }
    k.run(Plain)
}

/// Eight lanes in the registers of `W`, with the operations a kernel writes as methods.
#[derive(Clone, Copy)]
pub struct L8<W: Wide>(W::V);

impl<W: Wide> L8<W> {
    /// Every lane `v`.
    #[inline(always)]
    pub fn splat(w: W, v: f64) -> Self {
        L8(w.splat(v))
    }

    /// The eight values of `a`.
    #[inline(always)]
    pub fn load(w: W, a: &[f64; LANES]) -> Self {
        L8(w.load(a))
    }

    /// `v[j0..j0 + 8]`, all inside `v` (a loop's whole blocks: one load, with no
    /// branch to a padded copy that would keep the lanes in memory).
    ///
    /// # Panics
    /// When `v` ends before `j0 + 8`.
    #[inline(always)]
    pub fn at(w: W, v: &[f64], j0: usize) -> Self {
        let block: &[f64; LANES] = v[j0..j0 + LANES].try_into().expect("eight values");
        Self::load(w, block)
    }

    /// `v[j0..j0 + 8]`; past the end of `v`, `pad`.
    #[inline(always)]
    pub fn get(w: W, v: &[f64], j0: usize, pad: f64) -> Self {
        match v.get(j0..j0 + LANES).map(<&[f64; LANES]>::try_from) {
            Some(Ok(block)) => Self::load(w, block),
            _ => {
                let mut block = [pad; LANES];
                let rest = v.get(j0..).unwrap_or(&[]);
                block[..rest.len()].copy_from_slice(rest);
                Self::load(w, &block)
            }
        }
    }

    /// `self + b`.
    #[inline(always)]
    pub fn add(self, w: W, b: Self) -> Self {
        L8(w.add(self.0, b.0))
    }

    /// `self − b`.
    #[inline(always)]
    pub fn sub(self, w: W, b: Self) -> Self {
        L8(w.sub(self.0, b.0))
    }

    /// `self · b`.
    #[inline(always)]
    pub fn mul(self, w: W, b: Self) -> Self {
        L8(w.mul(self.0, b.0))
    }

    /// `self / b`.
    #[inline(always)]
    pub fn div(self, w: W, b: Self) -> Self {
        L8(w.div(self.0, b.0))
    }

    /// The sign of `a·d − b·c` without rounding's errors, lane by lane: Kahan's 2 × 2
    /// determinant with a fused multiply-add, whose relative error is at most two units in
    /// the last place, so its sign is the exact one, and it is zero exactly when the
    /// determinant is (finite values without underflow).
    ///
    /// Reference: C.-P. Jeannerod, N. Louvet, J.-M. Muller, "Further analysis of Kahan's
    /// algorithm for the accurate computation of 2 × 2 determinants", Math. Comp. 82,
    /// 2245–2264 (2013).
    #[inline(always)]
    pub fn det(w: W, a: Self, d: Self, b: Self, c: Self) -> Self {
        let bc = b.mul(w, c);
        let zero = L8::splat(w, 0.0);
        // e = bc − b·c exactly; f = a·d − bc rounded once.
        let e = L8(w.mul_add(zero.sub(w, b).0, c.0, bc.0));
        let f = L8(w.mul_add(a.0, d.0, zero.sub(w, bc).0));
        f.add(w, e)
    }

    /// `t` where `self > b`, else `f` (false where either is NaN).
    #[inline(always)]
    pub fn select_gt(self, w: W, b: Self, t: Self, f: Self) -> Self {
        L8(w.select_gt(self.0, b.0, t.0, f.0))
    }

    /// `t` where `self ≥ b`, else `f` (false where either is NaN).
    #[inline(always)]
    pub fn select_ge(self, w: W, b: Self, t: Self, f: Self) -> Self {
        L8(w.select_ge(self.0, b.0, t.0, f.0))
    }

    /// The lanes as numbers.
    #[inline(always)]
    pub fn lanes(self, w: W) -> [f64; LANES] {
        w.store(self.0)
    }

    /// The sum of the lanes, in a fixed order.
    #[inline(always)]
    pub fn fold(self, w: W) -> f64 {
        let a = self.lanes(w);
        ((a[0] + a[4]) + (a[2] + a[6])) + ((a[1] + a[5]) + (a[3] + a[7]))
    }
}

/// Whether `n1 / d1 > n2 / d2` exactly, for `d1, d2 > 0` ([`L8::det`] on one lane): a
/// comparison of fractions that is transitive, so the first largest of a list is the same
/// however the list is split.
#[inline(always)]
pub fn exceeds(n1: f64, d1: f64, n2: f64, d2: f64) -> bool {
    let bc = n2 * d1;
    let e = (-n2).mul_add(d1, bc);
    let f = n1.mul_add(d2, -bc);
    f + e > 0.0
}

#[cfg(test)]
mod tests {
    use super::*;

    struct Dot<'a>(&'a [f64], &'a [f64]);

    impl Kernel for Dot<'_> {
        type Output = f64;
        #[inline(always)]
        fn run<W: Wide>(self, w: W) -> f64 {
            let mut acc = L8::splat(w, 0.0);
            for j0 in (0..self.0.len()).step_by(LANES) {
                let (a, b) = (L8::get(w, self.0, j0, 0.0), L8::get(w, self.1, j0, 0.0));
                acc = acc.add(w, a.mul(w, b));
            }
            acc.fold(w)
        }
    }

    /// A sum in lanes is the same on every instruction set this processor has: the same
    /// lanes in the same order, folded alike. Source: common practice (IEEE 754 addition
    /// and multiplication are correctly rounded, so the same operations in the same order
    /// give the same bits).
    #[test]
    fn every_instruction_set_gives_the_same_bits() {
        let a: Vec<f64> = (0..1003).map(|i| (i as f64 * 0.731).sin() * 1e3).collect();
        let b: Vec<f64> = (0..1003).map(|i| (i as f64 * 0.117).cos()).collect();
        let mut want = [0.0; LANES];
        for (j, (x, y)) in a.iter().zip(&b).enumerate() {
            want[j % LANES] += x * y;
        }
        let want = ((want[0] + want[4]) + (want[2] + want[6]))
            + ((want[1] + want[5]) + (want[3] + want[7]));
        let (a, b) = (a.as_slice(), b.as_slice());
        assert_eq!(Dot(a, b).run(Plain).to_bits(), want.to_bits());
        assert_eq!(dispatch(Dot(a, b)).to_bits(), want.to_bits());
        #[cfg(target_arch = "x86_64")]
        {
            if let Some(v3) = pulp::x86::V3::try_new() {
                let got = v3.vectorize(move || Dot(a, b).run(v3));
                assert_eq!(got.to_bits(), want.to_bits());
            }
            if let Some(v4) = pulp::x86::V4::try_new() {
                let got = v4.vectorize(move || Dot(a, b).run(v4));
                assert_eq!(got.to_bits(), want.to_bits());
            }
        }
    }

    /// The exact comparison of fractions decides near-ties that the rounded
    /// cross-multiplication gets wrong, and agrees with it elsewhere. Source: common
    /// practice (exact rational comparison of the same binary64 inputs).
    #[test]
    fn fractions_compare_exactly() {
        // 1/3 and 0.333…3/1 as binary64: n1·d2 and n2·d1 round to the same number.
        let (n1, d1) = (1.0, 3.0);
        let n2 = 1.0 / 3.0;
        assert!(exceeds(n1, d1, n2, 1.0));
        assert!(!exceeds(n2, 1.0, n1, d1));
        assert!(!(n1 * 1.0 > n2 * d1), "the rounded comparison sees a tie");
        assert!(!exceeds(2.0, 4.0, 1.0, 2.0) && !exceeds(1.0, 2.0, 2.0, 4.0));
        assert!(exceeds(3.0, 4.0, 1.0, 2.0) && !exceeds(1.0, 2.0, 3.0, 4.0));
    }

    /// The selects of every instruction set agree with the scalar comparisons, NaN
    /// included. Source: common practice (IEEE 754 ordered comparisons are false with NaN).
    #[test]
    fn selects_treat_nan_as_false_everywhere() {
        struct Sel([f64; LANES], [f64; LANES]);
        impl Kernel for Sel {
            type Output = [[f64; LANES]; 2];
            #[inline(always)]
            fn run<W: Wide>(self, w: W) -> Self::Output {
                let (a, b) = (L8::load(w, &self.0), L8::load(w, &self.1));
                let (t, f) = (L8::splat(w, 1.0), L8::splat(w, 0.0));
                [
                    a.select_gt(w, b, t, f).lanes(w),
                    a.select_ge(w, b, t, f).lanes(w),
                ]
            }
        }
        let nan = f64::NAN;
        let a = [1.0, 2.0, nan, 3.0, -0.0, 5.0, nan, f64::INFINITY];
        let b = [1.0, 1.0, 0.0, nan, 0.0, 6.0, nan, 1.0];
        let bits = |v: [[f64; LANES]; 2]| v.map(|l| l.map(f64::to_bits));
        let want = bits(Sel(a, b).run(Plain));
        let (t, f) = (1f64.to_bits(), 0f64.to_bits());
        assert_eq!(want[0], [f, t, f, f, f, f, f, t]);
        assert_eq!(want[1], [t, t, f, f, t, f, f, t]);
        assert_eq!(bits(dispatch(Sel(a, b))), want);
        #[cfg(target_arch = "x86_64")]
        if let Some(v3) = pulp::x86::V3::try_new() {
            assert_eq!(bits(v3.vectorize(move || Sel(a, b).run(v3))), want);
        }
    }
}
