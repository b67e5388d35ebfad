//! Tables and exports built from model and store values.
