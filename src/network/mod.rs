//! Stoichiometry, rank, conservation laws, reduction and network structure (being built).
