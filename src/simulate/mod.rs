//! Synthetic photos with known truth, for tests and the demo.
