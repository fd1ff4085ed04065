//! The campaign file: serde schema, validation with file:line:column, λ schedules.
