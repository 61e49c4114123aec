//! The one error type of the crate.
//!
//! Every fallible public function returns [`Result<T>`](crate::Result). Each variant carries the
//! data a user needs to act: what was wrong, where (DOF index, step, time, file line) and, in its
//! message, what to do about it.

use std::path::PathBuf;

/// Convenient alias: `Result<T, stepgauge::Error>`.
pub type Result<T> = std::result::Result<T, Error>;

/// An error raised by a user's [`Model`](crate::model::Model) implementation.
///
/// The library never inspects the message; it wraps it in [`Error::Model`] together with the
/// step and time at which the model failed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum ModelError {
    /// The model does not implement an optional capability that was asked of it.
    #[error(
        "the model does not provide `{0}`; implement it or choose an option that does not need it"
    )]
    NotProvided(&'static str),
    /// The model could not evaluate a quantity (for example an element turned inside out).
    #[error("{message}{}", dof.map(|d| format!(" (DOF {d})")).unwrap_or_default())]
    Failed {
        /// The user's description of the failure.
        message: String,
        /// The DOF concerned, when there is one.
        dof: Option<usize>,
    },
}

impl ModelError {
    /// A failure with a message and no particular DOF.
    pub fn failed(message: impl Into<String>) -> Self {
        ModelError::Failed {
            message: message.into(),
            dof: None,
        }
    }
}

/// Everything that can go wrong in stepgauge.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// Two inputs that must have the same length (or a matrix that must be square) do not.
    #[error(
        "{what}: expected length {expected}, found {found}; pass vectors sized to the model's DOF count"
    )]
    DimensionMismatch {
        /// Which input.
        what: &'static str,
        /// The length required.
        expected: usize,
        /// The length given.
        found: usize,
    },
    /// A DOF index outside `0..n`.
    #[error("{what}: DOF {dof} is out of range for a model with {n} DOFs (valid: 0..{n})")]
    DofOutOfRange {
        /// Where the index came from.
        what: &'static str,
        /// The index given.
        dof: usize,
        /// The model's DOF count.
        n: usize,
    },
    /// An element couples two DOFs whose entry the matrix's pattern does not hold.
    #[error(
        "element {element} couples DOFs {row} and {col}, but the pattern has no entry ({row}, \
         {col}); build the pattern from the same element DOF lists \
         (CsrMatrix::pattern_from_elements)"
    )]
    PatternMissing {
        /// The element (0-based, in the order given).
        element: usize,
        /// The entry's row.
        row: usize,
        /// The entry's column.
        col: usize,
    },
    /// A model's [`Hints`](crate::model::Hints) disagree with its forces
    /// ([`check_hints`](crate::model::check_hints)).
    #[error(
        "the model's hint `{hint}` disagrees with its forces{}: {detail}; correct the hint \
         (Model::hints) or the force routine",
        dof.map_or(String::new(), |d| format!(" at DOF {d}"))
    )]
    HintMismatch {
        /// The hint (`Linearity::Stiffness`, `Linearity::Linear`, `unloaded`).
        hint: &'static str,
        /// The first DOF (0-based) where it fails, when the failure is at one.
        dof: Option<usize>,
        /// What was found.
        detail: String,
    },
    /// The same DOF is constrained twice.
    #[error("DOF {dof} is constrained twice; give each DOF at most one constraint")]
    DuplicateConstraint {
        /// The DOF.
        dof: usize,
    },
    /// A lumped mass that is zero, negative or not finite on a DOF that is free to move.
    #[error(
        "lumped mass at DOF {dof} is {value}, but every free DOF needs a positive finite mass; \
         fix or prescribe massless DOFs, and note that row-sum lumping of higher-order elements can give \
         negative masses (use diagonal-scaling lumping in your element code); a model gives its \
         mass through Model::lumped_mass or Model::mass_matrix, and one that gives neither \
         reads NaN"
    )]
    NonPositiveMass {
        /// The DOF.
        dof: usize,
        /// The offending value.
        value: f64,
    },
    /// A non-finite number (NaN or infinity) in an input.
    #[error("{what} has a non-finite value ({value}) at index {index}; check the input data")]
    NonFiniteInput {
        /// Which input.
        what: &'static str,
        /// Index of the first offending entry.
        index: usize,
        /// The value.
        value: f64,
    },
    /// A time step that is zero, negative or not finite.
    #[error("time step {dt} is not valid: it must be positive and finite")]
    InvalidStep {
        /// The step given.
        dt: f64,
    },
    /// A step above the stability limit of a conditionally stable scheme.
    #[error(
        "time step {dt} is above the step limit {dt_stable} of the explicit scheme (from an upper \
         bound on the model's highest frequency, with its damping: the largest step stepgauge can \
         vouch for, which may lie a little below the estimated critical step); use dt <= \
         {dt_stable} (times a safety fraction), or override the check explicitly \
         (StableLimit::Unchecked or StableLimit::Given) if you know better"
    )]
    StepAboveStableLimit {
        /// The step asked for.
        dt: f64,
        /// The stable limit.
        dt_stable: f64,
    },
    /// A parameter outside its valid range.
    #[error("parameter `{name}` = {value} is not valid: {expected}")]
    InvalidParameter {
        /// The parameter's name.
        name: &'static str,
        /// The value given.
        value: f64,
        /// What is expected instead.
        expected: &'static str,
    },
    /// A table of values against time that cannot be used.
    #[error("time table `{what}` is not valid at row {row}: {problem}")]
    InvalidTable {
        /// Which table.
        what: &'static str,
        /// The first offending row (0-based).
        row: usize,
        /// What is wrong with it.
        problem: &'static str,
    },
    /// A sparse matrix that cannot be used.
    #[error("matrix `{what}` is not valid: {problem}")]
    InvalidMatrix {
        /// Which matrix.
        what: &'static str,
        /// What is wrong.
        problem: String,
    },
    /// The user's model failed to evaluate a quantity.
    #[error("the model failed at step {step}, t = {t}: {source}")]
    Model {
        /// The step being attempted (the number of steps already taken).
        step: u64,
        /// The time at which the model was evaluated.
        t: f64,
        /// What the model reported.
        #[source]
        source: ModelError,
    },
    /// A computed value that is not finite: the run has blown up.
    #[error(
        "non-finite {quantity} at DOF {dof} in step {step} (t = {t}); the step was rejected and the last \
         good state kept. {}",
        non_finite_advice(quantity)
    )]
    NonFiniteState {
        /// Which quantity (displacement, force, acceleration).
        quantity: &'static str,
        /// The first DOF with a non-finite value.
        dof: usize,
        /// The step being attempted.
        step: u64,
        /// The time reached by the rejected step.
        t: f64,
    },
    /// The kinetic energy grew far beyond all energy ever put into the model: numerical instability.
    #[error(
        "instability detected in step {step} (t = {t}): kinetic energy {kinetic} exceeds {limit} times the \
         energy put into the model ({energy_in}); the step was rejected and the last good state kept. \
         Reduce the step below the stable limit; a model that stiffens as it deforms needs the limit \
         re-estimated as it goes (StepControl::Auto with reestimate_every, or \
         CentralDifference::update_stable_step), since an estimate made at the start may no longer \
         hold; if the step is well below the current limit, check that the model's forces take no \
         energy from nowhere (a sign error in a force, a stiffness that is not positive)"
    )]
    Unstable {
        /// The step being attempted.
        step: u64,
        /// The time reached by the rejected step.
        t: f64,
        /// Kinetic energy after the rejected step.
        kinetic: f64,
        /// Energy input so far (initial energy plus absolute work of external and constraint
        /// forces; for the explicit scheme also the work in flight, see
        /// [`EnergyLedger::reference`](crate::energy::EnergyLedger::reference)).
        energy_in: f64,
        /// The growth factor that was exceeded.
        limit: f64,
    },
    /// The energy balance error exceeded the user's threshold.
    #[error(
        "energy balance broken in step {step} (t = {t}): relative error {relative_error} exceeds the \
         threshold {threshold}; the step was rejected and the state of step {} kept. Reduce the step or \
         check the model's forces", step - 1
    )]
    EnergyBalance {
        /// The step at which the balance broke (the rejected step).
        step: u64,
        /// The time reached by the rejected step.
        t: f64,
        /// The balance error relative to the ledger's reference
        /// ([`EnergyLedger::reference`](crate::energy::EnergyLedger::reference)).
        relative_error: f64,
        /// The user threshold.
        threshold: f64,
    },
    /// An iterative eigenvalue estimate did not converge.
    #[error(
        "eigenvalue estimate did not converge after {iterations} operator products (relative residual \
         {residual}); raise the iteration limit, loosen the tolerance or use the Gershgorin bound"
    )]
    EigenNotConverged {
        /// Operator products used.
        iterations: usize,
        /// Relative residual reached.
        residual: f64,
    },
    /// Newton's iterations did not reach the tolerances within the iteration limit, even at the
    /// smallest step the cut-back allows.
    #[error(
        "Newton iterations did not converge at t = {t} with step {dt} after {cutbacks} cut-backs: \
         after {iterations} iterations the {criterion} criterion still failed (relative residuals \
         of the last attempt: {}; the largest residual is at DOF {dof}); the state of t = {t} is \
         kept. {}",
        format_history(history), criterion.advice()
    )]
    NewtonNotConverged {
        /// Time of the last converged state (the state kept).
        t: f64,
        /// The smallest step tried.
        dt: f64,
        /// Iterations of the last attempt.
        iterations: usize,
        /// Relative residual of the last attempt.
        residual: f64,
        /// Step halvings tried.
        cutbacks: u32,
        /// The first criterion that the last iterate did not meet.
        criterion: Criterion,
        /// The relative residuals of the last attempt, one per evaluation (the predictor first;
        /// at most the first 64).
        history: Vec<f64>,
        /// The free DOF (0-based) with the largest residual at the last iterate.
        dof: usize,
    },
    /// Newton's iterations diverged (the residual grew without bound or became non-finite) even at
    /// the smallest step the cut-back allows.
    #[error(
        "Newton iterations diverged at t = {t} with step {dt} after {cutbacks} cut-backs \
         ({iterations} iterations, relative residual {residual}, largest at DOF {dof}; relative \
         residuals of the last attempt: {}); the state of t = {t} is kept. Check the tangent \
         stiffness against the internal force (a finite-difference check), enable the line \
         search, or reduce the step if the model's response changes abruptly within one",
        format_history(history)
    )]
    NewtonDiverged {
        /// Time of the last converged state (the state kept).
        t: f64,
        /// The smallest step tried.
        dt: f64,
        /// Iterations of the last attempt.
        iterations: usize,
        /// Relative residual when divergence was detected.
        residual: f64,
        /// Step halvings tried.
        cutbacks: u32,
        /// The relative residuals of the last attempt (at most the first 64).
        history: Vec<f64>,
        /// The free DOF (0-based) with the largest residual at the last iterate.
        dof: usize,
    },
    /// The operation needs a non-empty model.
    #[error("the model has no DOFs")]
    EmptyModel,
    /// A matrix given to a solver for symmetric positive definite matrices is not positive
    /// definite (numerically): a non-positive pivot or diagonal entry, a pivot lost to rounding, or
    /// a search direction of non-positive curvature.
    #[error(
        "the matrix given to the {solver} solver is not symmetric positive definite{}{}; use the \
         sparse LU solver for indefinite or unsymmetric matrices, or check the constraints (an \
         unrestrained rigid-body mode makes a stiffness singular) and the step (a negative tangent \
         needs a smaller step or a mass/damping term)",
        row.map(|r| format!(" (detected at row {r})")).unwrap_or_default(),
        value.map(|v| format!(" (pivot, diagonal or curvature {v:e})")).unwrap_or_default()
    )]
    NotPositiveDefinite {
        /// The solver's name.
        solver: &'static str,
        /// The row (in the caller's numbering) at which it was detected, when one row is to blame.
        row: Option<usize>,
        /// The offending value (pivot, diagonal entry or curvature `p^T A p`), when known.
        value: Option<f64>,
    },
    /// A matrix given to a solver for symmetric matrices is not symmetric.
    #[error(
        "the matrix given to the {solver} solver is not symmetric: entry ({row}, {col}) = \
         {value:e} but ({col}, {row}) = {transposed:e}; use the sparse LU solver for unsymmetric \
         matrices"
    )]
    NotSymmetric {
        /// The solver's name.
        solver: &'static str,
        /// Row of the first offending entry.
        row: usize,
        /// Column of the first offending entry.
        col: usize,
        /// The value at `(row, col)`.
        value: f64,
        /// The value at `(col, row)`.
        transposed: f64,
    },
    /// A matrix is singular, structurally or numerically, so the solution is not defined or has
    /// no correct digits.
    #[error(
        "the matrix given to the {solver} solver is singular: {evidence}; check that every DOF is \
         restrained (supports, constraints, mass) and that no row or column is empty"
    )]
    SingularMatrix {
        /// The solver's name.
        solver: &'static str,
        /// How the singularity showed itself.
        evidence: Singularity,
    },
    /// An iterative solver did not reach its tolerance within its iteration limit.
    #[error(
        "the iterative solver did not converge in {iterations} iterations (relative residual \
         {relative_residual:e}); raise the iteration limit, loosen the tolerance, or use a direct \
         solver (the matrix may be badly conditioned)"
    )]
    SolverNotConverged {
        /// Iterations done.
        iterations: usize,
        /// Relative residual `||b - A x|| / ||b||` reached.
        relative_residual: f64,
    },
    /// A solver's methods were called out of order.
    #[error(
        "the {solver} solver is not ready: call `{missing}` first (analyze once per pattern, then \
         factor for each new set of values, then solve_in_place; a failed factor must be repeated)"
    )]
    SolverNotReady {
        /// The solver's name.
        solver: &'static str,
        /// The method that must be called (successfully) first.
        missing: &'static str,
    },
    /// The sparse factorisation backend ran out of memory or of index range.
    #[error(
        "the {solver} solver could not factorise the matrix: {reason}; the factor does not fit, so \
         use the conjugate-gradient solver or a smaller model"
    )]
    SolverOutOfResources {
        /// The solver's name.
        solver: &'static str,
        /// What ran out ("out of memory", "index overflow").
        reason: &'static str,
    },
    /// A file could not be opened, read, created, written, synced or renamed.
    #[error(
        "could not {action} `{}`: {source}; check that the path is right, that its directory \
         exists and that you may read or write there",
        path.display()
    )]
    Io {
        /// What was being done ("read", "create a scratch file beside", ...).
        action: &'static str,
        /// The file concerned.
        path: PathBuf,
        /// The operating system's error.
        #[source]
        source: std::io::Error,
    },
    /// A Matrix Market file that does not follow the format (see [`crate::io::matrix_market`]).
    #[error(
        "{file}:{line}: not a valid Matrix Market file: {problem}; fix the file (format: \
         header `%%MatrixMarket matrix coordinate real general|symmetric`, `%` comment lines, \
         a size line `rows cols entries`, then one `row col value` line per entry, 1-based)"
    )]
    MatrixMarket {
        /// The file's name.
        file: String,
        /// The 1-based line at which the problem was found (one past the last line when the file
        /// ended too early).
        line: usize,
        /// What is wrong and what was expected.
        problem: String,
    },
    /// A Matrix Market file of a kind stepgauge does not read: `array` format, `complex`, `pattern`,
    /// `hermitian` or `skew-symmetric` matrices, or an object other than `matrix`.
    #[error(
        "{file}:1: Matrix Market `{qualifier}` files are not supported; stepgauge reads `matrix \
         coordinate` files with `real` or `integer` values and `general` or `symmetric` \
         symmetry: convert the matrix to one of those (for example expand it to a general real \
         coordinate matrix)"
    )]
    MatrixMarketUnsupported {
        /// The file's name.
        file: String,
        /// The header word that is not supported, as written in the file.
        qualifier: String,
    },
    /// A CSV file (load table or initial conditions, see [`crate::io::csv`]) that does not follow
    /// its format.
    #[error("{file}:{line}: {problem}; fix the file")]
    Csv {
        /// The file's name.
        file: String,
        /// The 1-based line at which the problem was found (one past the last line when the file
        /// ended too early).
        line: usize,
        /// What is wrong and what was expected.
        problem: String,
    },
    /// A checkpoint file that is damaged, truncated or not a stepgauge checkpoint at all; nothing
    /// of it was used.
    #[error(
        "checkpoint `{}` is corrupt or incomplete: {reason}; nothing was read from it. Resume \
         from an earlier checkpoint or restart the run",
        path.display()
    )]
    CheckpointCorrupt {
        /// The file.
        path: PathBuf,
        /// What failed (magic, length, checksum, JSON).
        reason: String,
    },
    /// A file whose header does not start with the checkpoint header word: another program's
    /// file, a checkpoint written before the header took its present form, or a damaged header;
    /// nothing of it was used.
    #[error(
        "`{}` does not start with a stepgauge checkpoint header: it starts with `{found}`, \
         expected the header `{expected}`. Checkpoints written before the header took this form \
         and other programs' files are not read, and a damaged header is refused too; nothing was \
         read from it. Restart the run, or resume from a checkpoint this version wrote",
        path.display()
    )]
    CheckpointHeader {
        /// The file.
        path: PathBuf,
        /// The header's first word as found, made printable and cut to 40 characters.
        found: String,
        /// The header this build writes, with placeholders for length and checksum.
        expected: String,
    },
    /// An intact checkpoint written in a format version this build does not read.
    #[error(
        "checkpoint `{}` has format version {found}, but this build of stepgauge reads version \
         {supported}; resume it with the stepgauge version that wrote it",
        path.display()
    )]
    CheckpointVersion {
        /// The file.
        path: PathBuf,
        /// The version found in the file.
        found: u32,
        /// The version this build reads and writes.
        supported: u32,
    },
}

/// How a solver found a matrix singular (see [`Error::SingularMatrix`]).
#[derive(Debug, Clone, Copy, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum Singularity {
    /// The elimination found no candidate pivot: the pattern itself is singular.
    #[error("no pivot is available for row {row} (structurally singular pattern)")]
    NoPivot {
        /// The row (in the caller's numbering) for which no pivot was found.
        row: usize,
    },
    /// The solution has a non-finite entry: a pivot was exactly zero.
    #[error("the solution is not finite at index {index} (a zero pivot)")]
    NonFiniteSolution {
        /// The first non-finite entry of the solution.
        index: usize,
    },
    /// The lower bound `||A|| ||x|| / ||b||` (infinity norms) of the condition number exceeds
    /// the limit above which the solution has no correct digits left.
    #[error(
        "the condition number is at least {lower_bound:e}, above the limit {limit:e} (numerically \
         singular)"
    )]
    IllConditioned {
        /// `||A||_inf ||x||_inf / ||b||_inf`, a lower bound of the condition number.
        lower_bound: f64,
        /// The limit that was exceeded.
        limit: f64,
    },
    /// The computed solution does not satisfy the equations: `||b - A x||_2 / ||b||_2` is above
    /// the limit (a singular system without solution).
    #[error(
        "the relative residual of the solution is {relative_residual:e}, above the limit {limit:e}"
    )]
    Residual {
        /// `||b - A x||_2 / ||b||_2` reached.
        relative_residual: f64,
        /// The limit that was exceeded.
        limit: f64,
    },
}

/// A convergence criterion of the Newton iterations (see
/// [`NewtonOptions`](crate::implicit::NewtonOptions)); named by
/// [`Error::NewtonNotConverged`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub enum Criterion {
    /// `||R|| <= residual_tolerance * F_ref`.
    Residual,
    /// `||du|| <= displacement_tolerance * max(||u_{n+1} - u_n||, ||u_{n+1}||)`.
    Displacement,
    /// `|du . R| <= energy_tolerance * max(|du_1 . R_0|, ||u_{n+1}|| F_ref)`.
    Energy,
}

impl Criterion {
    /// What to do when this criterion is the one that fails.
    pub fn advice(self) -> &'static str {
        match self {
            Criterion::Residual => {
                "A residual that falls slowly points to a tangent stiffness that does not match \
                 the internal force (check it with finite differences); one that stays flat \
                 is at the rounding level of the model's forces: loosen residual_tolerance"
            }
            Criterion::Displacement => {
                "The corrections do not shrink: check the tangent stiffness against the internal \
                 force, enable the line search, or loosen displacement_tolerance"
            }
            Criterion::Energy => {
                "The energy product du . R does not shrink: check the tangent stiffness against \
                 the internal force, or loosen energy_tolerance"
            }
        }
    }
}

impl std::fmt::Display for Criterion {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Criterion::Residual => "residual",
            Criterion::Displacement => "displacement",
            Criterion::Energy => "energy",
        })
    }
}

/// The relative residuals of an attempt for a message: `1.0e0, 3.2e-5, ...`, `none` when empty.
pub(crate) fn format_history(history: &[f64]) -> String {
    if history.is_empty() {
        return "none".into();
    }
    let parts: Vec<String> = history.iter().map(|r| format!("{r:.1e}")).collect();
    parts.join(", ")
}

/// The advice for a non-finite quantity: a force comes from the model, whose routine is then the
/// cause; a displacement, velocity or acceleration that blows up points to the step.
fn non_finite_advice(quantity: &str) -> &'static str {
    let from_model = ["internal force", "damping force", "extra force"];
    if quantity == "external force" {
        "The model's load returned it: check its external force routine (the load data or \
         function) at that DOF and time"
    } else if from_model.contains(&quantity) {
        "The model returned it: check its force routine at that DOF (a material law or an element \
         evaluated outside its range, a division by a zero length)"
    } else {
        "The run blew up: reduce the step below the stable limit, or check the model"
    }
}
