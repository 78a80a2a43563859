//! Intrinsic neural timescales from resting-state series (issue 3; not built yet).
