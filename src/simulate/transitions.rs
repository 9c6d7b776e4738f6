//! Well-to-well transitions (placeholder; being written).
