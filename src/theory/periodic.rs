//! Periodic and tilted landscapes (placeholder; being written).
