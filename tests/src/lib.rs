//! Empty library: this crate exists for its integration tests in `tests/checks/`.
