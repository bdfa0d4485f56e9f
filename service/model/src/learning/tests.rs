//! Tests of the calibration update: it moves the right way, monotonically, the pooled prior behaves,
//! hostile input gives errors, and an uncalibrated assessment is the assessment without calibration.
