//! Schedulers behind one trait: local executor, Slurm, PBS, SGE, LSF.
