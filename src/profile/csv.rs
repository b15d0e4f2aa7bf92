//! Streaming reader for load-profile CSV files (placeholder until written).
