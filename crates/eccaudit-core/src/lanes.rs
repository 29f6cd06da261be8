//! Lanes: code written once over several independent `f64` side by side ([`Lanes`], in
//! `real.rs`), and the one run-time choice of the instruction set it is compiled for ([`Isa`],
//! [`dispatch`]).
//!
//! Every hot loop of the crate (the Kepler solver's benchmark, the velocity evaluator of
//! [`crate::model`], the periodogram's grid recurrence) is a [`Kernel`]: a body generic over the
//! lane count, marked `#[inline(always)]`, which [`dispatch`] runs inside a function compiled for
//! the widest instruction set the processor offers. The lanes perform only correctly rounded
//! IEEE operations and no fused multiply–add is ever requested, so every instruction set gives
//! the same bits (checked for every instruction set the processor offers by the tests below
//! and by each kernel's own test).

mod real;

pub(crate) use real::{LaneMask, Lanes, Real};

/// An instruction set the lane kernels are compiled for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Isa {
    /// The target's baseline: SSE2 on x86-64, SIMD128 in WebAssembly (enabled at compile time
    /// in `.cargo/config.toml`), plain code elsewhere.
    Portable,
    /// x86-64 with AVX2: 256-bit registers (four lanes to a register).
    Avx2,
    /// x86-64 with AVX-512F: 512-bit registers (eight lanes to a register).
    Avx512,
}

impl Isa {
    /// Every instruction set, narrowest first.
    pub const ALL: [Isa; 3] = [Isa::Portable, Isa::Avx2, Isa::Avx512];

    /// Whether this processor can run code compiled for `self` (detected at run time; the
    /// detection is cached by the standard library, so this is one load after the first call).
    #[inline]
    pub fn is_available(self) -> bool {
        match self {
            Isa::Portable => true,
            #[cfg(target_arch = "x86_64")]
            Isa::Avx2 => std::is_x86_feature_detected!("avx2"),
            #[cfg(target_arch = "x86_64")]
            Isa::Avx512 => std::is_x86_feature_detected!("avx512f"),
            #[cfg(not(target_arch = "x86_64"))]
            Isa::Avx2 | Isa::Avx512 => false,
        }
    }

    /// The widest instruction set this processor offers: what [`dispatch`] uses.
    #[inline]
    pub fn detected() -> Isa {
        if Isa::Avx512.is_available() {
            Isa::Avx512
        } else if Isa::Avx2.is_available() {
            Isa::Avx2
        } else {
            Isa::Portable
        }
    }

    /// Every instruction set this processor offers, narrowest first (for tests that compare
    /// the bits of every path).
    pub fn available() -> Vec<Isa> {
        Isa::ALL
            .into_iter()
            .filter(|isa| isa.is_available())
            .collect()
    }
}

/// A lane kernel: a body written once and compiled for each [`Isa`] by [`dispatch_on`].
///
/// `run` must be `#[inline(always)]` (and so must what it calls on the hot path) so that it is
/// compiled inside the instruction-set-specific wrapper; it receives the instruction set it runs
/// on and picks its lane count from it.
pub(crate) trait Kernel {
    /// What the kernel returns.
    type Output;
    /// Runs the kernel; `isa` is the instruction set it is compiled for.
    fn run(self, isa: Isa) -> Self::Output;
}

/// Runs `kernel` compiled for the widest instruction set this processor offers
/// ([`Isa::detected`]).
#[inline]
pub(crate) fn dispatch<K: Kernel>(kernel: K) -> K::Output {
    dispatch_on(Isa::detected(), kernel)
}

/// Runs `kernel` compiled for `isa`, or for [`Isa::Portable`] when this processor does not offer
/// `isa` (so the call is always safe). Tests use it to run every path on one machine.
#[inline]
pub(crate) fn dispatch_on<K: Kernel>(isa: Isa, kernel: K) -> K::Output {
    #[cfg(target_arch = "x86_64")]
    {
        if isa == Isa::Avx512 && Isa::Avx512.is_available() {
            // SAFETY: the processor supports AVX-512F, checked just above.
            return unsafe { run_avx512(kernel) };
        }
        if isa == Isa::Avx2 && Isa::Avx2.is_available() {
            // SAFETY: the processor supports AVX2, checked just above.
            return unsafe { run_avx2(kernel) };
        }
    }
    let _ = isa;
    kernel.run(Isa::Portable)
}

/// [`Kernel::run`] compiled for AVX-512F.
///
/// # Safety
/// The processor must support AVX-512F.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx512f")]
unsafe fn run_avx512<K: Kernel>(kernel: K) -> K::Output {
    kernel.run(Isa::Avx512)
}

/// [`Kernel::run`] compiled for AVX2.
///
/// # Safety
/// The processor must support AVX2.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
unsafe fn run_avx2<K: Kernel>(kernel: K) -> K::Output {
    kernel.run(Isa::Avx2)
}

#[cfg(test)]
mod tests {
    use super::*;

    struct Report;

    impl Kernel for Report {
        type Output = Isa;
        #[inline(always)]
        fn run(self, isa: Isa) -> Isa {
            isa
        }
    }

    #[test]
    fn dispatch_runs_the_requested_instruction_set_when_offered() {
        assert_eq!(Isa::available()[0], Isa::Portable);
        assert_eq!(dispatch(Report), Isa::detected());
        for isa in Isa::ALL {
            let ran = dispatch_on(isa, Report);
            if isa.is_available() {
                assert_eq!(ran, isa);
            } else {
                assert_eq!(ran, Isa::Portable);
            }
        }
    }
}
