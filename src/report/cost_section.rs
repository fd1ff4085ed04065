//! The report's "Cost and time" section: the numbers of
//! [`crate::state::costs::Costs`] spelled for the page (computed nowhere here).

use crate::state::costs::{hours_text, human_hours, rate_line, Costs, LegCost};
use serde::Serialize;

/// One row of the cost table.
#[derive(Serialize)]
pub(super) struct CostRow {
    leg: String,
    done: String,
    core_h: String,
    gpu_h: String,
    failed_core_h: String,
    failed_gpu_h: String,
    failed_attempts: usize,
    running_core_h: String,
    to_go_core_h: String,
    to_go_limit_core_h: String,
}

/// The section's context.
#[derive(Serialize)]
pub(super) struct CostView {
    as_of: String,
    rows: Vec<CostRow>,
    rate: String,
    busy: String,
    lost_attempts: usize,
}

fn row(l: &LegCost) -> CostRow {
    CostRow {
        leg: l.leg.clone(),
        done: format!("{}/{}", l.done, l.tasks),
        core_h: hours_text(l.used_core_h()),
        gpu_h: hours_text(l.used_gpu_h()),
        failed_core_h: hours_text(l.failed.core_h),
        failed_gpu_h: hours_text(l.failed.gpu_h),
        failed_attempts: l.failed.attempts,
        running_core_h: hours_text(l.running.core_h),
        to_go_core_h: hours_text(l.to_go_core_h),
        to_go_limit_core_h: hours_text(l.to_go_limit_core_h),
    }
}

/// The section, when the results carry costs.
pub(super) fn cost_view(c: Option<&Costs>) -> Option<CostView> {
    let c = c?;
    Some(CostView {
        as_of: c.as_of.clone(),
        rows: c
            .legs
            .iter()
            .chain(std::iter::once(&c.total))
            .map(row)
            .collect(),
        rate: rate_line(c),
        busy: human_hours(c.busy_h),
        lost_attempts: c.total.lost_attempts,
    })
}
