//! Section `sweep` of the report (being written).

use crate::{Section, Settings};

/// Measures and renders the section.
pub fn section(_settings: Settings) -> Section {
    Section {
        title: "sweep".to_string(),
        body: "Not measured yet.\n".to_string(),
        targets: Vec::new(),
    }
}
