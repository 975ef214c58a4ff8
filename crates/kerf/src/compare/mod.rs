//! Comparing plans: reference texts, ranking metrics, and scoring documents under a plan.
pub mod chart;
pub mod engine;
pub mod handout;
pub mod metrics;
pub mod probes;
pub mod refs;
pub mod sweep;
