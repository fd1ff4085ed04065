//! The demo engine's toy system: two harmonic wells mixed linearly in λ, with exact free energies.
