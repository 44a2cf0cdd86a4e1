//! Time courses, events, steady states and scans on diffsol (being built).
