//! From a site to a selection problem: where each candidate sits, the site's exclusion zones
//! and existing sensors as constraints, and the prior from the basis energies. Shared by every
//! command that ranks (`rank`, `sweep`, `plan`, `rescore`).

use crate::io::Site;
use crate::sensors::{Block, PackedBlocks};

use super::constraints::{CandidatePlace, Constraints};
use super::problem::{Prior, Problem};
use super::SelectError;

/// One place per site candidate, indexed like `site.candidates`.
pub fn places_for_site(site: &Site) -> Vec<CandidatePlace> {
    site.candidates
        .iter()
        .map(|c| CandidatePlace {
            id: c.id.clone(),
            position: c.position,
            zone: c.zone.clone(),
        })
        .collect()
}

/// The constraints the site itself imposes: its exclusion zones and its existing sensors
/// (kept first, in file order). Command-line limits are added by the caller.
pub fn site_constraints(site: &Site) -> Constraints {
    Constraints {
        exclusion_zones: site
            .zones
            .iter()
            .map(|z| (z.name.clone(), z.polygon.vertices.clone()))
            .collect(),
        keep: site
            .existing
            .iter()
            .map(|e| (e.candidate_idx, e.kind_idx))
            .collect(),
        ..Constraints::default()
    }
}

/// The prior of the modal coefficients: the first `n_modes` POD energies, or flat.
pub fn prior_from_energies(energies: &[f64], n_modes: usize, flat: bool) -> Prior {
    if flat {
        Prior::Flat
    } else {
        Prior::Energies(energies.iter().take(n_modes).copied().collect())
    }
}

/// The selection problem of a site's candidate blocks.
pub fn problem_for_site(
    site: &Site,
    blocks: &[Block],
    prior: &Prior,
) -> Result<Problem, SelectError> {
    let kind_names = site.kinds.iter().map(|k| k.name.clone()).collect();
    Problem::from_blocks(blocks, prior, places_for_site(site), kind_names)
}

/// [`problem_for_site`] from packed blocks (`sensors::build_packed`): one contiguous row
/// matrix instead of a `Block` per candidate, for large candidate sets.
pub fn problem_for_site_packed(
    site: &Site,
    packed: &PackedBlocks,
    prior: &Prior,
) -> Result<Problem, SelectError> {
    let kind_names = site.kinds.iter().map(|k| k.name.clone()).collect();
    Problem::from_packed(packed, prior, places_for_site(site), kind_names)
}
