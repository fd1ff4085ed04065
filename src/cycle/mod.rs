//! From legs to edges: signed legs, corrections, replicas combined. Pure numerics.
