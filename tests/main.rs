//! Integration and reference tests of xsflow: one test binary, one module per topic.
//! Reference checks name their source beside each comparison.

mod bad_input;
mod batch;
mod beamtime;
mod cli;
mod closure;
mod closure_chain;
mod common;
mod config;
mod corpus;
mod dead_time;
mod fitting;
mod kinematics;
mod low_counts;
mod nist;
mod plot;
mod provenance;
mod raw;
mod reference;
mod regression;
mod simulate;
mod stopping;
mod theory;
