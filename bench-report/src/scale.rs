//! Section `scale` of the report (being written). The implicit half is
//! [`scale_implicit::implicit_scale`](crate::scale_implicit::implicit_scale).

use crate::{Section, Settings};

/// Measures and renders the section.
pub fn section(settings: Settings) -> Section {
    let (body, targets) = crate::scale_implicit::implicit_scale(settings);
    Section {
        title: "scale".to_string(),
        body,
        targets,
    }
}
