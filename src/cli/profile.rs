//! A rig profile read as the command-line arguments it stands for. The profile's keys are the
//! library's setting keys (snake_case with their unit); this module alone knows which flag each
//! key is, so a profile goes through the same parsing and validation as typed flags, and an error
//! found in it names the key the user wrote.

use super::args::{Args, Command, RigArgs};
use super::one_line;
use anyhow::Result;
use beadline::rig::profile::Profile;
use clap::Parser;

/// Profile keys and the command-line flags they stand for.
const PROFILE_KEYS: &[(&str, &str)] = &[
    ("plate", "--plate"),
    ("polarity", "--polarity"),
    ("tone", "--tone"),
    ("radius_px", "--radius"),
    ("threshold_sigma", "--threshold-sigma"),
    ("threshold_level", "--threshold-level"),
    ("background_cell_px", "--background-cell"),
    ("smooth_px", "--smooth"),
    ("fine_snr", "--fine-snr"),
    ("shaded_max_r_px", "--shaded-max-r"),
    ("coarse_r_px", "--coarse-r"),
    ("edge_sigma", "--edge-sigma"),
    ("min_score", "--min-score"),
    ("radius_tolerance", "--radius-tolerance"),
    ("sizes_differ", "--sizes-differ"),
    ("max_rms_px", "--max-rms"),
    ("faint", "--faint"),
    ("max_candidates", "--max-candidates"),
    ("rate_hz", "--rate"),
    ("scale_px_per_m", "--scale"),
    ("ruler", "--ruler"),
    ("ball_diameter_m", "--ball-diameter"),
    ("plane", "--plane"),
    ("focal_px", "--focal-px"),
    ("gravity_mps2", "--gravity"),
    ("estimate", "--estimate"),
    ("ball", "--ball"),
    ("level", "--level"),
    ("fit_drag", "--fit-drag"),
    ("accept", "--accept"),
    ("start_px", "--start"),
    ("edge_systematic", "--edge-systematic"),
    ("poll_interval_s", "--poll-interval"),
    ("summary", "--summary"),
];

/// Rewrite every command-line flag named in `message` as its profile key, so an error found
/// while validating a profile names the key the user wrote.
pub(crate) fn flags_to_keys(message: &str) -> String {
    let mut flags: Vec<&(&str, &str)> = PROFILE_KEYS.iter().collect();
    // Longest first: `--radius-tolerance` before `--radius`.
    flags.sort_by_key(|(_, f)| std::cmp::Reverse(f.len()));
    let mut out = String::with_capacity(message.len());
    let mut rest = message;
    'outer: while !rest.is_empty() {
        for (key, flag) in &flags {
            if let Some(after) = rest.strip_prefix(flag) {
                let boundary = after
                    .chars()
                    .next()
                    .is_none_or(|c| !(c.is_ascii_alphanumeric() || c == '-'));
                if boundary {
                    out.push_str(key);
                    rest = after;
                    continue 'outer;
                }
            }
        }
        let c = rest.chars().next().unwrap_or(' ');
        out.push(c);
        rest = &rest[c.len_utf8()..];
    }
    out
}

/// Format a number so the command line's parser reads back exactly the same value.
fn num(v: f64) -> String {
    // Rust's shortest round-trip formatting; NaN and infinities come out as `NaN` / `inf` and
    // are refused by the command line's validation with the flag (key) named.
    format!("{v}")
}

/// The flag for a setting key (`rate_hz` -> `--rate`).
pub(crate) fn flag_for_key(key: &str) -> Option<&'static str> {
    PROFILE_KEYS
        .iter()
        .find(|(k, _)| *k == key)
        .map(|(_, f)| *f)
}

/// The command-line arguments this profile stands for, each as `--flag=value` (so negative
/// numbers are not taken for flags). `skip` names flags typed on the command line for
/// repeatable flags (`--accept`): the command line then replaces the profile's list.
pub(crate) fn profile_args(profile: &Profile, skip: &[&str]) -> Vec<String> {
    let mut a = Vec::new();
    let mut set = |flag: &str, v: String| a.push(format!("{flag}={v}"));
    if let Some(v) = &profile.plate {
        set("--plate", v.display().to_string());
    }
    if let Some(v) = &profile.polarity {
        set("--polarity", v.clone());
    }
    if let Some(v) = &profile.tone {
        set("--tone", v.clone());
    }
    if let Some([lo, hi]) = profile.radius_px {
        set("--radius", format!("{}..{}", num(lo), num(hi)));
    }
    let numbers = [
        ("--threshold-sigma", profile.threshold_sigma),
        ("--threshold-level", profile.threshold_level),
        ("--smooth", profile.smooth_px),
        ("--fine-snr", profile.fine_snr),
        ("--shaded-max-r", profile.shaded_max_r_px),
        ("--coarse-r", profile.coarse_r_px),
        ("--edge-sigma", profile.edge_sigma),
        ("--min-score", profile.min_score),
        ("--radius-tolerance", profile.radius_tolerance),
        ("--max-rms", profile.max_rms_px),
        ("--faint", profile.faint),
        ("--rate", profile.rate_hz),
        ("--scale", profile.scale_px_per_m),
        ("--ball-diameter", profile.ball_diameter_m),
        ("--focal-px", profile.focal_px),
        ("--gravity", profile.gravity_mps2),
    ];
    for (flag, v) in numbers {
        if let Some(v) = v {
            set(flag, num(v));
        }
    }
    for (flag, v) in [
        ("--background-cell", profile.background_cell_px),
        ("--max-candidates", profile.max_candidates),
    ] {
        if let Some(v) = v {
            set(flag, v.to_string());
        }
    }
    if let Some(v) = profile.ruler {
        set(
            "--ruler",
            v.iter().map(|x| num(*x)).collect::<Vec<_>>().join(","),
        );
    }
    if let Some(v) = &profile.plane {
        set("--plane", v.display().to_string());
    }
    if let Some(v) = &profile.estimate {
        set("--estimate", v.clone());
    }
    if let Some(v) = &profile.ball {
        set("--ball", v.clone());
    }
    if let Some([x, y]) = profile.start_px {
        set("--start", format!("{},{}", num(x), num(y)));
    }
    if let Some(bands) = &profile.accept
        && !skip.contains(&"--accept")
    {
        for b in bands {
            set("--accept", b.clone());
        }
    }
    for (flag, v) in [
        ("--sizes-differ", profile.sizes_differ),
        ("--level", profile.level),
        ("--fit-drag", profile.fit_drag),
    ] {
        if v == Some(true) {
            a.push(flag.to_string());
        }
    }
    a
}

/// Parse `beadline rig ARGS...` (the profile's arguments, then those typed).
pub(crate) fn parse_rig<I, T>(args: I) -> std::result::Result<RigArgs, clap::Error>
where
    I: IntoIterator<Item = T>,
    T: Into<std::ffi::OsString> + Clone,
{
    let argv = ["beadline".into(), "rig".into()]
        .into_iter()
        .chain(args.into_iter().map(Into::into));
    match Args::try_parse_from(argv)?.command {
        Command::Rig(r) => Ok(*r),
        _ => unreachable!("parse_rig parses the rig subcommand"),
    }
}

/// The first line of a clap error, without its `error:` prefix.
pub(crate) fn clap_line(e: &clap::Error) -> String {
    let text = e.render().to_string();
    let line = text.lines().next().unwrap_or("").trim();
    line.strip_prefix("error: ").unwrap_or(line).to_string()
}

/// Merge the profile under the typed flags: the profile becomes the arguments it stands for,
/// placed before those typed, so a typed flag overrides it (`args_override_self`) and both go
/// through the same parsing and validation. The profile is first validated alone so an absurd
/// value is reported with its key and the profile file.
pub(crate) fn with_profile(args: RigArgs) -> Result<RigArgs> {
    let Some(path) = args.profile.clone() else {
        return Ok(args);
    };
    let profile = Profile::load(&path)?;
    let named = |m: String| anyhow::anyhow!("{}: {}", path.display(), flags_to_keys(&m));
    let alone = parse_rig(profile_args(&profile, &[])).map_err(|e| named(clap_line(&e)))?;
    let d = alone.detect.validate().map_err(|e| named(one_line(&e)))?;
    alone
        .measure
        .validate(&d)
        .map_err(|e| named(one_line(&e)))?;
    let typed: Vec<std::ffi::OsString> = std::env::args_os()
        .skip_while(|a| a != "rig")
        .skip(1)
        .collect();
    let skip: &[&str] = if args.measure.accept.is_empty() {
        &[]
    } else {
        &["--accept"]
    };
    let merged: Vec<std::ffi::OsString> = profile_args(&profile, skip)
        .into_iter()
        .map(Into::into)
        .chain(typed)
        .collect();
    parse_rig(merged).map_err(|e| anyhow::anyhow!("{}", clap_line(&e)))
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::path::Path;

    #[test]
    fn flags_become_keys() {
        assert_eq!(
            flags_to_keys("--rate: must be between 0 and 100000 Hz, got -25"),
            "rate_hz: must be between 0 and 100000 Hz, got -25"
        );
        assert_eq!(
            flags_to_keys("--radius-tolerance and --radius: x"),
            "radius_tolerance and radius_px: x"
        );
        assert_eq!(flags_to_keys("--scale, --ruler"), "scale_px_per_m, ruler");
    }

    #[test]
    fn a_profile_stands_for_flags() {
        let p = Path::new("rig.toml");
        let prof = Profile::parse("rate_hz = -25\nradius_px = [3, 9.5]\nlevel = true", p).unwrap();
        assert_eq!(
            profile_args(&prof, &[]),
            vec!["--radius=3..9.5", "--rate=-25", "--level"]
        );
    }
}
