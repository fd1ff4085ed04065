//! Campaign in, plan out: no I/O.

use super::*;
use crate::campaign::{Campaign, StagePer};
use sha2::{Digest, Sha256};

/// The engine seed of a task: the first 8 bytes (little-endian) of
/// SHA-256(campaign seed as 8 little-endian bytes ‖ task id).
pub fn task_seed(campaign_seed: u64, task_id: &str) -> u64 {
    let mut h = Sha256::new();
    h.update(campaign_seed.to_le_bytes());
    h.update(task_id.as_bytes());
    let d = h.finalize();
    u64::from_le_bytes(d[..8].try_into().expect("8 bytes"))
}

/// The directory name of window `k` of a leg with `count` windows: `w07`, zero
/// padded to 2 digits, or more when the leg has 100 windows or more.
pub fn window_label(k: usize, count: usize) -> String {
    let width = count.to_string().len().max(2);
    format!("w{k:0width$}")
}

/// The frames a task's output must hold: for the analysed stage, the leg's
/// `window_frames` entry, else its `frames`, else the stage's; for any other
/// stage, the stage's.
fn task_frames(
    campaign: &Campaign,
    leg: &crate::campaign::Leg,
    stage: &crate::campaign::Stage,
    window: Option<usize>,
) -> Option<u64> {
    let analysed = campaign.analysed_stage().map(|s| s.name.as_str()) == Some(stage.name.as_str());
    match window {
        Some(w) if analysed => leg.frames.for_window(w, stage.frames),
        _ => stage.frames,
    }
}

/// Expands a validated campaign into every task and batch.
pub fn expand(campaign: &Campaign) -> Plan {
    let mut plan = Plan {
        campaign: campaign.name.clone(),
        analysed_stage: campaign.analysed_stage().map(|s| s.name.clone()),
        ..Default::default()
    };
    plan.legs = campaign
        .legs
        .iter()
        .map(|l| LegStates {
            name: l.name.clone(),
            components: l.lambdas.components.clone(),
            lambdas: l.lambdas.primaries(),
            states: (0..l.windows())
                .map(|k| l.lambdas.values.iter().map(|v| v[k]).collect())
                .collect(),
        })
        .collect();
    let total: usize = campaign.subjects().len()
        * campaign
            .legs
            .iter()
            .map(|l| {
                l.replicas as usize
                    * campaign
                        .stages
                        .iter()
                        .map(|s| match s.per {
                            StagePer::Leg => 1,
                            StagePer::Window => l.windows(),
                        })
                        .sum::<usize>()
            })
            .sum::<usize>();
    plan.tasks.reserve(total);
    plan.by_id.reserve(total);
    for subject in campaign.subjects() {
        let sid = subject.id();
        for leg in &campaign.legs {
            let count = leg.windows();
            let labels: Vec<String> = (0..count).map(|k| window_label(k, count)).collect();
            for replica in 1..=leg.replicas {
                let base = format!("{sid}/{}/r{replica}", leg.name);
                // stage name → batch index, for this subject × leg × replica
                let mut local: Vec<(&str, BatchIndex, StagePer)> =
                    Vec::with_capacity(campaign.stages.len());
                for stage in &campaign.stages {
                    let bi = plan.batches.len();
                    let mut batch = Batch {
                        id: format!("{base}/{}", stage.name),
                        stage: stage.name.clone(),
                        tasks: Vec::new(),
                        after: Vec::new(),
                        resources: leg.resources.clone(),
                    };
                    let deps: Vec<(BatchIndex, bool)> = stage
                        .after
                        .iter()
                        .filter_map(|a| local.iter().find(|(n, _, _)| n == a))
                        .map(|&(_, b, per)| {
                            (b, stage.per == StagePer::Window && per == StagePer::Window)
                        })
                        .collect();
                    batch.after = deps
                        .iter()
                        .map(|&(b, e)| {
                            if e {
                                BatchDep::Elementwise(b)
                            } else {
                                BatchDep::All(b)
                            }
                        })
                        .collect();
                    let windows: Vec<Option<usize>> = match stage.per {
                        StagePer::Leg => vec![None],
                        StagePer::Window => (0..count).map(Some).collect(),
                    };
                    for (pos, window) in windows.into_iter().enumerate() {
                        let id = match window {
                            Some(k) => format!("{base}/{}/{}", labels[k], stage.name),
                            None => format!("{base}/{}", stage.name),
                        };
                        let mut after = Vec::new();
                        for &(b, elementwise) in &deps {
                            if elementwise {
                                after.push(plan.batches[b].tasks[pos]);
                            } else {
                                after.extend_from_slice(&plan.batches[b].tasks);
                            }
                        }
                        let ti = plan.tasks.len();
                        plan.by_id.insert(id.clone(), ti);
                        plan.tasks.push(Task {
                            seed: task_seed(campaign.seed, &id),
                            dir: PathBuf::from(&id),
                            id,
                            subject: subject.clone(),
                            leg: leg.name.clone(),
                            replica,
                            window,
                            stage: stage.name.clone(),
                            after,
                            resources: leg.resources.clone(),
                            frames: task_frames(campaign, leg, stage, window),
                            batch: bi,
                        });
                        batch.tasks.push(ti);
                    }
                    if plan.analysed_stage.as_deref() == Some(stage.name.as_str()) {
                        plan.windows.push(WindowSet {
                            subject: subject.clone(),
                            leg: leg.name.clone(),
                            replica,
                            tasks: batch.tasks.clone(),
                        });
                    }
                    local.push((stage.name.as_str(), bi, stage.per));
                    plan.batches.push(batch);
                }
            }
        }
    }
    plan
}
