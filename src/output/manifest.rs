//! Result folders shared with the user's own files.
//!
//! qheat records what it wrote in every result folder: a small JSON file,
//! [`MANIFEST`], with the program version, the kind of result (`solve`,
//! `failed-solve`, `coefficients`, `sweep`, `screen`, `generator`,
//! `cooler`, ...) and the names of the files and folders it put there.
//! That record decides what a later run may do with the folder:
//!
//! - a missing or empty folder is created or filled;
//! - a folder whose every entry is listed in its manifest holds a previous
//!   qheat result and is replaced: the files that result wrote (its
//!   manifest) are removed and the new ones put in, and nothing else;
//! - a folder holding anything else (entries not in a manifest, or no
//!   manifest at all) is refused with [`OutputError::InTheWay`], unless the
//!   caller passes [`OtherFiles::KeepBeside`]: then the other entries are
//!   left where they are and only those with the same name as a file of
//!   the new result are overwritten. No other entry is ever removed or
//!   changed;
//! - a sweep's point store (the `points/` folder, see
//!   [`crate::sweep::store`]) is removed by no command: a command that does
//!   not keep a store is refused a folder holding one
//!   ([`OutputError::StoreInTheWay`]), and a sweep or screen into such a
//!   folder keeps it and adds to it.
//!
//! # What an interrupted run leaves
//!
//! A result is assembled in a hidden staging folder `.qheat-partial-PID`
//! inside the result folder (the folder itself is never renamed, so `-o .`
//! works), each file written through a temporary name and a rename. The
//! commit then
//!
//! 1. writes a manifest listing the old and the new entries together, so
//!    that every entry in the folder is accounted for at every instant;
//! 2. removes the old `summary.json`, then the other files of the old
//!    result that the new one does not write;
//! 3. renames the new files into place, `summary.json` last;
//! 4. writes the manifest of the new result alone and removes the empty
//!    staging folder.
//!
//! The guarantee is therefore: every file is whole (never half-written),
//! and while a `summary.json` is in the folder every file listed in the
//! manifest belongs to the same result as that `summary.json` (the point
//! store excepted, which is shared by the sweeps run into the folder, each
//! under its own fingerprint). A run killed before step 2 leaves the old
//! result untouched; a run killed during steps 2–3 leaves a folder without
//! `summary.json`, which nothing takes for a result, and whose entries are
//! all listed in its manifest, so the next run into it replaces them
//! without asking. The next run also removes the staging folders and
//! temporary files of runs that are no longer running. Staging folders of
//! a run that is still running make the folder busy
//! ([`OutputError::Busy`]).
//!
//! Earlier versions of qheat staged a whole folder beside the result
//! (`.NAME.partial-PID`) and moved the old one aside (`.NAME.old-PID`);
//! such leftovers of killed runs are still cleaned: a partial folder is
//! removed, and an `.old-` folder whose result folder is missing is put
//! back (it was a complete qheat result, so its entries are recorded in a
//! new manifest).

use super::{OutputError, atomic_write, io};
use std::collections::BTreeSet;
use std::fs;
use std::path::{Path, PathBuf};

/// File name of the record of what qheat wrote into a result folder.
pub const MANIFEST: &str = ".qheat-manifest.json";

/// Name prefix of the staging folder of a run (followed by its process id).
const PARTIAL: &str = ".qheat-partial-";

/// The folder of a sweep's point store inside its result folder.
pub const STORE: &str = super::sweep::STORE_FOLDER;

/// How many entries in the way an error names before giving a count.
const LISTED: usize = 10;

/// The record of a result folder.
#[derive(Clone, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Manifest {
    /// Program name and version that wrote the folder.
    pub program: serde_json::Value,
    /// The kind of result (`solve`, `sweep`, ...).
    pub kind: String,
    /// Names of the files and folders qheat wrote at the top of the folder.
    pub entries: BTreeSet<String>,
}

impl Manifest {
    /// A record of `entries` by this program.
    pub fn new(kind: &str, entries: BTreeSet<String>) -> Self {
        Self {
            program: super::results::program(),
            kind: kind.to_string(),
            entries,
        }
    }

    /// The manifest of `dir`, or `None` when it has none or it cannot be
    /// read as one (then nothing in the folder counts as qheat's).
    pub fn read(dir: &Path) -> Option<Self> {
        let text = fs::read_to_string(dir.join(MANIFEST)).ok()?;
        serde_json::from_str(&text).ok()
    }

    /// Write this record into `dir` (through a temporary file).
    pub fn write(&self, dir: &Path) -> Result<(), OutputError> {
        let text = serde_json::to_string_pretty(self).expect("JSON of plain values");
        atomic_write(&dir.join(MANIFEST), text.as_bytes())
    }
}

/// What to do with entries of a result folder that qheat did not write.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum OtherFiles {
    /// Refuse to write into a folder holding any (the default).
    #[default]
    Refuse,
    /// Leave them in place and write beside them; an entry with the same
    /// name as a file of the new result is overwritten by it.
    KeepBeside,
}

/// How a result is written into its folder.
#[derive(Clone, Debug)]
pub struct FolderOptions {
    /// Kind of result recorded in the manifest.
    pub kind: String,
    /// Entries qheat did not write: refused or kept.
    pub other_files: OtherFiles,
    /// True for commands that keep a sweep's point store and add to it
    /// (sweep, screen); every other command is refused a folder with one.
    pub keeps_store: bool,
}

impl FolderOptions {
    /// Options for a result of `kind` that refuses other files and keeps
    /// no point store.
    pub fn new(kind: &str) -> Self {
        Self {
            kind: kind.to_string(),
            other_files: OtherFiles::Refuse,
            keeps_store: false,
        }
    }

    /// The same with `other_files`.
    pub fn other_files(mut self, other_files: OtherFiles) -> Self {
        self.other_files = other_files;
        self
    }

    /// The same keeping (and adding to) a sweep's point store.
    pub fn keeping_store(mut self) -> Self {
        self.keeps_store = true;
        self
    }
}

impl Default for FolderOptions {
    fn default() -> Self {
        Self::new("result")
    }
}

/// "3 entries" / "1 entry".
fn entries_word(n: usize) -> &'static str {
    if n == 1 { "entry" } else { "entries" }
}

/// The first few names and how many more there are, for messages.
pub(crate) fn list_names(names: &[String]) -> String {
    let mut text = names
        .iter()
        .take(LISTED)
        .map(String::as_str)
        .collect::<Vec<_>>()
        .join(", ");
    if names.len() > LISTED {
        text.push_str(&format!(" and {} more", names.len() - LISTED));
    }
    text
}

pub(crate) fn in_the_way_message(dir: &Path, entries: &[String]) -> String {
    format!(
        "the result folder {} holds {} {} that qheat did not write: {}",
        dir.display(),
        entries.len(),
        entries_word(entries.len()),
        list_names(entries)
    )
}

/// True when a process with this id is running. Linux answers through
/// /proc; elsewhere nothing can be told.
fn process_alive(pid: u32) -> Option<bool> {
    if !Path::new("/proc/self").exists() {
        return None;
    }
    Some(Path::new("/proc").join(pid.to_string()).exists())
}

/// Staging folders and temporary files older than this are abandoned
/// where process ids cannot be checked.
const ABANDONED_AFTER: std::time::Duration = std::time::Duration::from_secs(24 * 3600);

/// True when the run `pid` that made `entry` is over.
fn abandoned(pid: u32, entry: &fs::DirEntry) -> bool {
    if pid == std::process::id() {
        return false;
    }
    match process_alive(pid) {
        Some(alive) => !alive,
        None => entry
            .metadata()
            .and_then(|m| m.modified())
            .ok()
            .and_then(|t| t.elapsed().ok())
            .is_some_and(|age| age > ABANDONED_AFTER),
    }
}

/// The process id of a temporary file `.NAME.tmp-PID` written by
/// [`atomic_write`].
fn temporary_pid(name: &str) -> Option<u32> {
    if !name.starts_with('.') {
        return None;
    }
    let (_, pid) = name.rsplit_once(".tmp-")?;
    pid.parse().ok()
}

/// Remove what killed runs of older versions left beside `final_dir`:
/// `.NAME.partial-PID` folders (never complete, so never a result) and
/// `.NAME.old-PID` folders. An `.old-` folder is a previous complete
/// result moved aside in the instant between two renames; if the final
/// folder is missing it is put back (with a manifest of its entries)
/// rather than removed. Folders of a process that is still running are
/// left alone.
fn clean_beside(final_dir: &Path) -> Result<(), OutputError> {
    let Some(name) = final_dir
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
    else {
        return Ok(());
    };
    let parent = final_dir
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let Ok(entries) = fs::read_dir(parent) else {
        return Ok(());
    };
    let partial = format!(".{name}.partial-");
    let old = format!(".{name}.old-");
    for entry in entries.flatten() {
        let file_name = entry.file_name().to_string_lossy().into_owned();
        let (is_old, pid) = if let Some(p) = file_name.strip_prefix(&partial) {
            (false, p)
        } else if let Some(p) = file_name.strip_prefix(&old) {
            (true, p)
        } else {
            continue;
        };
        let Ok(pid) = pid.parse::<u32>() else {
            continue;
        };
        if !abandoned(pid, &entry) {
            continue;
        }
        let path = entry.path();
        if is_old && !final_dir.exists() {
            fs::rename(&path, final_dir).map_err(io("restoring", final_dir))?;
            if Manifest::read(final_dir).is_none() {
                let entries = fs::read_dir(final_dir)
                    .map_err(io("listing", final_dir))?
                    .flatten()
                    .map(|e| e.file_name().to_string_lossy().into_owned())
                    .filter(|n| n != MANIFEST)
                    .collect();
                Manifest::new("restored", entries).write(final_dir)?;
            }
        } else {
            fs::remove_dir_all(&path).map_err(io("removing abandoned", &path))?;
        }
    }
    Ok(())
}

/// What is in a result folder.
#[derive(Debug, Default)]
struct Survey {
    /// Its manifest, if it has a readable one.
    manifest: Option<Manifest>,
    /// Entries listed in the manifest (present or not).
    owned: BTreeSet<String>,
    /// Entries present and not listed, sorted.
    others: Vec<String>,
    /// True when a point store is present and listed.
    store: bool,
}

/// Remove the staging folders and temporary files of finished runs from
/// `dir`, then sort its entries into qheat's and the others. Errors when
/// another run is writing into it.
fn survey(dir: &Path) -> Result<Survey, OutputError> {
    let mut survey = Survey::default();
    if !dir.exists() {
        return Ok(survey);
    }
    let entries = fs::read_dir(dir).map_err(io("listing", dir))?;
    survey.manifest = Manifest::read(dir);
    if let Some(m) = &survey.manifest {
        survey.owned = m.entries.clone();
    }
    let me = std::process::id();
    for entry in entries {
        let entry = entry.map_err(io("listing", dir))?;
        let name = entry.file_name().to_string_lossy().into_owned();
        if name == MANIFEST && survey.manifest.is_some() {
            continue;
        }
        if let Some(pid) = name
            .strip_prefix(PARTIAL)
            .and_then(|p| p.parse::<u32>().ok())
        {
            if pid == me {
                continue;
            }
            if abandoned(pid, &entry) {
                let path = entry.path();
                fs::remove_dir_all(&path).map_err(io("removing abandoned", &path))?;
                continue;
            }
            return Err(OutputError::Busy {
                dir: dir.to_path_buf(),
                pid,
            });
        }
        if let Some(pid) = temporary_pid(&name) {
            if abandoned(pid, &entry) {
                let path = entry.path();
                fs::remove_file(&path).map_err(io("removing abandoned", &path))?;
            }
            // A live run's temporary file is renamed or removed shortly.
            continue;
        }
        if survey.owned.contains(&name) {
            survey.store |= name == STORE;
        } else {
            survey.others.push(name);
        }
    }
    survey.others.sort();
    Ok(survey)
}

/// Check that a result with `options` may be written into `dir`, cleaning
/// what killed runs left there. Nothing else is changed and a missing
/// folder is not created.
pub fn check_folder(dir: &Path, options: &FolderOptions) -> Result<(), OutputError> {
    admit(dir, options).map(|_| ())
}

fn admit(dir: &Path, options: &FolderOptions) -> Result<Survey, OutputError> {
    clean_beside(dir)?;
    let survey = survey(dir)?;
    if survey.store && !options.keeps_store {
        return Err(OutputError::StoreInTheWay {
            dir: dir.to_path_buf(),
            store: dir.join(STORE),
            kind: options.kind.clone(),
        });
    }
    if !survey.others.is_empty() && options.other_files == OtherFiles::Refuse {
        return Err(OutputError::InTheWay {
            dir: dir.to_path_buf(),
            entries: survey.others,
        });
    }
    Ok(survey)
}

/// Record in the manifest of `dir` that qheat keeps a point store there,
/// before the first point is written, so the store is never taken for
/// somebody else's folder. The folder is checked as for a result with
/// `options` (which must keep a store) and created if missing.
pub fn claim_store(dir: &Path, options: &FolderOptions) -> Result<(), OutputError> {
    debug_assert!(options.keeps_store);
    let survey = admit(dir, options)?;
    fs::create_dir_all(dir).map_err(io("creating", dir))?;
    let mut manifest = survey
        .manifest
        .unwrap_or_else(|| Manifest::new(&options.kind, BTreeSet::new()));
    if manifest.entries.insert(STORE.to_string()) {
        manifest.write(dir)?;
    }
    Ok(())
}

/// Add the file `name` to the result in `dir` (e.g. a report of it),
/// recording it in the manifest first. A file of that name that qheat did
/// not write is never overwritten ([`OutputError::InTheWay`]).
pub fn add_file(dir: &Path, name: &str, bytes: &[u8]) -> Result<PathBuf, OutputError> {
    let survey = survey(dir)?;
    if survey.others.iter().any(|n| n == name) {
        return Err(OutputError::InTheWay {
            dir: dir.to_path_buf(),
            entries: vec![name.to_string()],
        });
    }
    let mut manifest = survey
        .manifest
        .unwrap_or_else(|| Manifest::new("report", BTreeSet::new()));
    if manifest.entries.insert(name.to_string()) {
        manifest.write(dir)?;
    }
    let path = dir.join(name);
    atomic_write(&path, bytes)?;
    Ok(path)
}

/// A result being assembled for its folder.
pub struct Staging {
    final_dir: PathBuf,
    dir: PathBuf,
    options: FolderOptions,
}

impl Staging {
    /// Start assembling a result in `final_dir` with the default options
    /// (other files refused, no point store kept).
    pub fn new(final_dir: &Path) -> Result<Self, OutputError> {
        Self::with_options(final_dir, &FolderOptions::default())
    }

    /// Start assembling a result in `final_dir` (created with its parents
    /// if missing) after checking that it may take it.
    pub fn with_options(final_dir: &Path, options: &FolderOptions) -> Result<Self, OutputError> {
        admit(final_dir, options)?;
        fs::create_dir_all(final_dir).map_err(io("creating", final_dir))?;
        let dir = final_dir.join(format!("{PARTIAL}{}", std::process::id()));
        if dir.exists() {
            fs::remove_dir_all(&dir).map_err(io("clearing", &dir))?;
        }
        fs::create_dir(&dir).map_err(io("creating", &dir))?;
        Ok(Self {
            final_dir: final_dir.to_path_buf(),
            dir,
            options: options.clone(),
        })
    }

    /// Path of a file inside the staging folder.
    pub fn path(&self, name: &str) -> PathBuf {
        self.dir.join(name)
    }

    /// Write one file into the staging folder.
    pub fn write(&self, name: &str, bytes: &[u8]) -> Result<(), OutputError> {
        atomic_write(&self.path(name), bytes)
    }

    /// Put the staged files into the result folder in place of the previous
    /// result (see the module documentation for the order and what an
    /// interruption leaves).
    pub fn commit(self) -> Result<PathBuf, OutputError> {
        let d = &self.final_dir;
        // Checked again: the folder may have changed during a long run.
        let survey = admit(d, &self.options)?;
        let mut staged: Vec<String> = fs::read_dir(&self.dir)
            .map_err(io("listing", &self.dir))?
            .flatten()
            .map(|e| e.file_name().to_string_lossy().into_owned())
            .filter(|n| temporary_pid(n).is_none())
            .collect();
        staged.sort();
        let mut entries: BTreeSet<String> = staged.iter().cloned().collect();
        if self.options.keeps_store && d.join(STORE).exists() {
            entries.insert(STORE.to_string());
        }
        // 1. Every entry, old or new, is accounted for.
        let both = Manifest::new(&self.options.kind, &survey.owned | &entries);
        both.write(d)?;
        // 2. The old result stops looking whole, then goes.
        let summary = "summary.json";
        let remove = |name: &str| -> Result<(), OutputError> {
            let path = d.join(name);
            match fs::symlink_metadata(&path) {
                Ok(m) if m.is_dir() => {
                    fs::remove_dir_all(&path).map_err(io("removing previous", &path))
                }
                Ok(_) => fs::remove_file(&path).map_err(io("removing previous", &path)),
                Err(_) => Ok(()),
            }
        };
        if survey.owned.contains(summary) || entries.contains(summary) {
            remove(summary)?;
        }
        for name in survey.owned.difference(&entries) {
            remove(name)?;
        }
        // 3. The new files, summary.json last.
        for name in staged
            .iter()
            .filter(|n| *n != summary)
            .chain(staged.iter().filter(|n| *n == summary))
        {
            let to = d.join(name);
            fs::rename(self.dir.join(name), &to).map_err(io("renaming into place", &to))?;
        }
        // 4. The record of the new result alone.
        Manifest::new(&self.options.kind, entries).write(d)?;
        fs::remove_dir_all(&self.dir).map_err(io("removing", &self.dir))?;
        Ok(d.clone())
    }
}

impl Drop for Staging {
    fn drop(&mut self) {
        // An abandoned staging folder (error path) is removed; after commit
        // it no longer exists.
        let _ = fs::remove_dir_all(&self.dir);
    }
}
