//! The xsflow pipeline: config model, plan, orchestration of the stages over runs,
//! provenance, outputs, and the `xsflow` command line. Physics and stages live in the
//! `stages` crate; this crate reads files and writes results.

pub mod batch;
pub mod beamtime;
pub mod catalogue;
pub mod cli;
pub mod commands;
pub mod config;
pub mod error;
pub mod events;
pub mod fit;
pub mod kinematics;
pub mod layout;
pub mod locate;
pub mod plan;
pub mod plot;
pub mod provenance;
pub mod report;
pub mod run;
pub mod schema;
pub mod simulate;
pub mod stopping;
pub mod tables;
pub mod theory;
