//! Seeded synthetic load generator (placeholder until written).
