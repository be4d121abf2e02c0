//! Tests of the watch state.
