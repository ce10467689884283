//! IEEE 488.2 definite- and indefinite-length arbitrary blocks from the VNA link.
