//! Output writing: complete files or none, and special targets left what they are.

mod common;

use beadline::core::output::{write_atomic, write_text};
use std::os::unix::fs::FileTypeExt;

/// Names in `dir` other than the ones listed: a leftover temporary file shows up here.
fn extra_names(dir: &std::path::Path, known: &[&str]) -> Vec<String> {
    std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| !known.contains(&n.as_str()))
        .collect()
}

#[test]
fn a_failed_write_leaves_the_old_file_and_no_temporary() {
    let dir = common::tempdir();
    let path = dir.path().join("report.json");
    std::fs::write(&path, "old").unwrap();
    let result = write_atomic(&path, |w| {
        w.write_all(b"half of a new")?;
        Err(std::io::Error::other("disk full"))
    });
    let message = result.unwrap_err().to_string();
    assert!(message.contains("report.json"), "{message}");
    assert_eq!(std::fs::read_to_string(&path).unwrap(), "old");
    assert!(extra_names(dir.path(), &["report.json"]).is_empty());
}

#[test]
fn a_link_is_written_through_and_stays_a_link() {
    let dir = common::tempdir();
    let real = dir.path().join("real.json");
    let link = dir.path().join("link.json");
    std::fs::write(&real, "old").unwrap();
    std::os::unix::fs::symlink(&real, &link).unwrap();
    write_text(&link, "new").unwrap();
    assert!(
        std::fs::symlink_metadata(&link)
            .unwrap()
            .file_type()
            .is_symlink()
    );
    assert_eq!(std::fs::read_to_string(&real).unwrap(), "new");
    assert!(extra_names(dir.path(), &["real.json", "link.json"]).is_empty());
}

/// A named pipe stands in for `/dev/null` and `/dev/stdout`: renaming a file over such a target
/// would leave a regular file where every later program expects the device.
#[test]
fn a_named_pipe_is_written_into_and_stays_a_pipe() {
    let dir = common::tempdir();
    let pipe = dir.path().join("pipe");
    let made = std::process::Command::new("mkfifo")
        .arg(&pipe)
        .status()
        .unwrap();
    assert!(made.success(), "mkfifo failed");
    let reader = {
        let pipe = pipe.clone();
        std::thread::spawn(move || std::fs::read_to_string(pipe).unwrap())
    };
    write_text(&pipe, "through the pipe\n").unwrap();
    // Checked before the join: had a file been renamed over the pipe, the reader would wait forever.
    assert!(std::fs::metadata(&pipe).unwrap().file_type().is_fifo());
    assert_eq!(reader.join().unwrap(), "through the pipe\n");
    assert!(extra_names(dir.path(), &["pipe"]).is_empty());
}
