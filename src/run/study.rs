//! The protocol study: held-out calibration data against cross-fitting, at an
//! equal labelled budget.
//!
//! For each open-data task, a fixed test set of `test_rows` rows is drawn once
//! per dataset. Each unit (task × budget N × repeat) draws N labelled rows from
//! the other rows with the unit's seed and builds every variant
//! (`models::protocol::protocol_study_unit`): held-out with calibration
//! fraction f (the model trains on (1 − f)·N rows, calibration data are its
//! scores on the other f·N) and cross-fitted with K folds (out-of-fold scores
//! on all N rows are the calibration data; the model refitted on all N scores
//! the test set). Every calibration method is then fitted on each variant's
//! calibration data and scored on the common test set, so variants are paired
//! within a unit. Rows of `units.csv` are `task = <task>@<method>`,
//! `method = <variant>`, `size = N`; the reference is the cross-fitted variant.

use std::collections::{BTreeMap, BTreeSet};

use super::{
    add_row_summaries, assemble, fit_score, one_class_outcome, stop_message, MethodOutcome,
    RunError, RunOptions, RunOutput, UnitOutcome, UnitStatus,
};
use crate::calibrate::Calibrator;
use crate::data::{open, Dataset, Side};
use crate::models::protocol::{protocol_study_unit, study_test_rows, StudySettings};
use crate::split;
use crate::suite::{Plan, StudyPlan, TaskSource};

/// Run every unit of a protocol study not already in `done`.
pub fn run_study(
    plan: &Plan,
    study: &StudyPlan,
    opts: &RunOptions,
    done: Vec<UnitOutcome>,
    on_done: &(dyn Fn(&UnitOutcome) -> Result<(), String> + Sync),
) -> Result<RunOutput, RunError> {
    let mut datasets: BTreeMap<String, (Dataset, Vec<usize>)> = BTreeMap::new();
    for t in &plan.tasks {
        let TaskSource::Open { data_dir, data, .. } = &t.source else {
            return Err(RunError::Journal(format!(
                "task `{}`: a protocol study needs open-data tasks",
                t.id
            )));
        };
        if !datasets.contains_key(data) {
            let d = open::load_task(data_dir, data)
                .map_err(|e| RunError::Journal(format!("task `{}`: {e}", t.id)))?;
            let (_, test) = study_test_rows(
                &d,
                study.test_rows,
                super::pools::model_seed(plan.seed, data),
            )
            .map_err(|e| RunError::Journal(format!("task `{}`: {e}", t.id)))?;
            datasets.insert(data.clone(), (d, test));
        }
    }
    let calibrators: Vec<Box<dyn Calibrator>> = plan
        .methods
        .iter()
        .map(|m| {
            m.spec
                .build(crate::calibrate::ScoreKind::Probability)
                .map_err(|e| RunError::Build {
                    task: "(study)".into(),
                    method: m.id.clone(),
                    message: e.to_string(),
                })
        })
        .collect::<Result<_, _>>()?;
    let settings = StudySettings {
        fractions: study.fractions.clone(),
        folds: study.folds,
    };
    let keys = super::unit_keys(plan);
    let done_keys: BTreeSet<(String, usize, usize)> = done
        .iter()
        .map(|u| (u.task.clone(), u.size, u.repeat))
        .collect();
    let todo: Vec<_> = keys
        .iter()
        .copied()
        .filter(|&(ti, s, r)| {
            plan.methods
                .iter()
                .any(|m| !done_keys.contains(&(format!("{}@{}", plan.tasks[ti].id, m.id), s, r)))
        })
        .collect();
    let resumed_units = keys.len() - todo.len();
    let reference = study.reference();
    let work = |(ti, budget, r): (usize, usize, usize)| -> Result<Vec<UnitOutcome>, String> {
        let t = &plan.tasks[ti];
        let TaskSource::Open { data, model, .. } = &t.source else {
            return Ok(Vec::new());
        };
        let (ds, test_rows) = &datasets[data];
        let seed = split::unit_seed(plan.seed, &t.id, budget, r);
        let test_y: Vec<bool> = test_rows.iter().map(|&i| ds.labels[i]).collect();
        let variants = protocol_study_unit(ds, model, test_rows, budget, &settings, seed);
        let mut outs = Vec::new();
        for (mi, m) in plan.methods.iter().enumerate() {
            let mut methods: Vec<MethodOutcome> = Vec::new();
            let mut preds = Vec::new();
            let mut positives = 0;
            match &variants {
                Ok(vs) => {
                    for (name, p) in vs {
                        let sides = p.sides.as_deref().unwrap_or(&[]);
                        let (mut cs, mut cy, mut ts) = (Vec::new(), Vec::new(), Vec::new());
                        for (k, &side) in sides.iter().enumerate() {
                            if side == Side::Reservoir {
                                cs.push(p.scores[k]);
                                cy.push(p.labels[k]);
                            } else {
                                ts.push(p.scores[k]);
                            }
                        }
                        if *name == reference {
                            positives = cy.iter().filter(|&&y| y).count();
                        }
                        let (o, pr) =
                            fit_score(plan, calibrators[mi].as_ref(), name, &cs, &cy, &ts, &test_y)
                                .map_err(|e| {
                                    stop_message(&format!("{}@{}", t.id, m.id), budget, r, name, &e)
                                })?;
                        methods.push(o);
                        preds.push(pr);
                    }
                    let ri = vs.iter().position(|(n, _)| *n == reference);
                    add_row_summaries(plan, &test_y, &preds, &mut methods, ri);
                }
                Err(e) => {
                    let mut names: Vec<String> = settings
                        .fractions
                        .iter()
                        .map(|f| format!("held-out-{f}"))
                        .collect();
                    names.push(reference.clone());
                    for n in names {
                        let mut o = one_class_outcome(plan, &n);
                        o.status = UnitStatus::Failed;
                        o.error = Some(format!("base model: {e}"));
                        methods.push(o);
                    }
                }
            }
            outs.push(UnitOutcome {
                curves: Vec::new(),
                task: format!("{}@{}", t.id, m.id),
                size: budget,
                repeat: r,
                positives,
                reservoir: t.reservoir_rows,
                test_rows: test_rows.len(),
                methods,
            });
        }
        outs.retain(|u| !done_keys.contains(&(u.task.clone(), u.size, u.repeat)));
        Ok(outs)
    };
    let (finished, threads) = super::execute(
        &todo,
        keys.len(),
        (
            "{spinner} protocol study {wide_bar} {pos}/{len} units · {rate} · ETA {eta}",
            "protocol study",
        ),
        opts,
        done,
        &work,
        on_done,
    )?;
    Ok(assemble(plan, finished, threads, resumed_units))
}
