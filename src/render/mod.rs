//! Rendering the plan into the tree: tera context, confined, atomic, idempotent writes.
