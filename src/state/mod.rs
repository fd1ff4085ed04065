//! Campaign state: the journal, its snapshot and lock, task states, the tracker.
