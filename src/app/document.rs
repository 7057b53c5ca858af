//! The scenario being edited: the file, where it lives, whether it is saved, and the undo
//! history. History entries are whole-file snapshots: scenarios are small, and a snapshot can
//! never drift from what it restores. A gesture (a drag, a typed number) makes one entry,
//! however many frames it lasts.

use std::path::{Path, PathBuf};

use crate::scenario::{self, ScenarioError, ScenarioFile};

/// Most undo steps kept.
const HISTORY: usize = 200;

#[derive(Debug, Clone)]
pub struct Document {
    pub file: ScenarioFile,
    /// Where the scenario was opened from or last saved to (for a new or unreadable scenario,
    /// where it would go: its folder is where relative dataset paths start).
    pub path: PathBuf,
    /// Not yet saved anywhere, or its file could not be read: Save asks where (it must never
    /// overwrite a file the window could not read).
    pub untitled: bool,
    /// The file as last opened or saved (to tell unsaved changes).
    saved: ScenarioFile,
    undo: Vec<ScenarioFile>,
    redo: Vec<ScenarioFile>,
    /// Inside a gesture: further edits join the entry made when it began.
    in_gesture: bool,
    /// Changes made (edits, undos, redos): ever, and since the file was last opened or saved.
    changes: u64,
    changes_since_save: usize,
}

impl Document {
    /// Read a scenario file (the dataset is read by the engine, so a missing dataset is
    /// reported there and the text stays editable).
    pub fn open(path: &Path) -> Result<Document, ScenarioError> {
        let file = scenario::read(path)?;
        Ok(Document::from_file(file, path.to_path_buf()))
    }

    pub fn from_file(file: ScenarioFile, path: PathBuf) -> Document {
        Document {
            saved: file.clone(),
            file,
            path,
            untitled: false,
            undo: Vec::new(),
            redo: Vec::new(),
            in_gesture: false,
            changes: 0,
            changes_since_save: 0,
        }
    }

    /// A number that grows with every change (to tell whether the recovery file is behind).
    pub fn changes(&self) -> u64 {
        self.changes
    }

    /// Changes since the file was last opened or saved.
    pub fn changes_since_save(&self) -> usize {
        self.changes_since_save
    }

    fn changed(&mut self) {
        self.changes += 1;
        self.changes_since_save += 1;
    }

    /// Apply an edit as one undo step (or as part of the current gesture).
    pub fn edit(&mut self, change: impl FnOnce(&mut ScenarioFile)) {
        let before = self.file.clone();
        change(&mut self.file);
        if self.file == before {
            return;
        }
        self.changed();
        if !self.in_gesture || self.undo.is_empty() {
            self.undo.push(before);
            if self.undo.len() > HISTORY {
                self.undo.remove(0);
            }
        }
        self.redo.clear();
    }

    /// Start a gesture: the first edit inside it makes the undo step; later ones join it.
    /// (The redo branch goes only when an edit is made: focusing a field keeps it.)
    pub fn begin_gesture(&mut self) {
        if !self.in_gesture {
            self.undo.push(self.file.clone());
            self.in_gesture = true;
        }
    }

    /// End a gesture; a gesture that changed nothing leaves no undo step.
    pub fn end_gesture(&mut self) {
        if self.in_gesture {
            self.in_gesture = false;
            if self.undo.last() == Some(&self.file) {
                self.undo.pop();
            }
        }
    }

    pub fn in_gesture(&self) -> bool {
        self.in_gesture
    }

    pub fn can_undo(&self) -> bool {
        !self.undo.is_empty()
    }

    pub fn can_redo(&self) -> bool {
        !self.redo.is_empty()
    }

    pub fn undo(&mut self) -> bool {
        self.end_gesture();
        match self.undo.pop() {
            Some(previous) => {
                self.redo.push(std::mem::replace(&mut self.file, previous));
                self.changed();
                true
            }
            None => false,
        }
    }

    pub fn redo(&mut self) -> bool {
        self.end_gesture();
        match self.redo.pop() {
            Some(next) => {
                self.undo.push(std::mem::replace(&mut self.file, next));
                self.changed();
                true
            }
            None => false,
        }
    }

    pub fn is_dirty(&self) -> bool {
        self.file != self.saved
    }

    /// Record that `written` (this document's file when the save began, its dataset path
    /// rewritten from `old_dataset` by [`crate::scenario::layout::write_scenario`]) is now at `path`, which becomes the
    /// document's path. The dataset path is rewritten the same way in the current file (edits
    /// made while saving stay unsaved) and in the undo history, so that undoing after a move
    /// still finds the dataset.
    pub fn saved_as(&mut self, path: &Path, written: ScenarioFile, old_dataset: &str) {
        for f in std::iter::once(&mut self.file)
            .chain(self.undo.iter_mut())
            .chain(self.redo.iter_mut())
        {
            if f.dataset == old_dataset {
                f.dataset = written.dataset.clone();
            }
        }
        // Edits made while the save ran stay unsaved (counted as one).
        self.changes_since_save = usize::from(self.file != written);
        self.saved = written;
        self.path = path.to_path_buf();
        self.untitled = false;
    }

    /// The recovery file's text: a comment saying what it holds, then the scenario.
    pub fn recovery_text(&self) -> String {
        let seconds = std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map_or(0, |d| d.as_secs());
        let n = self.changes_since_save.max(1);
        format!(
            "{RECOVERY_NOTE}{n} unsaved change{} to {}, the last at {}.\n{}",
            if n == 1 { "" } else { "s" },
            self.path
                .file_name()
                .map_or_else(|| "the scenario".into(), |f| f.to_string_lossy()),
            crate::report::stamp::readable_utc(seconds),
            scenario::to_text(&self.file)
        )
    }

    /// Where unsaved edits of this scenario are kept against a crash: beside the file, hidden.
    pub fn recovery_path(&self) -> PathBuf {
        recovery_path(&self.path)
    }
}

/// How the first line of a recovery file begins; the rest says what it holds.
pub const RECOVERY_NOTE: &str = "// Tiltyard recovery: ";

/// What a recovery file holds, from its first line ("3 unsaved changes to adverse.ron, the
/// last at 2026-12-04 23:12:05 UTC."), if it says.
pub fn recovery_note(path: &Path) -> Option<String> {
    let text = std::fs::read_to_string(path).ok()?;
    text.lines()
        .next()?
        .strip_prefix(RECOVERY_NOTE)
        .map(|s| s.trim_end_matches('.').to_string())
}

/// The recovery file of a scenario at `path`: `.<name>.recovery` in the same folder.
pub fn recovery_path(path: &Path) -> PathBuf {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "scenario.ron".into());
    path.with_file_name(format!(".{name}.recovery"))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::write_atomic;
    use crate::scenario::layout::write_scenario;

    fn save_as(doc: &mut Document, path: &Path) {
        let old = doc.file.dataset.clone();
        let written = write_scenario(&doc.path, path, &doc.file).unwrap();
        doc.saved_as(path, written, &old);
    }

    fn demo() -> Document {
        let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios-demo/baseline.ron");
        Document::open(&path).unwrap()
    }

    /// Undo and redo walk the history; a gesture of many edits is one step; a new edit clears
    /// the redo branch.
    #[test]
    fn undo_redo_and_gestures() {
        let mut doc = demo();
        let v0 = doc.file.pins[0].value;
        doc.edit(|f| f.pins[0].value = 1.0);
        doc.begin_gesture();
        for k in 0..10 {
            doc.edit(|f| f.pins[0].value = 2.0 + k as f64);
        }
        doc.end_gesture();
        assert_eq!(doc.file.pins[0].value, 11.0);
        assert!(doc.undo());
        assert_eq!(doc.file.pins[0].value, 1.0);
        assert!(doc.undo());
        assert_eq!(doc.file.pins[0].value, v0);
        assert!(!doc.undo());
        assert!(doc.redo());
        assert_eq!(doc.file.pins[0].value, 1.0);
        doc.edit(|f| f.pins[0].value = 5.0);
        assert!(!doc.can_redo());
        // A gesture that changes nothing leaves no step.
        let steps = doc.undo.len();
        doc.begin_gesture();
        doc.end_gesture();
        assert_eq!(doc.undo.len(), steps);
    }

    /// Saves are atomic (no temporary file left behind), round-trip, clear the dirty flag, and
    /// keep the dataset reachable from a new folder; the recovery file round-trips too.
    #[test]
    fn atomic_save_and_recovery() {
        let dir = tempfile::tempdir().unwrap();
        let mut doc = demo();
        // Work on a copy in a temporary folder (the dataset by absolute path).
        let demo_dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios-demo");
        doc.file.dataset = demo_dir.join("economy.csv").display().to_string();
        doc.path = dir.path().join("baseline.ron");
        doc.edit(|f| f.pins[0].value = 2.6);
        assert!(doc.is_dirty());
        write_atomic(
            &doc.recovery_path(),
            scenario::to_text(&doc.file).as_bytes(),
        )
        .unwrap();
        let recovered = scenario::read(&doc.recovery_path()).unwrap();
        assert_eq!(recovered, doc.file);
        let path = dir.path().join("mine.ron");
        save_as(&mut doc, &path);
        assert!(!doc.is_dirty());
        let leftovers: Vec<_> = std::fs::read_dir(dir.path())
            .unwrap()
            .filter_map(|e| e.ok())
            .filter(|e| e.file_name().to_string_lossy().ends_with(".tmp"))
            .collect();
        assert!(leftovers.is_empty());
        let reread = Document::open(&path).unwrap();
        assert_eq!(reread.file.pins[0].value, 2.6);
        assert!(scenario::load(&path).is_ok(), "the dataset is still found");
    }

    /// A relative dataset path is rewritten when the scenario moves to another folder.
    #[test]
    fn relative_dataset_follows_a_move() {
        let dir = tempfile::tempdir().unwrap();
        let mut doc = demo();
        let before = doc.file.dataset.clone();
        doc.edit(|f| f.pins[0].value = 9.0);
        let path = dir.path().join("moved.ron");
        save_as(&mut doc, &path);
        assert!(Path::new(&doc.file.dataset).is_absolute());
        assert!(scenario::load(&path).is_ok());
        // Undo after the move keeps the rewritten dataset path.
        assert!(doc.undo());
        assert_ne!(doc.file.dataset, before);
        assert_eq!(doc.file.dataset, doc.saved.dataset);
    }
}
