//! The typed error of the `sensors` stage. Every message names the candidate id and the kind
//! name involved, what was found and what was expected, so a user can fix the site or basis.

/// A measurement operator that cannot be built from the site and basis given.
#[derive(Debug, thiserror::Error)]
pub enum SensorError {
    /// The basis does not describe the site's field (different point or channel count).
    #[error(
        "basis does not match the site: {what} is {found}, the site needs {expected} \
         (was the basis computed for another site or grid?)"
    )]
    BasisMismatch {
        what: &'static str,
        found: usize,
        expected: usize,
    },
    /// A point reading falls where the grid has no fluid node to interpolate from.
    #[error(
        "candidate '{candidate}', kind '{kind}': no fluid grid node around ({x}, {y}); \
         every neighbouring node is solid (move the candidate off the obstacle)"
    )]
    NoFluidNeighbour {
        candidate: String,
        kind: String,
        x: f64,
        y: f64,
    },
    /// A candidate position lies outside the domain the field is known on.
    #[error(
        "candidate '{candidate}', kind '{kind}': position ({x}, {y}) lies outside the domain \
         {detail}"
    )]
    OutsideDomain {
        candidate: String,
        kind: String,
        x: f64,
        y: f64,
        detail: String,
    },
    /// A kind whose noise cannot be a variance (zero, negative or not finite).
    #[error(
        "kind '{kind}': noise_sd is {noise_sd}, expected a finite value > 0 (a noiseless \
         sensor would make the information matrix infinite)"
    )]
    BadNoise { kind: String, noise_sd: f64 },
    /// A kind refers to a channel the site does not have, or a beam kind lacks the velocity
    /// components the line of sight needs.
    #[error("kind '{kind}': {message}")]
    BadChannels { kind: String, message: String },
    /// A beam kind with gate or pulse settings that define no range gate.
    #[error("kind '{kind}': {message}")]
    BadBeam { kind: String, message: String },
    /// A candidate refers to a kind index the site does not have.
    #[error(
        "candidate '{candidate}': kind index {kind_idx} out of range (site has {n_kinds} kinds)"
    )]
    BadKindIndex {
        candidate: String,
        kind_idx: usize,
        n_kinds: usize,
    },
}
