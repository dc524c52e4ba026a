//! (in progress) format check.
