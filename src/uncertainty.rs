//! Profile uncertainty (placeholder; being written).
