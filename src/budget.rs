//! Budgets: how large an input may make the work. Each limit, when met,
//! ends the statement with an input error (exit 2) that names the limit and
//! points at the construct, instead of a stack overflow, an exhausted memory
//! or hours of work. The limits are far above what a hand derivation needs;
//! DEVELOPERS.md lists them with the reasons for their values.

use num_rational::BigRational;

use crate::diagnostic::{Error, ErrorKind, Result};

/// How deeply an expression may nest: brackets, calls, derivatives, signs
/// and powers, as written and with named expressions substituted. Every
/// recursive pass (parsing, lowering, normalisation, printing, e-graph
/// conversion) stays within [`CHECKER_STACK`] at this depth: measured at 200
/// levels, the whole pipeline takes about 1.4 MiB of stack in a release
/// build and 8.5 MiB in a debug build, so 1000 levels take about 7 and 43
/// MiB.
pub const MAX_DEPTH: usize = 1000;

/// Stack of the thread a file is checked on ([`on_checker_stack`]): reserved
/// address space, of which only what the recursion touches is used.
pub const CHECKER_STACK: usize = 256 << 20;

/// Digits of one number literal.
pub const MAX_DIGITS: usize = 1000;

/// Size in bits of an exact rational (numerator and denominator together)
/// that arithmetic may build; a larger power is not folded.
pub const MAX_BITS: u64 = 1 << 16;

/// Nodes of one lowered expression, with its named expressions substituted.
pub const MAX_NODES: usize = 100_000;

/// Monomials (and expansion steps) that one normalisation may produce; the
/// largest shipped case, the Neumann C_D derivation, takes about 99,000.
/// A monomial takes up to 2 KiB, so this also bounds memory.
pub const MAX_TERMS: usize = 500_000;

/// Bytes of one input file (`.ward` or `.rules`).
pub const MAX_FILE_BYTES: u64 = 16 << 20;

/// The start of the message of [`too_many_terms`].
const TOO_MANY_TERMS: &str = "expression too large: ";

/// The error for an expression whose expansion passes [`MAX_TERMS`].
pub fn too_many_terms(n: usize) -> Error {
    Error::new(
        ErrorKind::Limit,
        format!("{TOO_MANY_TERMS}{n} terms (limit {MAX_TERMS})"),
    )
    .with_note("its expansion grows past what can be checked; split it into smaller statements")
}

/// True when `e` is [`too_many_terms`]: a claim whose normalisation
/// meets it is unknown (`Stop::TermLimit`), not an input error.
pub fn is_too_many_terms(e: &Error) -> bool {
    e.kind == ErrorKind::Limit
        && e.message.starts_with(TOO_MANY_TERMS)
        && e.message.ends_with(&format!(" terms (limit {MAX_TERMS})"))
}

/// The start of the message of [`contraction_unfinished`].
const CONTRACTION_UNFINISHED: &str = "index contraction did not finish in ";

/// The error for an index contraction that met its step bound
/// (`CONTRACTION_STEPS` in the index algebra): a claim that meets it is
/// unknown (`Stop::ContractionLimit`), not an input error.
pub fn contraction_unfinished(steps: usize) -> Error {
    Error::new(
        ErrorKind::Limit,
        format!("{CONTRACTION_UNFINISHED}{steps} steps"),
    )
    .with_note("a monomial's indices kept being rewritten without the work getting smaller; this is a defect in the index algebra, please report the file")
}

/// True when `e` is [`contraction_unfinished`].
pub fn is_contraction_unfinished(e: &Error) -> bool {
    e.kind == ErrorKind::Limit && e.message.starts_with(CONTRACTION_UNFINISHED)
}

thread_local! {
    /// (nested normalisations running on this thread, monomials they have
    /// produced since the outermost one began).
    static WORK: std::cell::Cell<(usize, usize)> = const { std::cell::Cell::new((0, 0)) };
}

/// The span of one normalisation, for [`spend`]: the outermost one on a
/// thread starts the count from zero; nested ones share it.
pub struct Work(());

impl Work {
    pub fn enter() -> Work {
        WORK.with(|w| {
            let (depth, spent) = w.get();
            w.set((depth + 1, if depth == 0 { 0 } else { spent }));
        });
        Work(())
    }
}

impl Drop for Work {
    fn drop(&mut self) {
        WORK.with(|w| {
            let (depth, spent) = w.get();
            w.set((depth.saturating_sub(1), spent));
        });
    }
}

/// Counts `n` monomials produced (or about to be) by the normalisation
/// running on this thread; past [`MAX_TERMS`] the normalisation ends with
/// [`too_many_terms`]. Outside a [`Work`] span nothing is counted.
pub fn spend(n: usize) -> Result<()> {
    WORK.with(|w| {
        let (depth, spent) = w.get();
        if depth == 0 {
            return Ok(());
        }
        let spent = spent.saturating_add(n);
        w.set((depth, spent));
        if spent > MAX_TERMS {
            Err(too_many_terms(spent))
        } else {
            Ok(())
        }
    })
}

/// `Ok` when every coefficient of `monos` fits in [`MAX_BITS`]; otherwise
/// "number too large".
pub fn coefficients(monos: &[crate::normal::Mono]) -> Result<()> {
    match monos.iter().map(|m| bits(&m.coef)).max() {
        Some(b) if b > MAX_BITS => Err(Error::new(
            ErrorKind::Limit,
            format!("number too large: a coefficient of {b} bits (limit {MAX_BITS})"),
        )),
        _ => Ok(()),
    }
}

/// Size in bits of an exact rational.
pub fn bits(q: &BigRational) -> u64 {
    q.numer().bits() + q.denom().bits()
}

/// True when `base^n` stays within [`MAX_BITS`].
pub fn power_fits(base: &BigRational, n: u64) -> bool {
    bits(base).saturating_mul(n) <= MAX_BITS
}

/// Runs `f` on a thread with a [`CHECKER_STACK`] stack, so that the depth a
/// file may reach does not depend on the caller's stack (8 MiB for a main
/// thread, 2 MiB for a test thread). A panic in `f` is passed on. When no
/// thread can be started, `f` runs on the caller's thread.
pub fn on_checker_stack<T: Send>(f: impl FnOnce() -> T + Send) -> T {
    let mut f = Some(f);
    let outcome = std::thread::scope(|scope| {
        let spawned = std::thread::Builder::new()
            .name("wardsmith-check".into())
            .stack_size(CHECKER_STACK)
            .spawn_scoped(scope, || f.take().map(|f| f()));
        spawned.map(|handle| handle.join())
    });
    match outcome {
        Ok(Ok(Some(value))) => value,
        Ok(Err(panic)) => std::panic::resume_unwind(panic),
        // The thread did not start (or never ran `f`): run here.
        Ok(Ok(None)) | Err(_) => match f.take() {
            Some(f) => f(),
            None => unreachable!("`f` ran on the checker thread"),
        },
    }
}

/// Steps of rule matching that one e-graph run may take (and, apart, the
/// search for unapplied redexes after it): every binding the matcher tries
/// is a step. A user rule with many insertion patterns on a long correlator
/// has a number of matches that grows like a falling factorial (six
/// patterns on forty insertions: 2.8·10⁹); the run stops at this limit with
/// "unknown", whatever the e-node limit. Measured: the largest shipped
/// case takes 1,426 steps in one run, the divergence identity with 128
/// insertions 21,641; a million steps take about a second.
pub const MAX_MATCH_STEPS: usize = 1_000_000;

thread_local! {
    /// (limit, steps taken) of the rule matching running on this thread.
    static MATCHING: std::cell::Cell<(usize, usize)> =
        const { std::cell::Cell::new((usize::MAX, 0)) };
}

/// The span of one budgeted rule search on this thread ([`match_step`]):
/// it starts the count from zero with its own limit, and restores the
/// enclosing span's count when dropped.
pub struct Matching {
    outer: (usize, usize),
}

impl Matching {
    pub fn enter(limit: usize) -> Matching {
        let outer = MATCHING.with(|m| m.replace((limit, 0)));
        Matching { outer }
    }

    /// Steps taken so far in this span.
    pub fn spent(&self) -> usize {
        MATCHING.with(|m| m.get().1)
    }

    /// True when the span's limit was reached.
    pub fn exhausted(&self) -> bool {
        matching_exhausted()
    }
}

impl Drop for Matching {
    fn drop(&mut self) {
        MATCHING.with(|m| m.set(self.outer));
    }
}

/// Takes one step of rule matching; false once the running [`Matching`]
/// span has reached its limit (then every later step is refused as well).
/// Outside a span nothing is limited.
pub fn match_step() -> bool {
    MATCHING.with(|m| {
        let (limit, spent) = m.get();
        if spent >= limit {
            // Past the limit: remembered, so that `matching_exhausted`
            // tells a search that ran out from one that took exactly
            // `limit` steps.
            m.set((limit, limit.saturating_add(1)));
            return false;
        }
        m.set((limit, spent + 1));
        true
    })
}

/// True when the running [`Matching`] span has reached its limit.
pub fn matching_exhausted() -> bool {
    MATCHING.with(|m| {
        let (limit, spent) = m.get();
        spent > limit
    })
}

/// Work a model's Wick expansion may do for one correlator: every pair of
/// fields it tries (kept or pruned) counts one, and every product it keeps
/// counts the nodes of its terms. Each pairing is one product in the sum
/// the normaliser then expands, so this bounds both the time of the
/// enumeration and the memory of the sum (a node takes about 100 bytes).
/// Measured: ⟨D D D⟩ of the free scalar with a Neumann wall takes 24,628,
/// ⟨T T⟩ in d = 3 3,854; twelve insertions of one generalised free field
/// 534,413 (whose sum then passes [`MAX_TERMS`] in the normaliser); sixteen
/// would take about 10⁸.
pub const MAX_WICK: usize = 1_000_000;

/// The error for a Wick expansion that reaches [`MAX_WICK`].
pub fn too_many_pairings() -> Error {
    Error::new(
        ErrorKind::Limit,
        format!("Wick contraction limit reached (limit {MAX_WICK}: pairs tried and terms built)"),
    )
    .with_note(
        "the correlator has too many ways to pair its fields to sum them all; \
         use fewer insertions in one correlator",
    )
}

/// Counts the work of one Wick expansion against [`MAX_WICK`].
#[derive(Debug, Default)]
pub struct Pairings {
    spent: usize,
}

impl Pairings {
    /// One pair of fields tried; past [`MAX_WICK`], the limit error.
    pub fn place(&mut self) -> Result<()> {
        self.spend(1)
    }

    /// A product of `nodes` nodes kept; past [`MAX_WICK`], the limit error.
    pub fn build(&mut self, nodes: usize) -> Result<()> {
        self.spend(nodes)
    }

    fn spend(&mut self, n: usize) -> Result<()> {
        self.spent = self.spent.saturating_add(n);
        if self.spent > MAX_WICK {
            Err(too_many_pairings())
        } else {
            Ok(())
        }
    }

    /// Work counted so far.
    pub fn spent(&self) -> usize {
        self.spent
    }
}
