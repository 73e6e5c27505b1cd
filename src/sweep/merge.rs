//! Joining the tables of shards into the table one unsharded run would have written.

use super::tidy::CellOutcome;

/// Orders the outcomes of all shards by cell position. A cell present twice must be identical
/// in both places (a re-run shard); `Err` names the clash or the first missing cell.
pub fn merge_outcomes(mut outcomes: Vec<CellOutcome>) -> Result<Vec<CellOutcome>, String> {
    outcomes.sort_by_key(|o| o.cell_idx);
    let mut merged: Vec<CellOutcome> = Vec::with_capacity(outcomes.len());
    for outcome in outcomes {
        match merged.last() {
            Some(last) if last.cell_idx == outcome.cell_idx => {
                if *last != outcome {
                    return Err(format!(
                        "cell {} ({}) appears twice with different results; were the shards run with different settings?",
                        outcome.cell_idx,
                        outcome.cell.key()
                    ));
                }
            }
            _ => {
                if outcome.cell_idx != merged.len() {
                    return Err(format!(
                        "cell {} is missing (found cell {} next); is a shard's table absent?",
                        merged.len(),
                        outcome.cell_idx
                    ));
                }
                merged.push(outcome);
            }
        }
    }
    Ok(merged)
}
