//! Fitting retention models to readings: bounded Levenberg-Marquardt, statistics, model choice.
//!
//! Pure computation over slices of suction (cm) and water content (m3/m3); no I/O.
