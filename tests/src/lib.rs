//! Holds no code: the checks live in `tests/tests/`.
