//! Sensor conversion and channel health.
