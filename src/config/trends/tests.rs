//! Tests of the trend, health and model tables.
