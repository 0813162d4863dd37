//! `beadline rig`: many photos unattended, with a progress bar, a summary and an exit status.

use super::args::RigArgs;
use super::profile::with_profile;
use super::settings::flagged;
use anyhow::{Context, Result, bail};
use std::process::ExitCode;

/// `beadline rig`.
pub(crate) fn rig(args: RigArgs) -> Result<ExitCode> {
    use beadline::rig::{self as r, PhotoResult, RigOptions, Status};
    use indicatif::{ProgressBar, ProgressStyle};
    use std::io::IsTerminal;
    let args = with_profile(args)?;
    let d = args.detect.validate()?;
    let settings = args.measure.validate(&d)?;
    if args.watch.is_some() != args.paths.is_empty() {
        bail!("rig: give either PATHs or --watch DIR");
    }
    if let Some(dir) = &args.overlay_dir {
        std::fs::create_dir_all(dir)
            .with_context(|| format!("{}: cannot create folder", dir.display()))?;
    }
    if args.max_decoding == Some(0) {
        bail!("--max-decoding: must be at least 1");
    }
    // The summary is written after every photo: a folder that is not there is told first.
    if let Some(summary) = &args.summary
        && let Some(folder) = summary.parent().filter(|f| !f.as_os_str().is_empty())
        && !folder.is_dir()
    {
        bail!(
            "{}: --summary: the folder {} does not exist",
            summary.display(),
            folder.display()
        );
    }
    if let Some(dir) = &args.report_dir
        && !dir.is_dir()
    {
        bail!("{}: --report-dir: the folder does not exist", dir.display());
    }
    let options = RigOptions {
        settings,
        overlay_dir: args.overlay_dir.clone(),
        report_dir: args.report_dir.clone(),
        max_decoding: args.max_decoding.unwrap_or(0),
    };
    let sink = match &args.out {
        Some(p) => r::sink::ResultSink::append(p)?,
        None => r::sink::ResultSink::stdout(),
    };
    let bar = if !args.quiet && std::io::stderr().is_terminal() {
        let b = ProgressBar::new(0);
        b.set_style(
            ProgressStyle::with_template("{spinner} {pos}/{len} photos {elapsed} {wide_msg}")
                .unwrap_or_else(|_| ProgressStyle::default_bar()),
        );
        Some(b)
    } else {
        None
    };
    let quiet = args.quiet;
    let done = |res: &PhotoResult| -> beadline::Result<()> {
        if let (Status::Error, false, Some(e)) = (res.status, quiet, &res.error) {
            match &bar {
                Some(b) => b.println(format!("beadline: {e}")),
                None => eprintln!("beadline: {e}"),
            }
        }
        if let Some(b) = &bar {
            if args.watch.is_some() {
                b.inc_length(1);
            }
            b.inc(1);
        }
        Ok(())
    };
    let run = || -> Result<Vec<PhotoResult>> {
        if let Some(dir) = &args.watch {
            if !dir.is_dir() {
                bail!("{}: --watch needs a folder", dir.display());
            }
            let journal_path = args
                .journal
                .clone()
                .unwrap_or_else(|| dir.join(r::JOURNAL_NAME));
            let journal = r::journal::Journal::open(&journal_path)?;
            if let Some(out) = &args.out {
                journal.reconcile(out)?;
            }
            let watch = r::watch::WatchOptions {
                poll_interval_s: args.poll_interval,
                max_photos: args.max_photos,
                idle_exit_s: args.idle_exit,
            };
            if let Some(s) = args.idle_exit
                && !(s.is_finite() && s >= 0.0)
            {
                bail!("--idle-exit: must be a number of seconds >= 0, got {s}");
            }
            r::watch::watch(dir, &options, &watch, &journal, &sink, &done).map_err(flagged)
        } else {
            let paths = r::inputs::expand_inputs(&args.paths)?;
            if paths.is_empty() {
                bail!(
                    "no photos matched {}: nothing to measure",
                    args.paths.join(" ")
                );
            }
            if let Some(b) = &bar {
                b.set_length(paths.len() as u64);
            }
            Ok(r::run_batch(&paths, &options, &sink, &done)?)
        }
    };
    let results = match args.jobs {
        Some(0) => bail!("--jobs: must be at least 1"),
        Some(n) => rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .build()
            .context("--jobs: cannot start the worker threads")?
            .install(run)?,
        None => run()?,
    };
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    if let Some(p) = &args.summary {
        beadline::core::output::write_text(
            p,
            &r::summary::summary_csv(&results).map_err(flagged)?,
        )?;
    }
    Ok(ExitCode::from(r::exit_status(&results)))
}
