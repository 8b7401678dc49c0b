//! xsflow pipeline
