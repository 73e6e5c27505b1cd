//! The basis of a loaded site, as every command needs it: computed from the site's snapshots
//! (streamed through `io::open_snapshots`) or read from the precomputed `[basis]` files and
//! truncated to the requested rank. Warnings about an imported basis (orthonormality) go to a
//! callback, so `cli` can print them and library callers can ignore them.

use super::{pod, Basis, BasisError, PodOptions, Rank};
use crate::io::basis_files::{read_basis_files, BasisPaths};
use crate::io::{self, FlowSource, Site};

/// Mean and modes of `site` under `options`; `progress(done, total)` as blocks finish.
pub fn compute_for_site(
    site: &Site,
    options: &PodOptions,
    progress: &mut dyn FnMut(usize, usize),
) -> Result<Basis, BasisError> {
    compute_for_site_with_warnings(site, options, progress, &mut |_| {})
}

/// Like [`compute_for_site`], handing non-fatal findings to `warn`.
///
/// For a precomputed basis the method and block size are irrelevant; `Rank::Count(r)` must not
/// exceed the modes in the file, and an energy fraction that would need more modes than the
/// file holds keeps them all and warns.
pub fn compute_for_site_with_warnings(
    site: &Site,
    options: &PodOptions,
    progress: &mut dyn FnMut(usize, usize),
    warn: &mut dyn FnMut(String),
) -> Result<Basis, BasisError> {
    match &site.flow {
        FlowSource::Snapshots(_) => {
            let mut source = io::open_snapshots(site)?;
            pod(
                source.as_mut(),
                site.domain.weights(),
                site.n_channels(),
                options,
                progress,
            )
        }
        FlowSource::Basis(files) => {
            progress(0, 1);
            let paths = BasisPaths::of_site(files);
            let loaded = read_basis_files(&paths, &site.domain, site.n_channels())?;
            loaded.warnings.into_iter().for_each(&mut *warn);
            let n_in_file = loaded.modes.ncols();
            let n_modes = match options.rank {
                Rank::Count(requested) if requested > n_in_file => {
                    return Err(BasisError::TooManyModesInFile {
                        requested,
                        n_in_file,
                        path: paths.modes,
                    })
                }
                rank => {
                    let wanted = rank.select(&loaded.energies)?;
                    if wanted > n_in_file {
                        warn(format!(
                            "{}: {} modes are needed for the energy fraction asked, the file \
                             holds {n_in_file}; using all {n_in_file}",
                            paths.modes.display(),
                            wanted
                        ));
                    }
                    wanted.min(n_in_file)
                }
            };
            let modes = loaded.modes.subcols(0, n_modes).to_owned();
            progress(1, 1);
            Ok(Basis {
                n_points: site.n_points(),
                n_channels: site.n_channels(),
                mean: loaded.mean,
                modes,
                energies: loaded.energies,
                weights: site.domain.weights().to_vec(),
            })
        }
    }
}
