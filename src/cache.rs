//! The opt-in cache (`--cache DIR`): each file's lowered IR, stored under the SHA-256 of
//! the file's bytes and of the running build's identity, so that a second scan of an
//! unchanged file skips tree-sitter and the lowering; and the whole program's index and
//! recognition, stored under the hash of every file's entry, its path and the options, so
//! that a second scan of an unchanged tree skips them too (one changed file changes that
//! key, and the files' entries still spare their parse).
//!
//! Safe to delete at any time, and never trusted beyond its key: an entry that is missing,
//! unreadable, truncated or from another build is parsed again and rewritten. Entries are
//! written through a temporary file and a rename, so concurrent scans sharing one folder
//! see whole entries or none. The cache changes how fast a scan is, never what it finds;
//! `tests/cache.rs` holds it to that.

use crate::index::{Program, ProgramOptions};
use crate::ir::{FileId, FileIr};
use crate::recognise::{RecogniseOptions, Recognition};
use sha2::{Digest, Sha256};
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

/// Bumped when the entry layout changes in a way the build's identity would not show.
const LAYOUT: &[u8] = b"tauscan-ir-cache-3";
/// The same for the whole-program entries.
const PROGRAM_LAYOUT: &[u8] = b"tauscan-program-cache-2";

/// A cache folder, ready to use.
#[derive(Debug, Clone)]
pub struct Cache {
    dir: PathBuf,
}

impl Cache {
    /// Opens the cache folder `dir`, creating it when its parent exists (a mistyped deep
    /// path is an error, not a new tree of folders).
    pub fn open(dir: &Path) -> std::io::Result<Cache> {
        use std::io::{Error, ErrorKind};
        match std::fs::metadata(dir) {
            Ok(meta) if meta.is_dir() => {}
            Ok(_) => {
                return Err(Error::new(
                    ErrorKind::AlreadyExists,
                    "it is a file, not a folder",
                ))
            }
            Err(_) => {
                let parent = dir
                    .parent()
                    .filter(|p| !p.as_os_str().is_empty())
                    .unwrap_or(Path::new("."));
                if !parent.is_dir() {
                    return Err(Error::new(
                        ErrorKind::NotFound,
                        format!(
                            "its parent folder {} does not exist (create it first)",
                            parent.display()
                        ),
                    ));
                }
                // Another job may have made it in the meantime.
                if let Err(e) = std::fs::create_dir(dir) {
                    if !dir.is_dir() {
                        return Err(e);
                    }
                }
            }
        }
        Ok(Cache {
            dir: dir.to_path_buf(),
        })
    }

    /// The entry for a file with these bytes (the bytes are hashed once, here).
    pub fn entry(&self, bytes: &[u8]) -> Entry {
        let mut hasher = Sha256::new();
        hasher.update(LAYOUT);
        hasher.update(build_id());
        hasher.update((bytes.len() as u64).to_le_bytes());
        hasher.update(bytes);
        let digest: [u8; 32] = hasher.finalize().into();
        let hex = hex(&digest);
        Entry {
            path: self.dir.join(&hex[..2]).join(format!("{}.ir", &hex[2..])),
            digest,
        }
    }

    /// The entry for a whole program: these files (each by its path and its entry's
    /// digest, in scan order) analysed with these options.
    pub fn program_entry(
        &self,
        files: &[(&str, &Entry)],
        program: &ProgramOptions,
        recognise: &RecogniseOptions,
    ) -> Entry {
        let mut hasher = Sha256::new();
        hasher.update(PROGRAM_LAYOUT);
        hasher.update(build_id());
        // Both option sets print in a fixed order (ordered maps, no hash maps).
        for text in [format!("{program:?}"), format!("{recognise:?}")] {
            hasher.update((text.len() as u64).to_le_bytes());
            hasher.update(text.as_bytes());
        }
        hasher.update((files.len() as u64).to_le_bytes());
        for (path, entry) in files {
            hasher.update((path.len() as u64).to_le_bytes());
            hasher.update(path.as_bytes());
            hasher.update(entry.digest);
        }
        let digest: [u8; 32] = hasher.finalize().into();
        let hex = hex(&digest);
        Entry {
            path: self.dir.join("program").join(format!("{hex}.bin")),
            digest,
        }
    }

    /// The program and recognition stored in `entry`, given the files, paths and options
    /// they were made from (which the entry's key holds), when it is there, reads and fits
    /// the files; else the files come back for a fresh build.
    pub fn load_program(
        &self,
        entry: &Entry,
        files: Vec<FileIr>,
        paths: Vec<String>,
        options: ProgramOptions,
    ) -> Result<(Program, Recognition), Unbuilt> {
        let stored = std::fs::read(&entry.path).ok();
        let read: Option<(Program, Recognition)> =
            stored.and_then(|bytes| postcard::from_bytes(&bytes).ok());
        match read {
            Some((mut program, recognition))
                if program.fits(&files) && recognition_fits(&recognition, &files) =>
            {
                if program.restore_call_arguments(&files) {
                    Ok((program.attach(files, paths, options), recognition))
                } else {
                    Err((files, paths, options))
                }
            }
            _ => Err((files, paths, options)),
        }
    }

    /// Stores a program's tables and recognition in `entry` (failures only mean a slower
    /// next scan).
    pub fn store_program(&self, entry: &Entry, program: &Program, recognition: &Recognition) {
        let Ok(encoded) = postcard::to_stdvec(&(program, recognition)) else {
            return;
        };
        self.write(&entry.path, &encoded);
        if let Some(folder) = entry.path.parent() {
            prune(folder, PROGRAMS_KEPT);
        }
    }

    fn write(&self, path: &Path, bytes: &[u8]) {
        if let Some(folder) = path.parent() {
            if std::fs::create_dir_all(folder).is_err() {
                return;
            }
        }
        let _ = crate::report::write_atomically(path, bytes);
    }

    /// The IR stored in `entry`, as file `file` of this scan, when it is there and reads.
    pub fn load(&self, entry: &Entry, file: FileId) -> Option<FileIr> {
        let stored = std::fs::read(&entry.path).ok()?;
        let mut ir: FileIr =
            crate::ir::with_file_id(file, || postcard::from_bytes(&stored)).ok()?;
        ir.file = file;
        if !ir.functions.iter().all(|f| f.body.reads_back()) {
            return None;
        }
        ir.share_conditions();
        Some(ir)
    }

    /// Stores `ir` in `entry`. Failures (a full disk, a read-only folder) only mean a
    /// slower next scan, so they are not reported.
    pub fn store(&self, entry: &Entry, ir: &FileIr) {
        let Ok(encoded) = postcard::to_stdvec(ir) else {
            return;
        };
        self.write(&entry.path, &encoded);
    }
}

/// Whether a recognition read back from a cache names only these files, their functions
/// and its own smoothers.
fn recognition_fits(recognition: &Recognition, files: &[FileIr]) -> bool {
    let file = |id: FileId| (id.0 as usize) < files.len();
    let n = recognition.smoothers.len();
    recognition.smoothers.iter().all(|s| {
        file(s.span.file)
            && s.definition.is_none_or(|d| file(d.file))
            && s.function_ref.is_none_or(|r| {
                files
                    .get(r.file)
                    .is_some_and(|f| r.index < f.functions.len())
            })
            && s.upstream.is_none_or(|u| u < n)
    }) && recognition.notes.iter().all(|note| file(note.span.file))
}

/// What a program is built from, handed back when no entry serves it.
pub type Unbuilt = (Vec<FileIr>, Vec<String>, ProgramOptions);

/// Whole-program entries kept: each is the size of the tree's index (megabytes on a large
/// tree), and a CI cache folder sees a new tree with every change.
const PROGRAMS_KEPT: usize = 4;

/// Deletes all but the `keep` newest `.bin` entries of `folder` (a scan reading one that
/// goes only builds its program again).
fn prune(folder: &Path, keep: usize) {
    let Ok(listing) = std::fs::read_dir(folder) else {
        return;
    };
    let mut found: Vec<(std::time::SystemTime, PathBuf)> = listing
        .filter_map(|e| e.ok())
        .map(|e| e.path())
        .filter(|p| p.extension().is_some_and(|x| x == "bin"))
        .filter_map(|p| Some((std::fs::metadata(&p).ok()?.modified().ok()?, p)))
        .collect();
    found.sort_by(|a, b| b.0.cmp(&a.0).then_with(|| a.1.cmp(&b.1)));
    for (_, path) in found.into_iter().skip(keep) {
        let _ = std::fs::remove_file(path);
    }
}

fn hex(digest: &[u8]) -> String {
    digest.iter().map(|b| format!("{b:02x}")).collect()
}

/// Where the IR of one file's bytes (or a whole program's index) is kept in a cache
/// folder, and the digest that names it.
#[derive(Debug, Clone)]
pub struct Entry {
    path: PathBuf,
    digest: [u8; 32],
}

/// The identity of the running build: tauscan's version and the running executable's
/// path, size and modification time, so that an entry written by another build (another
/// lowering) is never read back. (Hashing the executable's bytes would cost more than a
/// small scan; a rebuild always changes the time.) Computed once per process.
fn build_id() -> &'static [u8] {
    static ID: OnceLock<Vec<u8>> = OnceLock::new();
    ID.get_or_init(|| {
        let mut hasher = Sha256::new();
        hasher.update(env!("CARGO_PKG_VERSION").as_bytes());
        let exe = std::env::current_exe();
        let stamp = exe.as_ref().ok().and_then(|path| {
            let meta = std::fs::metadata(path).ok()?;
            let modified = meta
                .modified()
                .ok()?
                .duration_since(std::time::UNIX_EPOCH)
                .ok()?;
            Some((path.to_string_lossy().into_owned(), meta.len(), modified))
        });
        match stamp {
            Some((path, len, modified)) => {
                hasher.update(path.as_bytes());
                hasher.update(len.to_le_bytes());
                hasher.update(modified.as_nanos().to_le_bytes());
            }
            // Without a stamp a build cannot be told from another: a fresh salt keeps
            // entries to this process rather than risk a stale one.
            None => hasher.update(
                std::time::SystemTime::now()
                    .duration_since(std::time::UNIX_EPOCH)
                    .map(|d| d.as_nanos())
                    .unwrap_or(0)
                    .to_le_bytes(),
            ),
        }
        hasher.finalize().to_vec()
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_entry_comes_back_as_the_file_of_this_scan() {
        let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
        let cache = Cache::open(dir.path()).unwrap_or_else(|e| panic!("{e}"));
        let source = b"static int y;\nvoid f(int u) { y += (u - y) >> 3; }\n";
        let ir = crate::parse::parse_file(FileId(3), source);
        cache.store(&cache.entry(source), &ir);
        let back = cache
            .load(&cache.entry(source), FileId(7))
            .unwrap_or_else(|| panic!("no entry"));
        assert_eq!(back.file, FileId(7));
        let mut fresh = crate::parse::parse_file(FileId(7), source);
        // Bodies come back parked, and read back as this scan's file.
        for (b, f) in back.functions.iter().zip(&fresh.functions) {
            assert!(matches!(b.body, crate::ir::Body::Parked(_)));
            assert_eq!(format!("{:?}", &*b.body()), format!("{:?}", &*f.body()));
        }
        assert!(format!("{:?}", &*back.functions[0].body()).contains("FileId(7)"));
        for f in &mut fresh.functions {
            f.body.park();
        }
        assert_eq!(format!("{back:?}"), format!("{fresh:?}"));
        // Other bytes are another entry.
        assert!(cache.load(&cache.entry(b"int x;\n"), FileId(7)).is_none());
    }

    #[test]
    fn a_program_entry_is_used_only_for_files_it_fits() {
        let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
        let cache = Cache::open(dir.path()).unwrap_or_else(|e| panic!("{e}"));
        let two = b"static int y, z;\nvoid f(int u) { y += (u - y) >> 3; }\nvoid g(int u) { z += (u - z) >> 2; f(u); }\n";
        let one = b"static int y;\nvoid f(int u) { y += (u - y) >> 3; }\n";
        let options = ProgramOptions::default();
        let program = Program::build(
            vec![crate::parse::parse_file(FileId(0), two)],
            vec!["vent.c".into()],
            options.clone(),
        );
        let recognition = crate::recognise::recognise(&program, &RecogniseOptions::default());
        let file_entry = cache.entry(two);
        let entry = cache.program_entry(
            &[("vent.c", &file_entry)],
            &options,
            &RecogniseOptions::default(),
        );
        cache.store_program(&entry, &program, &recognition);
        // The files it was made from: served, with the same smoothers.
        let served = cache.load_program(
            &entry,
            vec![crate::parse::parse_file(FileId(0), two)],
            vec!["vent.c".into()],
            options.clone(),
        );
        match served {
            Ok((_, back)) => assert_eq!(back.smoothers, recognition.smoothers),
            Err(_) => panic!("the entry was not served for its own files"),
        }
        // Files of another shape (one function where it holds two): refused, handed back.
        let refused = cache.load_program(
            &entry,
            vec![crate::parse::parse_file(FileId(0), one)],
            vec!["vent.c".into()],
            options,
        );
        match refused {
            Ok(_) => panic!("an entry was served for files it does not fit"),
            Err((files, paths, _)) => {
                assert_eq!(files.len(), 1);
                assert_eq!(paths, vec!["vent.c".to_string()]);
            }
        }
    }

    #[test]
    fn a_damaged_entry_is_not_used() {
        let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
        let cache = Cache::open(dir.path()).unwrap_or_else(|e| panic!("{e}"));
        let source = b"static float y;\nvoid f(float u) { y += 0.1f * (u - y); }\n";
        let entry = cache.entry(source);
        cache.store(&entry, &crate::parse::parse_file(FileId(0), source));
        let stored = std::fs::read(&entry.path).unwrap_or_else(|e| panic!("{e}"));
        std::fs::write(&entry.path, &stored[..stored.len() / 2]).unwrap_or_else(|e| panic!("{e}"));
        assert!(cache.load(&entry, FileId(0)).is_none());
    }
}
