//! The model curves a fit compares with the data, evaluated at the data angles: point
//! Coulomb, Legendre series, a theory curve, the optical model (and which of its parameters
//! a fit may free); the exact linear start of a Legendre fit; the optical numerics held
//! fixed during a fit.

use std::collections::BTreeMap;

use super::config::BoundsConfig;
use super::data::CurveTable;
use super::FitFailure;
use crate::physics::coulomb::legendre;
use crate::physics::kinematics::{Channel, Masses};
use crate::physics::least_squares::qr_solve;
use crate::physics::model_fit::{Measured, Parameter, Shape, ShapeError};
use crate::physics::nuclide::Nuclide;
use crate::physics::optical::{self, ElasticChannel, Numerics, OpticalPotential, WoodsSaxon};
use crate::physics::rutherford::Convention;
use crate::physics::PhysicsError;
use crate::problem::Checks;
use crate::theory::{NumericsConfig, PotentialConfig, RadiusConvention, TermConfig, TheoryReaction};
use crate::Problem;

/// One Woods–Saxon term of the optical potential.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Term {
    /// `real`.
    Real,
    /// `imag_volume`.
    ImagVolume,
    /// `imag_surface`.
    ImagSurface,
}

impl Term {
    /// The three terms in file order.
    pub const ALL: [Term; 3] = [Term::Real, Term::ImagVolume, Term::ImagSurface];

    /// Its key in a model file.
    pub fn name(self) -> &'static str {
        match self {
            Term::Real => "real",
            Term::ImagVolume => "imag_volume",
            Term::ImagSurface => "imag_surface",
        }
    }

    fn of(self, potential: &mut PotentialConfig) -> &mut TermConfig {
        match self {
            Term::Real => &mut potential.real,
            Term::ImagVolume => &mut potential.imag_volume,
            Term::ImagSurface => &mut potential.imag_surface,
        }
    }
}

/// An optical-model parameter a fit can free (key `<term>.depth_mev`, `<term>.r0_fm`,
/// `<term>.a_fm` or `coulomb.r0_fm`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum OpticalKey {
    /// A term's depth, MeV.
    Depth(Term),
    /// A term's reduced radius r0, fm.
    Radius(Term),
    /// A term's diffuseness, fm.
    Diffuseness(Term),
    /// The reduced radius of the uniformly charged sphere, fm.
    CoulombRadius,
}

impl OpticalKey {
    /// Every key, terms in file order.
    pub fn all() -> Vec<OpticalKey> {
        Term::ALL
            .iter()
            .flat_map(|t| [OpticalKey::Depth(*t), OpticalKey::Radius(*t), OpticalKey::Diffuseness(*t)])
            .chain([OpticalKey::CoulombRadius])
            .collect()
    }

    /// Its key in a fit file.
    pub fn name(self) -> String {
        match self {
            OpticalKey::Depth(t) => format!("{}.depth_mev", t.name()),
            OpticalKey::Radius(t) => format!("{}.r0_fm", t.name()),
            OpticalKey::Diffuseness(t) => format!("{}.a_fm", t.name()),
            OpticalKey::CoulombRadius => "coulomb.r0_fm".into(),
        }
    }

    /// The key of that name.
    pub fn parse(name: &str) -> Option<OpticalKey> {
        OpticalKey::all().into_iter().find(|k| k.name() == name)
    }

    /// A length (radius or diffuseness), which must stay > 0.
    pub fn is_length(self) -> bool {
        !matches!(self, OpticalKey::Depth(_))
    }

    /// The parameter's place in a potential.
    fn field(self, potential: &mut PotentialConfig) -> &mut f64 {
        match self {
            OpticalKey::Depth(t) => &mut t.of(potential).depth_mev,
            OpticalKey::Radius(t) => &mut t.of(potential).r0_fm,
            OpticalKey::Diffuseness(t) => &mut t.of(potential).a_fm,
            OpticalKey::CoulombRadius => &mut potential.coulomb.r0_fm,
        }
    }

    /// Its value in `potential`.
    pub fn value(self, potential: &PotentialConfig) -> f64 {
        *self.field(&mut potential.clone())
    }
}

/// The point-Coulomb scattering of a fitted reaction's entrance channel, which a curve's
/// `ratio_rutherford` divides by, in the same convention as the reduced cross sections.
#[derive(Debug, Clone, Copy)]
pub(super) struct PointCoulomb {
    pub(super) z1: u32,
    pub(super) z2: u32,
    pub(super) channel: Channel,
}

/// The entrance channel of a charged reaction, for its Rutherford cross section; `None` for
/// a neutral beam or target.
pub(super) fn point_coulomb(reaction: &TheoryReaction) -> Result<Option<PointCoulomb>, Vec<Problem>> {
    let (_, beam, target) = reaction.channel()?;
    if beam.z == 0 || target.z == 0 {
        return Ok(None);
    }
    let (ma, mt) = (beam.nuclear_mass_mev(), target.nuclear_mass_mev());
    let masses = Masses { beam_mev: ma, target_mev: mt, ejectile_mev: ma, recoil_mev: mt };
    let channel = Channel::new(masses, reaction.energy_mev, 0.0)
        .map_err(|e| vec![Problem::new("reaction.energy_mev", reaction.energy_mev, e.to_string())])?;
    Ok(Some(PointCoulomb { z1: beam.z, z2: target.z, channel }))
}

pub(super) enum Model {
    Rutherford(PointCoulomb),
    Legendre { order: usize },
    Curve(CurveTable),
    Optical(Box<OpticalModel>),
}

#[derive(Clone)]
pub(super) struct OpticalModel {
    /// The start potential; the free parameters replace their values.
    potential: PotentialConfig,
    channel: ElasticChannel,
    /// A^(1/3) (or the sum of both) that turns reduced radii into radii.
    a13: f64,
    /// The free parameters, in the order of the fit's parameter vector.
    keys: Vec<OpticalKey>,
    numerics: Numerics,
    /// A_p · A_t, which the volume integral per nucleon pair divides by.
    nucleon_pairs: f64,
}

impl OpticalModel {
    /// The potential at the free parameters `p`.
    ///
    /// # Errors
    /// A radius or diffuseness that is not > 0, named by its key.
    pub(super) fn potential(&self, p: &[f64]) -> Result<OpticalPotential, ShapeError> {
        let mut at = self.potential.clone();
        for (k, v) in self.keys.iter().zip(p) {
            *k.field(&mut at) = *v;
        }
        for key in OpticalKey::all().into_iter().filter(|k| k.is_length()) {
            let value = key.value(&at);
            if value.is_nan() || value <= 0.0 {
                return Err(ShapeError::Parameter { name: key.name(), value, expected: "> 0" });
            }
        }
        let terms = [at.real, at.imag_volume, at.imag_surface];
        let rc = at.coulomb.r0_fm;
        let ws = |t: &TermConfig| WoodsSaxon {
            depth_mev: t.depth_mev,
            radius_fm: t.r0_fm * self.a13,
            diffuseness_fm: t.a_fm,
        };
        Ok(OpticalPotential {
            real: ws(&terms[0]),
            imag_volume: ws(&terms[1]),
            imag_surface: ws(&terms[2]),
            coulomb_radius_fm: rc * self.a13,
            spin_orbit: None,
        })
    }
}

impl Model {
    /// The real volume integral per nucleon pair J_R/(A_p A_t) in MeV fm³ at the parameters
    /// `p`, for an optical model.
    pub(super) fn real_volume_integral_mev_fm3(&self, p: &[f64]) -> Option<f64> {
        match self {
            Model::Optical(om) => om.potential(p).ok().map(|pot| pot.real.volume_integral_mev_fm3() / om.nucleon_pairs),
            _ => None,
        }
    }
}

/// A model at fixed data angles, as a [`Shape`].
pub(super) struct AtAngles<'a> {
    pub(super) model: &'a Model,
    /// The Rutherford convention of the data.
    pub(super) convention: Convention,
    pub(super) theta_rad: Vec<f64>,
    /// Optical numerics override (held fixed during one minimisation).
    pub(super) numerics: Option<Numerics>,
}

impl Shape for AtAngles<'_> {
    fn solved_linear(&self) -> bool {
        // The Legendre start is the exact weighted least-squares solution (legendre_start).
        matches!(self.model, Model::Legendre { .. })
    }
    fn values(&self, p: &[f64], out: &mut [f64]) -> Result<(), ShapeError> {
        match self.model {
            Model::Rutherford(c) => {
                for (o, t) in out.iter_mut().zip(&self.theta_rad) {
                    *o = self.convention.cm_mb_sr(c.z1, c.z2, &c.channel, *t);
                }
            }
            Model::Legendre { order } => {
                for (o, t) in out.iter_mut().zip(&self.theta_rad) {
                    *o = legendre(t.cos(), *order).iter().zip(p).map(|(pl, a)| pl * a).sum();
                }
            }
            Model::Curve(c) => {
                for (o, t) in out.iter_mut().zip(&self.theta_rad) {
                    let theta_deg = t.to_degrees();
                    *o = c.at(theta_deg).ok_or_else(|| PhysicsError::OutsideTable {
                        quantity: "theta_cm_deg".into(),
                        value: theta_deg,
                        min: c.theta_cm_deg[0],
                        max: c.theta_cm_deg[c.theta_cm_deg.len() - 1],
                    })?;
                }
            }
            Model::Optical(om) => {
                let pot = om.potential(p)?;
                let num = self.numerics.unwrap_or(om.numerics);
                let sol = optical::solve(&pot, &om.channel, &num)?;
                for (o, (dsdo, _)) in out.iter_mut().zip(sol.waves.curve(&self.theta_rad)) {
                    *o = dsdo;
                }
            }
        }
        Ok(())
    }
}

pub(super) type OpticalParts = (OpticalModel, Vec<Parameter>, Vec<Vec<f64>>);

pub(super) fn optical_parts(
    reaction: &TheoryReaction,
    potential: &PotentialConfig,
    numerics: &NumericsConfig,
    free: &BTreeMap<String, BoundsConfig>,
    multi_start: &BTreeMap<String, Vec<f64>>,
    c: &mut Checks,
) -> Result<OpticalParts, Vec<Problem>> {
    let (channel, beam, target): (ElasticChannel, &Nuclide, &Nuclide) = reaction.channel()?;
    c.require(
        potential.spin_orbit.is_none(),
        "potential.spin_orbit",
        "a spin-orbit term",
        "an optical model without spin_orbit: fits of spin-½ models are not supported yet (issue 16, item 4)",
    );
    for key in OpticalKey::all().into_iter().filter(|k| k.is_length()) {
        c.positive(&format!("potential.{}", key.name()), key.value(potential));
    }
    let mut keys = Vec::new();
    let mut params = Vec::new();
    for (name, b) in free {
        let Some(k) = OpticalKey::parse(name) else {
            let all: Vec<String> = OpticalKey::all().into_iter().map(OpticalKey::name).collect();
            c.require(false, &format!("free.{name}"), name, &format!("one of {}", all.join(", ")));
            continue;
        };
        let start = k.value(potential);
        // Radii and diffusenesses stay positive even without an explicit lower bound.
        let min = match (b.min, k.is_length()) {
            (Some(m), _) => Some(m),
            (None, true) => Some(1e-3),
            (None, false) => None,
        };
        let (lo, hi) = (min.unwrap_or(f64::NEG_INFINITY), b.max.unwrap_or(f64::INFINITY));
        c.require(lo < hi, &format!("free.{name}"), format!("min {lo}, max {hi}"), "min < max");
        c.require(
            lo <= start && start <= hi,
            &format!("free.{name}"),
            format!("start {start} (from potential) outside [{lo}, {hi}]"),
            "bounds that contain the start value",
        );
        if k.is_length() && b.min.is_some_and(|m| m <= 0.0) {
            c.require(false, &format!("free.{name}.min"), lo, "a lower bound > 0 for a radius or diffuseness");
        }
        keys.push(k);
        params.push(Parameter { name: name.clone(), start, min, max: b.max });
    }
    c.require(!free.is_empty(), "free", "no free parameters", "at least one free parameter");
    let mut starts = Vec::new();
    let lengths: Vec<usize> = multi_start.values().map(Vec::len).collect();
    if let Some(&n) = lengths.first() {
        c.require(
            lengths.iter().all(|l| *l == n) && n > 0,
            "multi_start",
            format!("lists of lengths {lengths:?}"),
            "non-empty lists of one length",
        );
        for (name, vals) in multi_start {
            match params.iter().position(|p| &p.name == name) {
                None => c.require(false, &format!("multi_start.{name}"), name, "a key listed under `free`"),
                Some(j) => {
                    for (i, v) in vals.iter().enumerate() {
                        let p = &params[j];
                        let ok = p.min.is_none_or(|a| *v >= a) && p.max.is_none_or(|b| *v <= b) && v.is_finite();
                        c.require(ok, &format!("multi_start.{name}[{i}]"), v, "a start inside the parameter's bounds");
                    }
                }
            }
        }
        if c.problems.is_empty() {
            for i in 0..n {
                let mut s: Vec<f64> = params.iter().map(|p| p.start).collect();
                for (name, vals) in multi_start {
                    if let Some(j) = params.iter().position(|p| &p.name == name) {
                        s[j] = vals[i];
                    }
                }
                starts.push(s);
            }
        }
    }
    if !c.problems.is_empty() {
        return Err(std::mem::take(&mut c.problems));
    }
    let a13 = match potential.radius {
        RadiusConvention::Target => f64::from(target.a).cbrt(),
        RadiusConvention::Sum => f64::from(beam.a).cbrt() + f64::from(target.a).cbrt(),
    };
    let numerics = numerics.to_numerics();
    let nucleon_pairs = f64::from(beam.a) * f64::from(target.a);
    Ok((OpticalModel { potential: potential.clone(), channel, a13, keys, numerics, nucleon_pairs }, params, starts))
}

/// Weighted linear least squares for the Legendre coefficients: min Σ ((Σ a_l P_l(x_i) −
/// y_i)/σ_i)², by QR of the weighted design matrix (Golub & Van Loan, Alg. 5.3.2).
pub(super) fn legendre_start(theta_deg: &[f64], data: &Measured, order: usize) -> Vec<f64> {
    let (m, n) = (theta_deg.len(), order + 1);
    if m < n {
        return vec![0.0; n];
    }
    let mut a = vec![0.0; m * n];
    let mut b = vec![0.0; m];
    for (i, t) in theta_deg.iter().enumerate() {
        let p = legendre(t.to_radians().cos(), order);
        for j in 0..n {
            a[i * n + j] = p[j] / data.sigma[i];
        }
        b[i] = data.y[i] / data.sigma[i];
    }
    qr_solve(&mut a, m, n, &mut b).unwrap_or_else(|| vec![0.0; n])
}

/// Numerics for an optical fit: the automatic choice at `p`, with a margin so that moving
/// parameters do not need a finer grid (a smooth χ² needs a fixed grid): the matching radius
/// 3 fm further out, 10 more partial waves, the step 0.8 of the automatic one. User overrides
/// stay as given.
pub(super) fn fixed_numerics(om: &OpticalModel, p: &[f64]) -> Result<Numerics, FitFailure> {
    let auto = auto_numerics(om, p)?;
    Ok(Numerics {
        accuracy: auto.accuracy,
        step_fm: Some(om.numerics.step_fm.unwrap_or(0.8 * auto.step_fm.unwrap_or(0.0))),
        matching_radius_fm: Some(
            om.numerics.matching_radius_fm.unwrap_or(auto.matching_radius_fm.unwrap_or(0.0) + 3.0),
        ),
        l_max: Some(om.numerics.l_max.unwrap_or(auto.l_max.unwrap_or(0) + 10)),
    })
}

/// The accuracy an optical fit aims at unless the fit file says otherwise: 1e-5 relative,
/// far below the errors of measured cross sections.
pub const FIT_ACCURACY: f64 = 1e-5;

/// The automatic numerics at `p` (accuracy [`FIT_ACCURACY`] unless set).
pub(super) fn auto_numerics(om: &OpticalModel, p: &[f64]) -> Result<Numerics, FitFailure> {
    let pot = om.potential(p)?;
    let accuracy = Some(om.numerics.accuracy.unwrap_or(FIT_ACCURACY));
    let sol = optical::solve(&pot, &om.channel, &Numerics { accuracy, ..om.numerics }).map_err(ShapeError::from)?;
    Ok(Numerics {
        accuracy,
        step_fm: Some(sol.step_fm),
        matching_radius_fm: Some(sol.matching_radii_fm.0),
        l_max: Some(sol.l_max),
    })
}
