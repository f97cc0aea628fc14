//! A JSON compilation database (`compile_commands.json`): the files the real build
//! compiles and the `-D` and `-I` flags it compiles them with, so `#if` branches and
//! headers are those of the build.
//!
//! tauscan analyses the program as a whole, so the defines of all entries are merged (the
//! first value of a name wins and a disagreement is reported); the files to read are the
//! entries' sources plus the headers in their include folders.

use serde::Deserialize;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

#[derive(Deserialize)]
struct RawEntry {
    directory: String,
    file: String,
    #[serde(default)]
    command: Option<String>,
    #[serde(default)]
    arguments: Option<Vec<String>>,
}

#[derive(Debug, Clone, PartialEq, Default)]
pub struct Database {
    /// Source files, absolute or relative to the current folder.
    pub files: Vec<PathBuf>,
    /// Include folders (their headers are read too).
    pub include_dirs: Vec<PathBuf>,
    pub defines: BTreeMap<String, String>,
    /// Names defined to different values by different entries.
    pub conflicts: Vec<String>,
}

/// Splits a shell command line into words (quotes and backslashes, as POSIX sh does for
/// the common cases compilation databases hold).
pub fn split_command(command: &str) -> Vec<String> {
    let mut words = Vec::new();
    let mut word = String::new();
    let mut in_word = false;
    let mut quote: Option<char> = None;
    let mut chars = command.chars();
    while let Some(c) = chars.next() {
        match (quote, c) {
            (Some(q), c) if c == q => quote = None,
            (Some('"'), '\\') => {
                if let Some(n) = chars.next() {
                    word.push(n);
                }
            }
            (Some(_), c) => word.push(c),
            (None, '\'') | (None, '"') => {
                quote = Some(c);
                in_word = true;
            }
            (None, '\\') => {
                if let Some(n) = chars.next() {
                    word.push(n);
                    in_word = true;
                }
            }
            (None, c) if c.is_whitespace() => {
                if in_word {
                    words.push(std::mem::take(&mut word));
                    in_word = false;
                }
            }
            (None, c) => {
                word.push(c);
                in_word = true;
            }
        }
    }
    if in_word {
        words.push(word);
    }
    words
}

/// Reads a compilation database's text; `base` is the folder of the file, for entries
/// whose `directory` is relative.
pub fn from_str(text: &str, base: &Path) -> Result<Database, String> {
    let entries: Vec<RawEntry> =
        serde_json::from_str(text).map_err(|e| format!("not a JSON compilation database: {e}"))?;
    let mut db = Database::default();
    for entry in entries {
        let dir = {
            let d = PathBuf::from(&entry.directory);
            if d.is_absolute() {
                d
            } else {
                base.join(d)
            }
        };
        let file = {
            let f = PathBuf::from(&entry.file);
            if f.is_absolute() {
                f
            } else {
                dir.join(f)
            }
        };
        if !db.files.contains(&file) {
            db.files.push(file);
        }
        let words = match (&entry.arguments, &entry.command) {
            (Some(args), _) => args.clone(),
            (None, Some(cmd)) => split_command(cmd),
            (None, None) => Vec::new(),
        };
        let mut i = 0;
        while i < words.len() {
            let w = &words[i];
            let (flag, value) = if (w == "-D" || w == "-I") && i + 1 < words.len() {
                i += 1;
                (w.as_str(), words[i].clone())
            } else if let Some(rest) = w.strip_prefix("-D") {
                ("-D", rest.to_string())
            } else if let Some(rest) = w.strip_prefix("-I") {
                ("-I", rest.to_string())
            } else {
                i += 1;
                continue;
            };
            i += 1;
            match flag {
                "-D" => {
                    let (name, v) = match value.split_once('=') {
                        Some((n, v)) => (n.to_string(), v.to_string()),
                        None => (value.clone(), "1".to_string()),
                    };
                    match db.defines.get(&name) {
                        Some(old) if *old != v => {
                            if !db.conflicts.contains(&name) {
                                db.conflicts.push(name);
                            }
                        }
                        Some(_) => {}
                        None => {
                            db.defines.insert(name, v);
                        }
                    }
                }
                _ => {
                    let inc = PathBuf::from(&value);
                    let inc = if inc.is_absolute() {
                        inc
                    } else {
                        dir.join(inc)
                    };
                    if !db.include_dirs.contains(&inc) {
                        db.include_dirs.push(inc);
                    }
                }
            }
        }
    }
    Ok(db)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn commands_and_arguments_give_files_defines_and_includes() {
        let text = r#"[
          {"directory": "/fw/build", "file": "../src/kiln.c",
           "command": "arm-none-eabi-gcc -DKILN_FAST=1 -D BOARD_REV=3 -I../inc -Wall -c ../src/kiln.c"},
          {"directory": "/fw/build", "file": "/fw/src/vent.c",
           "arguments": ["cc", "-DKILN_FAST=2", "-I", "/fw/drivers", "-c", "/fw/src/vent.c"]}
        ]"#;
        let db = from_str(text, Path::new("/")).unwrap();
        assert_eq!(db.files.len(), 2);
        assert_eq!(db.defines["KILN_FAST"], "1");
        assert_eq!(db.defines["BOARD_REV"], "3");
        assert_eq!(db.conflicts, vec!["KILN_FAST".to_string()]);
        assert_eq!(db.include_dirs.len(), 2);
        assert!(from_str("{}", Path::new("/")).is_err());
    }

    #[test]
    fn shell_words_follow_quotes() {
        assert_eq!(
            split_command(r#"cc "-DNAME=\"a b\"" -DX='1 2' a\ b.c"#),
            vec!["cc", "-DNAME=\"a b\"", "-DX=1 2", "a b.c"]
        );
    }
}
