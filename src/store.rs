//! The campaign file: SQLite with numbered migrations, one module per aggregate.
