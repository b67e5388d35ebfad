//! The invented demo campaign: a seeded generator of its source files.
