//! Where an output may go: the rule that no command deletes or overwrites a file it did not
//! write.
//!
//! A folder that a command writes (`plan`, `sweep`, `demo`, `generate`, `ledger report`)
//! carries a marker file, [`MARKER`], listing every file broodcast put in it with its length
//! and FNV-1a 64 hash. An existing folder is replaced only when it is empty, or when every
//! file in it is listed in its marker with the same length and hash (a broodcast output that
//! nobody has edited or added to). Anything else is refused before any work is done, naming
//! the folder and what is in the way. `--force` never deletes: it renames the old folder to a
//! free sibling name (`<name>.replaced-<n>`) at the moment the new one is ready.
//!
//! Some folders are never a target, even with `--force`: `/`, the current folder or any
//! folder above it, the home folder, an input (scenario folder, ledger, confirmations) or any
//! folder that holds one, and a symbolic link.
//!
//! A file target (`export-model`, `forecast`) is overwritten only when broodcast wrote it
//! (a signature its format allows: the MPS comment line [`MPS_SIGNATURE`]); otherwise
//! `--force` renames the old file aside in the same way. It may never be one of the inputs.
//!
//! Whether the place can be written is probed before the plan is computed, so that a
//! read-only or missing parent folder costs nothing and is an input error (exit 2).

use std::collections::BTreeMap;
use std::fmt;
use std::fs;
use std::hash::Hasher;
use std::io;
use std::path::{Component, Path, PathBuf};

use serde::{Deserialize, Serialize};

/// Name of the marker file inside every folder broodcast writes (hidden on Unix).
pub const MARKER: &str = ".broodcast-output.json";

/// First line of every MPS file `export-model` writes (an MPS comment line: `*` in column 1).
pub const MPS_SIGNATURE: &str = "* written by broodcast export-model";

/// Why an output place was refused. Every variant names the path and says what to do.
#[derive(Debug, thiserror::Error)]
pub enum TargetError {
    /// A place that is never a target (root, current folder or above, home, an input).
    #[error("--out {path}: {why}; choose a new folder (or file) name, e.g. {suggestion}")]
    Forbidden {
        /// The refused path as given.
        path: String,
        /// Why it is never written.
        why: String,
        /// A safe alternative.
        suggestion: String,
    },
    /// The folder holds files broodcast did not write (or that were edited since).
    #[error(
        "--out {path}: the folder holds {what}, which broodcast did not write; nothing was \
         written. Choose a new folder, empty this one, or pass --force to move it aside to \
         {aside} (nothing is deleted)"
    )]
    Foreign {
        /// The folder as given.
        path: String,
        /// The first few foreign entries, described.
        what: String,
        /// Where `--force` would move it.
        aside: String,
    },
    /// A file target that exists and was not written by broodcast.
    #[error(
        "--out {path}: this file exists and was not written by broodcast; nothing was \
         written. Choose a new file name, or pass --force to move it aside to {aside} \
         (nothing is deleted)"
    )]
    ForeignFile {
        /// The file as given.
        path: String,
        /// Where `--force` would move it.
        aside: String,
    },
    /// The path has the wrong kind (a file where a folder is wanted, or the reverse).
    #[error("--out {path}: {why}")]
    WrongKind {
        /// The path as given.
        path: String,
        /// What it is and what is wanted.
        why: String,
    },
    /// The parent cannot be created or written (permissions, read-only file system).
    #[error("--out {path}: cannot write in {parent}: {source}; choose a folder you can write to")]
    NotWritable {
        /// The path as given.
        path: String,
        /// The folder that was probed.
        parent: String,
        /// The operating system's reason.
        source: io::Error,
    },
}

/// One listed file of a marker.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
struct MarkedFile {
    /// Relative path with `/` separators.
    name: String,
    /// Length, bytes.
    bytes: u64,
    /// FNV-1a 64 of the content, 16 hex digits.
    fnv1a64: String,
}

/// The marker's content. Deterministic: files in name order, no clock.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
struct Marker {
    written_by: String,
    files: Vec<MarkedFile>,
}

/// FNV-1a 64 hash as 16 hex digits.
fn fnv_hex(bytes: &[u8]) -> String {
    let mut h = fnv::FnvHasher::default();
    h.write(bytes);
    format!("{:016x}", h.finish())
}

/// The marker file's bytes for a folder holding `files` (relative name, content).
pub fn marker_bytes(files: &[(String, Vec<u8>)]) -> Vec<u8> {
    let mut listed: Vec<MarkedFile> = files
        .iter()
        .filter(|(n, _)| n != MARKER)
        .map(|(name, b)| MarkedFile {
            name: name.clone(),
            bytes: b.len() as u64,
            fnv1a64: fnv_hex(b),
        })
        .collect();
    listed.sort_by(|a, b| a.name.cmp(&b.name));
    let m = Marker {
        written_by: "broodcast".to_string(),
        files: listed,
    };
    let mut out = serde_json::to_vec_pretty(&m).unwrap_or_default();
    out.push(b'\n');
    out
}

/// What writing a folder will do to the place it goes.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum FolderPlan {
    /// Nothing there yet (or an empty folder).
    New,
    /// A broodcast output nobody changed: replaced whole.
    Replace,
    /// A folder with other content: moved aside to this path when the new one is ready.
    MoveAside(PathBuf),
}

/// A checked folder target, to be written with [`OutputFolder::write`].
#[derive(Clone, Debug)]
pub struct OutputFolder {
    path: PathBuf,
    force: bool,
    /// What was found at check time.
    pub plan: FolderPlan,
}

/// What [`OutputFolder::write`] did.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Written {
    /// Files written (the marker not counted).
    pub files: usize,
    /// Where the previous content was moved, when `--force` moved it aside.
    pub moved_aside: Option<PathBuf>,
}

impl OutputFolder {
    /// Checks that `path` may receive a folder of outputs. `inputs` are the paths the command
    /// reads (never replaced, nor any folder holding them). Probes that the parent can be
    /// written. O(files in an existing target + their bytes).
    ///
    /// # Errors
    /// [`TargetError`] naming the path and the fix.
    pub fn check(path: &Path, inputs: &[&Path], force: bool) -> Result<Self, TargetError> {
        forbidden(path, inputs, true)?;
        let meta = fs::symlink_metadata(path);
        let plan = match meta {
            Err(_) => FolderPlan::New,
            Ok(m) if m.file_type().is_symlink() => {
                return Err(TargetError::WrongKind {
                    path: shown(path),
                    why: "is a symbolic link; give the folder it points to, or a new name".into(),
                });
            }
            Ok(m) if !m.is_dir() => {
                return Err(TargetError::WrongKind {
                    path: shown(path),
                    why: "is a file, not a folder; give a folder name (it is created)".into(),
                });
            }
            Ok(_) => match foreign_entries(path) {
                Ok(None) => FolderPlan::Replace,
                Ok(Some(what)) => {
                    let aside = aside_name(path);
                    if force {
                        FolderPlan::MoveAside(aside)
                    } else {
                        return Err(TargetError::Foreign {
                            path: shown(path),
                            what,
                            aside: shown(&aside),
                        });
                    }
                }
                Err(e) => {
                    return Err(TargetError::NotWritable {
                        path: shown(path),
                        parent: shown(path),
                        source: e,
                    });
                }
            },
        };
        probe_parent(path)?;
        Ok(Self {
            path: path.to_path_buf(),
            force,
            plan,
        })
    }

    /// The folder as given.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Writes `files` and the marker as the folder, atomically (see
    /// [`super::write_dir_atomically`]). The target is checked again just before the swap, so
    /// a file added since [`OutputFolder::check`] is not lost.
    ///
    /// # Errors
    /// [`WriteError::Target`] when the folder changed and is no longer replaceable;
    /// [`WriteError::Io`] for an I/O failure (with the path).
    pub fn write(&self, files: &[(String, Vec<u8>)]) -> Result<Written, WriteError> {
        let again = Self::check(&self.path, &[], self.force).map_err(WriteError::Target)?;
        let mut moved_aside = None;
        if let FolderPlan::MoveAside(aside) = &again.plan {
            fs::rename(&self.path, aside).map_err(|e| WriteError::io(&self.path, e))?;
            moved_aside = Some(aside.clone());
        }
        let mut all: Vec<(String, Vec<u8>)> =
            files.iter().filter(|(n, _)| n != MARKER).cloned().collect();
        all.push((MARKER.to_string(), marker_bytes(files)));
        super::atomic::write_dir_atomically(&self.path, &all)
            .map_err(|e| WriteError::io(&self.path, e))?;
        Ok(Written {
            files: all.len() - 1,
            moved_aside,
        })
    }
}

/// A checked file target, to be written with [`OutputFile::write`].
#[derive(Clone, Debug)]
pub struct OutputFile {
    path: PathBuf,
    aside: Option<PathBuf>,
}

impl OutputFile {
    /// Checks that `path` may receive one file. It is overwritten only when it starts with
    /// `signature` (a file broodcast wrote), never when it is one of `inputs`; otherwise
    /// `--force` moves it aside. Probes that the parent can be written.
    ///
    /// # Errors
    /// [`TargetError`] naming the path and the fix.
    pub fn check(
        path: &Path,
        inputs: &[&Path],
        signature: Option<&str>,
        force: bool,
    ) -> Result<Self, TargetError> {
        forbidden(path, inputs, false)?;
        let mut aside = None;
        match fs::symlink_metadata(path) {
            Err(_) => {}
            Ok(m) if m.is_dir() => {
                let name = path
                    .file_name()
                    .map_or("model".into(), |n| n.to_string_lossy().into_owned());
                return Err(TargetError::WrongKind {
                    path: shown(path),
                    why: format!(
                        "is a folder; give a file name, e.g. {}",
                        shown(&path.join(name))
                    ),
                });
            }
            Ok(_) => {
                let ours = signature.is_some_and(|sig| starts_with_line(path, sig));
                if !ours {
                    let a = aside_name(path);
                    if force {
                        aside = Some(a);
                    } else {
                        return Err(TargetError::ForeignFile {
                            path: shown(path),
                            aside: shown(&a),
                        });
                    }
                }
            }
        }
        probe_parent(path)?;
        Ok(Self {
            path: path.to_path_buf(),
            aside,
        })
    }

    /// Writes the file atomically, after moving a foreign file aside when `--force` asked.
    ///
    /// # Errors
    /// [`WriteError::Io`] with the path.
    pub fn write(&self, bytes: &[u8]) -> Result<Option<PathBuf>, WriteError> {
        if let Some(a) = &self.aside {
            fs::rename(&self.path, a).map_err(|e| WriteError::io(&self.path, e))?;
        }
        super::atomic::write_file_atomically(&self.path, bytes)
            .map_err(|e| WriteError::io(&self.path, e))?;
        Ok(self.aside.clone())
    }
}

/// A failure while writing a checked target.
#[derive(Debug, thiserror::Error)]
pub enum WriteError {
    /// The target changed after the check and is no longer safe to replace.
    #[error(transparent)]
    Target(TargetError),
    /// The operating system refused (full disk, permissions changed, …).
    #[error("writing {path}: {source}; nothing there was changed. {fix}")]
    Io {
        /// The target as given.
        path: String,
        /// The operating system's reason.
        source: io::Error,
        /// What to do.
        fix: &'static str,
    },
}

impl WriteError {
    fn io(path: &Path, source: io::Error) -> Self {
        let fix = match source.raw_os_error() {
            Some(28) => "Free some space on that disk, or choose another --out",
            Some(30) => "The file system is read-only; choose another --out",
            Some(13) | Some(1) => "Choose a folder you can write to",
            _ => "Check the path, or choose another --out",
        };
        WriteError::Io {
            path: shown(path),
            source,
            fix,
        }
    }

    /// Whether the user can fix it by choosing another place (exit 2) rather than a failure
    /// during the write (exit 1).
    pub fn is_input(&self) -> bool {
        match self {
            WriteError::Target(_) => true,
            WriteError::Io { source, .. } => {
                matches!(
                    source.kind(),
                    io::ErrorKind::PermissionDenied | io::ErrorKind::InvalidInput
                ) || source.raw_os_error() == Some(30)
            }
        }
    }
}

fn shown(p: &Path) -> String {
    p.display().to_string()
}

/// `path` made absolute and free of `.`/`..`, resolving symbolic links in the part that
/// exists. `None` when it cannot be worked out (e.g. the current folder is gone).
fn resolved(path: &Path) -> Option<PathBuf> {
    let abs = if path.is_absolute() {
        path.to_path_buf()
    } else {
        std::env::current_dir().ok()?.join(path)
    };
    // Lexical clean-up first, so that `new/../x` is `x` even when `new` does not exist.
    let mut clean = PathBuf::new();
    for c in abs.components() {
        match c {
            Component::ParentDir => {
                clean.pop();
            }
            Component::CurDir => {}
            other => clean.push(other),
        }
    }
    // Canonicalise the longest existing prefix (symbolic links resolved), keep the rest.
    let mut existing = clean.clone();
    let mut tail = Vec::new();
    while fs::symlink_metadata(&existing).is_err() {
        tail.push(existing.file_name()?.to_os_string());
        if !existing.pop() {
            return None;
        }
    }
    let mut out = fs::canonicalize(&existing).ok()?;
    for t in tail.into_iter().rev() {
        out.push(t);
    }
    Some(out)
}

/// Refuses places that are never a target. `folder` selects the folder wording.
fn forbidden(path: &Path, inputs: &[&Path], folder: bool) -> Result<(), TargetError> {
    let refuse = |why: String| TargetError::Forbidden {
        path: shown(path),
        why,
        suggestion: if folder {
            "--out plan-week".into()
        } else {
            "--out model.mps".into()
        },
    };
    if path.as_os_str().is_empty() {
        return Err(refuse("an empty path".into()));
    }
    let Some(target) = resolved(path) else {
        return Err(refuse("cannot be resolved to a place on disk".into()));
    };
    if target.parent().is_none() {
        return Err(refuse("is the root of the file system".into()));
    }
    if let Ok(cwd) = std::env::current_dir().and_then(fs::canonicalize)
        && cwd.starts_with(&target)
    {
        return Err(refuse(if cwd == target {
            "is the current folder".into()
        } else {
            "holds the current folder".into()
        }));
    }
    if let Some(home) = std::env::var_os("HOME").map(PathBuf::from)
        && let Ok(home) = fs::canonicalize(home)
        && home.starts_with(&target)
    {
        return Err(refuse("is the home folder or holds it".into()));
    }
    for input in inputs {
        let Some(inp) = resolved(input) else { continue };
        if inp == target {
            return Err(refuse(format!(
                "is an input of this command ({})",
                shown(input)
            )));
        }
        if inp.starts_with(&target) {
            return Err(refuse(format!(
                "holds an input of this command ({})",
                shown(input)
            )));
        }
    }
    Ok(())
}

/// `None` when every entry under `dir` is a file listed in its marker with the same length and
/// hash (or the folder is empty); otherwise a short description of what is in the way.
fn foreign_entries(dir: &Path) -> io::Result<Option<String>> {
    let marker: Option<Marker> = fs::read(dir.join(MARKER))
        .ok()
        .and_then(|b| serde_json::from_slice(&b).ok());
    let listed: BTreeMap<&str, &MarkedFile> = marker
        .as_ref()
        .map(|m| m.files.iter().map(|f| (f.name.as_str(), f)).collect())
        .unwrap_or_default();
    let mut foreign = Vec::new();
    let mut total = 0usize;
    let mut stack = vec![(dir.to_path_buf(), String::new())];
    while let Some((d, prefix)) = stack.pop() {
        let mut entries: Vec<_> = fs::read_dir(&d)?.collect::<Result<_, _>>()?;
        entries.sort_by_key(|e| e.file_name());
        for e in entries {
            let name = e.file_name().to_string_lossy().into_owned();
            let rel = if prefix.is_empty() {
                name.clone()
            } else {
                format!("{prefix}/{name}")
            };
            if rel == MARKER && marker.is_some() {
                continue;
            }
            let ft = e.file_type()?;
            if ft.is_dir() {
                stack.push((e.path(), rel));
                continue;
            }
            let ok = ft.is_file()
                && listed.get(rel.as_str()).is_some_and(|m| {
                    e.metadata().is_ok_and(|md| md.len() == m.bytes)
                        && fs::read(e.path()).is_ok_and(|b| fnv_hex(&b) == m.fnv1a64)
                });
            if !ok {
                total += 1;
                if foreign.len() < 3 {
                    let why = if listed.contains_key(rel.as_str()) {
                        " (edited since broodcast wrote it)"
                    } else {
                        ""
                    };
                    foreign.push(format!("'{rel}'{why}"));
                }
            }
        }
    }
    Ok(match total {
        0 => None,
        1 => Some(foreign.join("")),
        n => Some(format!("{n} such files, e.g. {}", foreign.join(", "))),
    })
}

/// The first free `<name>.replaced-<n>` beside `path` (n = 1, 2, …).
fn aside_name(path: &Path) -> PathBuf {
    let name = path
        .file_name()
        .map_or_else(|| "out".into(), |n| n.to_string_lossy().into_owned());
    (1u32..)
        .map(|n| path.with_file_name(format!("{name}.replaced-{n}")))
        .find(|p| fs::symlink_metadata(p).is_err())
        .unwrap_or_else(|| path.with_file_name(format!("{name}.replaced")))
}

/// Whether the file at `path` starts with the line `sig`.
fn starts_with_line(path: &Path, sig: &str) -> bool {
    use std::io::Read;
    let mut buf = vec![0u8; sig.len() + 1];
    let Ok(mut f) = fs::File::open(path) else {
        return false;
    };
    let mut read = 0;
    while read < buf.len() {
        match f.read(&mut buf[read..]) {
            Ok(0) => break,
            Ok(k) => read += k,
            Err(_) => return false,
        }
    }
    buf.truncate(read);
    buf.starts_with(sig.as_bytes()) && matches!(buf.get(sig.len()), Some(b'\n') | Some(b'\r'))
}

/// Creates and removes a probe file in the nearest existing folder above `path`, so that a
/// read-only or foreign folder is found before any work is done. Creates nothing that stays.
fn probe_parent(path: &Path) -> Result<(), TargetError> {
    let mut parent = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    while fs::symlink_metadata(&parent).is_err() {
        match parent.parent() {
            Some(p) if !p.as_os_str().is_empty() => parent = p.to_path_buf(),
            _ => {
                parent = PathBuf::from(".");
                break;
            }
        }
    }
    if !parent.is_dir() {
        return Err(TargetError::WrongKind {
            path: shown(path),
            why: format!("{} is a file, not a folder", shown(&parent)),
        });
    }
    let probe = parent.join(format!(".broodcast-probe-{}", std::process::id()));
    fs::write(&probe, b"").map_err(|source| TargetError::NotWritable {
        path: shown(path),
        parent: shown(&parent),
        source,
    })?;
    let _ = fs::remove_file(&probe);
    Ok(())
}

impl fmt::Display for FolderPlan {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            FolderPlan::New => f.write_str("new folder"),
            FolderPlan::Replace => f.write_str("replaces an earlier broodcast output"),
            FolderPlan::MoveAside(p) => write!(f, "moves the old folder to {}", p.display()),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::output::atomic::tests::entries as names;

    fn files(tag: &str) -> Vec<(String, Vec<u8>)> {
        vec![
            ("a.csv".into(), tag.as_bytes().to_vec()),
            ("sub/b.txt".into(), b"b".to_vec()),
        ]
    }

    #[test]
    fn a_new_folder_gets_the_files_and_a_marker() {
        let root = tempfile::tempdir().unwrap();
        let out = root.path().join("plan");
        let t = OutputFolder::check(&out, &[], false).unwrap();
        assert_eq!(t.plan, FolderPlan::New);
        let w = t.write(&files("1")).unwrap();
        assert_eq!(w.files, 2);
        assert_eq!(names(&out), [MARKER, "a.csv", "sub"]);
    }

    #[test]
    fn an_unchanged_broodcast_folder_is_replaced() {
        let root = tempfile::tempdir().unwrap();
        let out = root.path().join("plan");
        OutputFolder::check(&out, &[], false)
            .unwrap()
            .write(&files("1"))
            .unwrap();
        let t = OutputFolder::check(&out, &[], false).unwrap();
        assert_eq!(t.plan, FolderPlan::Replace);
        t.write(&files("2")).unwrap();
        assert_eq!(fs::read_to_string(out.join("a.csv")).unwrap(), "2");
        assert_eq!(names(root.path()), ["plan"]);
    }

    #[test]
    fn a_foreign_or_edited_file_blocks_replacement() {
        let root = tempfile::tempdir().unwrap();
        let out = root.path().join("plan");
        OutputFolder::check(&out, &[], false)
            .unwrap()
            .write(&files("1"))
            .unwrap();
        fs::write(out.join("notes.txt"), "mine").unwrap();
        let e = OutputFolder::check(&out, &[], false).unwrap_err();
        assert!(e.to_string().contains("'notes.txt'"), "{e}");
        fs::remove_file(out.join("notes.txt")).unwrap();
        // Same length, other content: an edit.
        fs::write(out.join("a.csv"), "9").unwrap();
        let e = OutputFolder::check(&out, &[], false).unwrap_err();
        assert!(e.to_string().contains("'a.csv' (edited"), "{e}");
        // A folder with no marker at all.
        let other = root.path().join("other");
        fs::create_dir_all(other.join("deep")).unwrap();
        fs::write(other.join("deep/x.xlsx"), "x").unwrap();
        let e = OutputFolder::check(&other, &[], false).unwrap_err();
        assert!(e.to_string().contains("'deep/x.xlsx'"), "{e}");
    }

    #[test]
    fn force_moves_the_old_folder_aside_and_deletes_nothing() {
        let root = tempfile::tempdir().unwrap();
        let out = root.path().join("rep");
        fs::create_dir(&out).unwrap();
        fs::write(out.join("budget.xlsx"), "keep me").unwrap();
        let t = OutputFolder::check(&out, &[], true).unwrap();
        // Nothing moves before the write.
        assert!(out.join("budget.xlsx").exists());
        let w = t.write(&files("1")).unwrap();
        let aside = root.path().join("rep.replaced-1");
        assert_eq!(w.moved_aside.as_deref(), Some(aside.as_path()));
        assert_eq!(
            fs::read_to_string(aside.join("budget.xlsx")).unwrap(),
            "keep me"
        );
        assert_eq!(fs::read_to_string(out.join("a.csv")).unwrap(), "1");
    }

    #[test]
    fn an_input_folder_and_its_parents_are_never_targets() {
        let root = tempfile::tempdir().unwrap();
        let week = root.path().join("parent/week10");
        fs::create_dir_all(&week).unwrap();
        fs::write(week.join("scenario.json"), "{}").unwrap();
        for out in [week.clone(), root.path().join("parent"), week.join("..")] {
            for force in [false, true] {
                let e = OutputFolder::check(&out, &[&week], force).unwrap_err();
                assert!(
                    matches!(e, TargetError::Forbidden { .. }),
                    "{}: {e}",
                    out.display()
                );
            }
        }
        // A folder inside the scenario folder is fine.
        OutputFolder::check(&week.join("out"), &[&week], false).unwrap();
        assert!(week.join("scenario.json").exists());
    }

    #[test]
    fn root_and_current_folder_are_refused() {
        for p in ["/", ".", "./", "..", "a/.."] {
            let e = OutputFolder::check(Path::new(p), &[], true).unwrap_err();
            assert!(matches!(e, TargetError::Forbidden { .. }), "{p}: {e}");
        }
    }

    #[test]
    fn a_file_where_a_folder_goes_is_refused_and_kept() {
        let root = tempfile::tempdir().unwrap();
        let out = root.path().join("plan");
        fs::write(&out, "x").unwrap();
        let e = OutputFolder::check(&out, &[], true).unwrap_err();
        assert!(e.to_string().contains("is a file"), "{e}");
        assert_eq!(fs::read_to_string(&out).unwrap(), "x");
    }

    #[test]
    fn a_file_target_is_overwritten_only_when_signed() {
        let root = tempfile::tempdir().unwrap();
        let p = root.path().join("model.mps");
        let body = format!("{MPS_SIGNATURE}\nNAME m\n");
        OutputFile::check(&p, &[], Some(MPS_SIGNATURE), false)
            .unwrap()
            .write(body.as_bytes())
            .unwrap();
        OutputFile::check(&p, &[], Some(MPS_SIGNATURE), false)
            .unwrap()
            .write(body.as_bytes())
            .unwrap();
        fs::write(&p, "NAME theirs\n").unwrap();
        let e = OutputFile::check(&p, &[], Some(MPS_SIGNATURE), false).unwrap_err();
        assert!(matches!(e, TargetError::ForeignFile { .. }), "{e}");
        let aside = OutputFile::check(&p, &[], Some(MPS_SIGNATURE), true)
            .unwrap()
            .write(body.as_bytes())
            .unwrap()
            .unwrap();
        assert_eq!(fs::read_to_string(aside).unwrap(), "NAME theirs\n");
        // A folder is not a file target; an input never is.
        let e = OutputFile::check(root.path(), &[], None, true).unwrap_err();
        assert!(e.to_string().contains("is a folder"), "{e}");
        let e = OutputFile::check(&p, &[&p], None, true).unwrap_err();
        assert!(matches!(e, TargetError::Forbidden { .. }), "{e}");
    }

    #[cfg(unix)]
    #[test]
    fn an_unwritable_parent_is_found_before_any_work() {
        use std::os::unix::fs::PermissionsExt;
        let root = tempfile::tempdir().unwrap();
        let ro = root.path().join("ro");
        fs::create_dir(&ro).unwrap();
        fs::set_permissions(&ro, fs::Permissions::from_mode(0o555)).unwrap();
        // root ignores permission bits; the check is meaningful only for other users.
        let probe = fs::write(ro.join("x"), b"");
        if probe.is_err() {
            let e = OutputFolder::check(&ro.join("out"), &[], false).unwrap_err();
            assert!(matches!(e, TargetError::NotWritable { .. }), "{e}");
        } else {
            fs::remove_file(ro.join("x")).unwrap();
        }
        fs::set_permissions(&ro, fs::Permissions::from_mode(0o755)).unwrap();
    }
}
