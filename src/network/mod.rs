//! The network: weighted least squares per-ligand ΔG, cycle closure, statistics against experiment. Pure numerics.
