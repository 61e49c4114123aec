//! The reference problems of the command line and the verification suite: the library's set
//! ([`stepgauge::reference::all`]) plus the [`Hardening`] oscillator, whose SciPy reference table
//! (`tests/data/duffing_reference.csv`, written by `tests/data/duffing_reference.py`) is compiled
//! into this crate.

use stepgauge::reference::{self, Hardening, ReferenceProblem};

/// The committed reference table of the hardening oscillator.
pub const HARDENING_TABLE: &str = include_str!("../tests/data/duffing_reference.csv");

/// The hardening oscillator with its committed reference table.
///
/// # Panics
/// Never for the committed table: a unit test parses it, and the table is part of this crate's
/// source.
pub fn hardening() -> Hardening {
    Hardening::from_table("tests/data/duffing_reference.csv", HARDENING_TABLE)
        .expect("the committed reference table parses")
}

/// Every reference problem: the library's standard set, then the hardening oscillator.
pub fn all() -> Vec<Box<dyn ReferenceProblem>> {
    let mut problems = reference::all();
    problems.push(Box::new(hardening()));
    problems
}

/// The problems of [`all`] whose solution is smooth ([`ReferenceProblem::is_smooth`]): the ones
/// on which a scheme shows its full order of accuracy.
pub fn smooth() -> Vec<Box<dyn ReferenceProblem>> {
    all().into_iter().filter(|p| p.is_smooth()).collect()
}

#[cfg(test)]
mod tests {
    /// The committed table parses, and the set holds every library problem and the oscillator
    /// once.
    #[test]
    fn the_set_is_the_library_set_and_the_hardening_oscillator() {
        assert_eq!(super::hardening().rows().len(), 101);
        let names: Vec<&str> = super::all().iter().map(|p| p.name()).collect();
        assert_eq!(names.len(), stepgauge::reference::all().len() + 1);
        assert_eq!(names.last(), Some(&"hardening"));
        assert!(super::smooth().iter().any(|p| p.name() == "hardening"));
    }
}
