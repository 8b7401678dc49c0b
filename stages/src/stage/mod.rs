//! The per-run stages, in the order a reduction usually runs them: each is one module with
//! its config struct (what the user wrote), the built stage (what runs) and its tests. A
//! run's table passes through them one after another; [`crate::registry`] builds them from
//! the config's `stages:` list.

pub mod apply_efficiency;
pub mod compute_kinematics;
pub mod compute_lab_cross_section;
pub mod compute_solid_angle;
pub mod correct_dead_time;
pub mod normalise;
pub mod subtract_background;
pub mod transform_to_cm;
