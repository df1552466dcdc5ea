//! Write the calibration sample of one unit of a suite as CSV (`score,label`),
//! exactly as the run engine draws it. Used to turn a hard unit of the default
//! suite into a test fixture (see `scripts/fixtures_saturated.py`).
//!
//! Usage:
//!
//!     cargo run --release --example export_unit_sample -- SUITE TASK SIZE REPEAT OUT.csv
//!
//! Open-data pools are built (or read from the cache `.cache/pools` beside the
//! working folder) as `plumbline run` does.

use std::path::PathBuf;

use plumbline::{run, suite};

fn main() {
    if let Err(e) = real_main() {
        eprintln!("error: {e}");
        std::process::exit(2);
    }
}

fn real_main() -> Result<(), String> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let [suite_path, task, size, repeat, out] = args.as_slice() else {
        return Err("usage: export_unit_sample SUITE TASK SIZE REPEAT OUT.csv".into());
    };
    let size: usize = size
        .parse()
        .map_err(|_| format!("SIZE `{size}` is not a count"))?;
    let repeat: usize = repeat
        .parse()
        .map_err(|_| format!("REPEAT `{repeat}` is not a count"))?;
    let mut plan = suite::load(&PathBuf::from(suite_path)).map_err(|e| e.to_string())?;
    // Only this task's pool is built; a unit's draw depends on its task id,
    // size and repeat alone.
    plan.tasks.retain(|t| t.id == *task);
    if plan.tasks.is_empty() {
        return Err(format!("the suite has no task `{task}`"));
    }
    let ti = 0;
    let cache = PathBuf::from(".cache").join("pools");
    run::pools::resolve(&mut plan, Some(&cache), None, true)?;
    if !plan.tasks[ti].sizes.contains(&size) {
        return Err(format!("task `{task}` runs no size {size}"));
    }
    if repeat >= plan.repeats {
        return Err(format!("the suite has {} repeats", plan.repeats));
    }
    let (s, y) = run::calibration_sample(&plan, ti, size, repeat);
    let mut text = String::from("score,label\n");
    for (s, y) in s.iter().zip(&y) {
        text.push_str(&format!("{s},{}\n", u8::from(*y)));
    }
    std::fs::write(out, text).map_err(|e| format!("{out}: {e}"))?;
    eprintln!(
        "{out}: {} rows of {task}, size {size}, repeat {repeat}",
        y.len()
    );
    Ok(())
}
