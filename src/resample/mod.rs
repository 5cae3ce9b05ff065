//! Reproducible randomness for resampling engines (METHODS §10).
//!
//! Every resample's random numbers depend only on (seed, engine, term, chunk index)
//! and the fixed chunk size, never on thread count or scheduling, so the same seed
//! gives bit-identical results on 1 or 16 threads.

pub mod stream;
