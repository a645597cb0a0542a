//! The ledger: SQLite history of runs per serial number and build (DESIGN §6, §7).
