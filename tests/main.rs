//! All integration tests, compiled into one binary; one module per feature.

mod common;
