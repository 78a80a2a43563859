//! Linear network control: Gramians and minimum control energy (issue 4; not built yet).
