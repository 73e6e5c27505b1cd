//! `crowsnest merge`: joins the study tables written by `sweep --shard i/N` processes.

use std::path::PathBuf;

use clap::Args;

use crate::io::table::{read_csv_table, write_csv_table};
use crate::io::IoError;
use crate::sweep::{merge_outcomes, CellOutcome, TIDY_HEADER};

/// Join shard tables into the table one unsharded run would have written.
#[derive(Debug, Args)]
pub struct MergeArgs {
    /// Where to write the joined table (CSV).
    pub out: PathBuf,
    /// The `studies.csv` files written by each `sweep --shard i/N` run.
    #[arg(required = true)]
    pub shards: Vec<PathBuf>,
}

pub fn run(args: MergeArgs) -> anyhow::Result<()> {
    let mut outcomes = Vec::new();
    for path in &args.shards {
        let (header, rows) = read_csv_table(path)?;
        if header != TIDY_HEADER {
            return Err(IoError::invalid(
                path,
                "header",
                format!(
                    "found columns {header:?}, expected the study table columns {TIDY_HEADER:?}"
                ),
            )
            .into());
        }
        for (row_idx, row) in rows.iter().enumerate() {
            let outcome = CellOutcome::from_row(row).map_err(|message| {
                IoError::invalid(path, format!("row {}", row_idx + 1), message)
            })?;
            outcomes.push(outcome);
        }
    }
    let n_read = outcomes.len();
    let merged = merge_outcomes(outcomes)
        .map_err(|message| IoError::invalid(&args.shards[0], "shards", message))?;
    let rows: Vec<Vec<String>> = merged.iter().map(CellOutcome::to_row).collect();
    // The io error names the file and carries the OS error once; no second wrapping here.
    write_csv_table(&args.out, &TIDY_HEADER, &rows)?;
    println!(
        "merged {} cells ({} rows read from {} tables) into {}",
        merged.len(),
        n_read,
        args.shards.len(),
        args.out.display()
    );
    Ok(())
}
