//! Periodic simulation (placeholder; being written).
