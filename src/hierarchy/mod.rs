//! Ranking regions along a hierarchy map and building brain states (issue 5; not built yet).
