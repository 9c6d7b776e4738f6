//! Pollak–Grabert–Hänggi turnover rate (placeholder; being written).
