//! Atomic writes: a reader sees the old folder (or file), or the complete new one, never a
//! half-written one under the target name.
//!
//! The new content is written beside the target (same parent, hence the same file system, so
//! `rename` is atomic), flushed with `fsync`, then swapped into place. On Linux the swap is one
//! `renameat2(RENAME_EXCHANGE)`: the target name holds the old folder until the instant it
//! holds the new one. Elsewhere, or on a file system without the exchange, a folder cannot be
//! renamed over a non-empty folder, so an existing target is first renamed aside; the window
//! in which the target name is absent is then two renames long, and the old folder is restored
//! if the second rename fails.
//!
//! A run killed mid-write (SIGKILL, power loss) can leave its temp folder `.<name>.tmp-<pid>`
//! or the moved-aside `.<name>.old-<pid>` beside the target, never a partial target. The next
//! successful write removes such leftovers of processes that are no longer running.

use std::fs::{self, File};
use std::io::{self, Write};
use std::path::{Path, PathBuf};

/// Writes `files` (relative names, no `..`, no absolute paths) as the folder `target`,
/// replacing any folder already there.
///
/// Steps: fresh temp folder `.<name>.tmp-<pid>` beside the target; every file written and
/// fsynced; the folder fsynced; the temp folder exchanged with an existing target (Linux) or
/// the target renamed to `.<name>.old-<pid>` and the temp folder renamed to the target; the
/// old folder removed; leftovers of crashed runs on the same target removed. On any error the
/// temp folder is removed and the old target, if it had been moved aside, is put back.
///
/// # Errors
/// Any I/O error; `InvalidInput` for a file name that would escape the folder, and when
/// `target` is an existing non-folder or has no file name.
pub fn write_dir_atomically(target: &Path, files: &[(String, Vec<u8>)]) -> io::Result<()> {
    for (name, _) in files {
        check_relative(name)?;
    }
    if target.exists() && !target.is_dir() {
        return Err(io::Error::new(
            io::ErrorKind::InvalidInput,
            format!("{} exists and is not a folder", target.display()),
        ));
    }
    let tmp = sibling(target, "tmp")?;
    let old = sibling(target, "old")?;
    // Leftovers from a crashed run with the same pid would make create_dir fail.
    remove_if_exists(&tmp)?;
    fs::create_dir_all(tmp.parent().unwrap_or(Path::new(".")))?;
    fs::create_dir(&tmp)?;
    let result = fill_and_swap(target, &tmp, &old, files);
    if result.is_err() {
        let _ = fs::remove_dir_all(&tmp);
        return result;
    }
    // The plan is in place; failing to tidy up after another run is not this run's failure.
    let _ = remove_dead_leftovers(target);
    Ok(())
}

/// Removes `.<name>.tmp-<pid>` and `.<name>.old-<pid>` beside `target` whose process is no
/// longer running (a live pid may be another run writing the same target right now).
/// O(entries in the parent folder).
fn remove_dead_leftovers(target: &Path) -> io::Result<()> {
    let Some(name) = target.file_name().and_then(|n| n.to_str()) else {
        return Ok(());
    };
    let parent = match target.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    for entry in fs::read_dir(parent)? {
        let entry = entry?;
        let file_name = entry.file_name();
        let Some(rest) = file_name
            .to_str()
            .and_then(|n| n.strip_prefix('.'))
            .and_then(|n| n.strip_prefix(name))
        else {
            continue;
        };
        let pid = rest
            .strip_prefix(".tmp-")
            .or_else(|| rest.strip_prefix(".old-"))
            .and_then(|p| p.parse::<u32>().ok());
        if let Some(pid) = pid
            && pid != std::process::id()
            && !process_alive(pid)
        {
            remove_if_exists(&entry.path())?;
        }
    }
    Ok(())
}

/// Whether process `pid` exists (signal 0 probe); `true` when it cannot be told.
#[cfg(unix)]
fn process_alive(pid: u32) -> bool {
    let Some(pid) = i32::try_from(pid)
        .ok()
        .and_then(rustix::process::Pid::from_raw)
    else {
        return true;
    };
    !matches!(
        rustix::process::test_kill_process(pid),
        Err(rustix::io::Errno::SRCH)
    )
}

#[cfg(not(unix))]
fn process_alive(_pid: u32) -> bool {
    true
}

/// Swaps two existing paths in one step. `Unsupported` where the platform or the file system
/// has no such operation.
#[cfg(target_os = "linux")]
fn exchange(a: &Path, b: &Path) -> io::Result<()> {
    use rustix::fs::{CWD, RenameFlags, renameat_with};
    match renameat_with(CWD, a, CWD, b, RenameFlags::EXCHANGE) {
        Ok(()) => Ok(()),
        Err(e) if e == rustix::io::Errno::INVAL || e == rustix::io::Errno::NOSYS => Err(
            io::Error::new(io::ErrorKind::Unsupported, "no RENAME_EXCHANGE here"),
        ),
        Err(e) => Err(e.into()),
    }
}

#[cfg(not(target_os = "linux"))]
fn exchange(_a: &Path, _b: &Path) -> io::Result<()> {
    Err(io::Error::new(
        io::ErrorKind::Unsupported,
        "no atomic exchange on this platform",
    ))
}

fn fill_and_swap(
    target: &Path,
    tmp: &Path,
    old: &Path,
    files: &[(String, Vec<u8>)],
) -> io::Result<()> {
    for (name, bytes) in files {
        let path = tmp.join(name);
        if let Some(parent) = path.parent() {
            fs::create_dir_all(parent)?;
        }
        write_synced(&path, bytes)?;
    }
    sync_dir(tmp)?;
    let had_old = target.exists();
    if had_old {
        match exchange(tmp, target) {
            Ok(()) => {
                if let Some(parent) = target.parent() {
                    sync_dir(parent)?;
                }
                // `tmp` now holds the previous plan; if it cannot be removed now, the next
                // run removes it (its pid is then dead).
                let _ = fs::remove_dir_all(tmp);
                return Ok(());
            }
            Err(e) if e.kind() == io::ErrorKind::Unsupported => {}
            Err(e) => return Err(e),
        }
        remove_if_exists(old)?;
        fs::rename(target, old)?;
    }
    if let Err(e) = fs::rename(tmp, target) {
        if had_old {
            // Put the previous plan back rather than leave no folder at all.
            let _ = fs::rename(old, target);
        }
        return Err(e);
    }
    if let Some(parent) = target.parent() {
        sync_dir(parent)?;
    }
    if had_old {
        fs::remove_dir_all(old)?;
    }
    Ok(())
}

/// Writes one file atomically: a temp file `.<name>.tmp-<pid>` beside `path`, fsynced, then
/// renamed over `path`.
///
/// # Errors
/// Any I/O error (the temp file is removed); `InvalidInput` when `path` has no file name.
pub fn write_file_atomically(path: &Path, bytes: &[u8]) -> io::Result<()> {
    let tmp = sibling(path, "tmp")?;
    let result = write_synced(&tmp, bytes).and_then(|()| fs::rename(&tmp, path));
    if result.is_err() {
        let _ = fs::remove_file(&tmp);
        return result;
    }
    if let Some(parent) = path.parent() {
        sync_dir(parent)?;
    }
    Ok(())
}

fn write_synced(path: &Path, bytes: &[u8]) -> io::Result<()> {
    let mut f = File::create(path)?;
    f.write_all(bytes)?;
    f.sync_all()
}

/// fsync on a folder makes the renames inside it durable; not every platform allows opening a
/// folder, so failing to open is not an error.
fn sync_dir(dir: &Path) -> io::Result<()> {
    let dir = if dir.as_os_str().is_empty() {
        Path::new(".")
    } else {
        dir
    };
    match File::open(dir) {
        Ok(f) => f.sync_all().or(Ok(())),
        Err(_) => Ok(()),
    }
}

fn sibling(target: &Path, tag: &str) -> io::Result<PathBuf> {
    let name = target.file_name().ok_or_else(|| {
        io::Error::new(
            io::ErrorKind::InvalidInput,
            format!("{} has no file name", target.display()),
        )
    })?;
    let mut n = std::ffi::OsString::from(".");
    n.push(name);
    n.push(format!(".{tag}-{}", std::process::id()));
    Ok(target.with_file_name(n))
}

fn remove_if_exists(p: &Path) -> io::Result<()> {
    match fs::symlink_metadata(p) {
        Ok(m) if m.is_dir() => fs::remove_dir_all(p),
        Ok(_) => fs::remove_file(p),
        Err(e) if e.kind() == io::ErrorKind::NotFound => Ok(()),
        Err(e) => Err(e),
    }
}

fn check_relative(name: &str) -> io::Result<()> {
    let p = Path::new(name);
    let ok = !name.is_empty()
        && p.components()
            .all(|c| matches!(c, std::path::Component::Normal(_)));
    if ok {
        Ok(())
    } else {
        Err(io::Error::new(
            io::ErrorKind::InvalidInput,
            format!("output file name {name:?} must be a plain relative path"),
        ))
    }
}

#[cfg(test)]
pub(super) mod tests {
    use super::*;

    fn files(n: &str) -> Vec<(String, Vec<u8>)> {
        vec![
            ("a.txt".into(), n.as_bytes().to_vec()),
            ("sub/b.txt".into(), b"b".to_vec()),
        ]
    }

    /// Names in `dir`, sorted (shared with `target`'s tests).
    pub(in crate::output) fn entries(dir: &Path) -> Vec<String> {
        let mut v: Vec<String> = fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        v.sort();
        v
    }

    #[test]
    fn writes_a_new_folder_and_leaves_no_temp() {
        let root = tempfile::tempdir().unwrap();
        let out = root.path().join("plan");
        write_dir_atomically(&out, &files("one")).unwrap();
        assert_eq!(fs::read_to_string(out.join("a.txt")).unwrap(), "one");
        assert_eq!(fs::read_to_string(out.join("sub/b.txt")).unwrap(), "b");
        assert_eq!(entries(root.path()), ["plan"]);
    }

    #[test]
    fn replaces_an_existing_folder_whole() {
        let root = tempfile::tempdir().unwrap();
        let out = root.path().join("plan");
        fs::create_dir(&out).unwrap();
        fs::write(out.join("stale.txt"), "old").unwrap();
        write_dir_atomically(&out, &files("two")).unwrap();
        assert_eq!(entries(&out), ["a.txt", "sub"], "stale file gone");
        assert_eq!(fs::read_to_string(out.join("a.txt")).unwrap(), "two");
        assert_eq!(entries(root.path()), ["plan"], "no .old or .tmp left");
    }

    #[test]
    fn failure_keeps_the_old_folder_and_cleans_the_temp() {
        let root = tempfile::tempdir().unwrap();
        let out = root.path().join("plan");
        fs::create_dir(&out).unwrap();
        fs::write(out.join("keep.txt"), "old").unwrap();
        // "a.txt/x" cannot be created once "a.txt" is a file: the write fails midway.
        let bad = vec![
            ("a.txt".to_string(), b"1".to_vec()),
            ("a.txt/x".to_string(), b"2".to_vec()),
        ];
        assert!(write_dir_atomically(&out, &bad).is_err());
        assert_eq!(fs::read_to_string(out.join("keep.txt")).unwrap(), "old");
        assert_eq!(entries(root.path()), ["plan"]);
    }

    #[test]
    fn names_that_escape_the_folder_are_refused() {
        let root = tempfile::tempdir().unwrap();
        let out = root.path().join("plan");
        for name in ["../x", "/etc/x", "", "a/../../x"] {
            let err = write_dir_atomically(&out, &[(name.to_string(), vec![])]).unwrap_err();
            assert_eq!(err.kind(), io::ErrorKind::InvalidInput, "{name}");
        }
        assert!(!out.exists());
    }

    #[test]
    fn a_file_in_the_way_is_refused() {
        let root = tempfile::tempdir().unwrap();
        let out = root.path().join("plan");
        fs::write(&out, "not a folder").unwrap();
        assert!(write_dir_atomically(&out, &files("x")).is_err());
        assert_eq!(fs::read_to_string(&out).unwrap(), "not a folder");
    }

    #[test]
    fn single_file_is_replaced_without_leftovers() {
        let root = tempfile::tempdir().unwrap();
        let p = root.path().join("ledger.csv");
        write_file_atomically(&p, b"v1").unwrap();
        write_file_atomically(&p, b"v2").unwrap();
        assert_eq!(fs::read(&p).unwrap(), b"v2");
        assert_eq!(entries(root.path()), ["ledger.csv"]);
    }

    #[test]
    fn leftovers_of_dead_runs_are_removed_by_the_next_write() {
        let root = tempfile::tempdir().unwrap();
        let out = root.path().join("plan");
        // A pid that has just exited stands for a run killed mid-write.
        let mut child = std::process::Command::new("true").spawn().unwrap();
        let dead = child.id();
        child.wait().unwrap();
        for tag in ["tmp", "old"] {
            let d = root.path().join(format!(".plan.{tag}-{dead}"));
            fs::create_dir(&d).unwrap();
            fs::write(d.join("manifest.csv"), "partial").unwrap();
        }
        // pid 1 is always running: a live run's temp folder is left alone, and so are other
        // targets' leftovers.
        fs::create_dir(root.path().join(".plan.tmp-1")).unwrap();
        fs::create_dir(
            root.path()
                .join(".other.tmp-".to_string() + &dead.to_string()),
        )
        .unwrap();
        write_dir_atomically(&out, &files("new")).unwrap();
        let dead_other = format!(".other.tmp-{dead}");
        let mut want = vec![".plan.tmp-1", dead_other.as_str(), "plan"];
        want.sort();
        assert_eq!(entries(root.path()), want);
    }

    #[test]
    fn replacing_keeps_no_moved_aside_copy() {
        let root = tempfile::tempdir().unwrap();
        let out = root.path().join("plan");
        write_dir_atomically(&out, &files("one")).unwrap();
        write_dir_atomically(&out, &files("two")).unwrap();
        write_dir_atomically(&out, &files("three")).unwrap();
        assert_eq!(fs::read_to_string(out.join("a.txt")).unwrap(), "three");
        assert_eq!(entries(root.path()), ["plan"]);
    }
}
