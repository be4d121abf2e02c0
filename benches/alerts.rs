//! Alert latency benchmark (placeholder until written).
fn main() {}
