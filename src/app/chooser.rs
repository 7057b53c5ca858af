//! The window's own file chooser, for desktops where the system's file dialog does not open
//! (no dialog service on many X11 and remote desktops): a path field with completion (Tab),
//! the folder's sub-folders and matching files, and the files used in this session.

use std::path::{Path, PathBuf};

use super::files::Purpose;

/// What the chooser is for: its title, the files it lists, and whether the path must exist.
struct Kind {
    title: &'static str,
    action: &'static str,
    /// File extension listed (none: folders only).
    extension: Option<&'static str>,
    must_exist: bool,
}

fn kind(purpose: Purpose) -> Kind {
    let (title, action, extension, must_exist) = match purpose {
        Purpose::Open => ("Open a scenario", "Open this scenario", Some("ron"), true),
        Purpose::Compare => (
            "Compare with a scenario",
            "Compare with this scenario",
            Some("ron"),
            true,
        ),
        Purpose::NewFromData => (
            "Start a scenario on a dataset",
            "Start on this dataset",
            Some("csv"),
            true,
        ),
        Purpose::SaveAs => ("Save the scenario as", "Save here", Some("ron"), false),
        Purpose::ExportTable => (
            "Save the table of paths as",
            "Save the table here",
            Some("csv"),
            false,
        ),
        Purpose::ExportPack => (
            "Write the briefing pack into the folder",
            "Write the pack here",
            None,
            false,
        ),
    };
    Kind {
        title,
        action,
        extension,
        must_exist,
    }
}

/// What the user did this frame.
#[derive(Debug, Clone, PartialEq)]
pub enum Outcome {
    Waiting,
    Chosen(PathBuf),
    Cancelled,
}

/// The chooser's state.
pub struct Chooser {
    pub purpose: Purpose,
    /// The path typed or picked.
    pub typed: String,
    /// The folder listed, and its sub-folders and matching files (names).
    folder: PathBuf,
    folders: Vec<String>,
    files: Vec<String>,
    recent: Vec<PathBuf>,
    problem: Option<String>,
}

impl Chooser {
    /// Start in `start` (a folder), proposing `name` when saving.
    pub fn new(purpose: Purpose, start: &Path, name: &str, recent: &[PathBuf]) -> Chooser {
        let kind = kind(purpose);
        let typed = if kind.must_exist {
            format!("{}{}", start.display(), std::path::MAIN_SEPARATOR)
        } else {
            start.join(name).display().to_string()
        };
        let mut chooser = Chooser {
            purpose,
            typed,
            folder: start.to_path_buf(),
            folders: Vec::new(),
            files: Vec::new(),
            recent: recent
                .iter()
                .filter(|p| kind.extension.is_none_or(|e| has_extension(p, e)))
                .cloned()
                .collect(),
            problem: None,
        };
        chooser.list(start);
        chooser
    }

    /// List a folder (its sub-folders, then the files with the purpose's extension).
    fn list(&mut self, folder: &Path) {
        let extension = kind(self.purpose).extension;
        self.folder = folder.to_path_buf();
        self.folders.clear();
        self.files.clear();
        let Ok(entries) = std::fs::read_dir(folder) else {
            self.problem = Some(format!("cannot list {}", folder.display()));
            return;
        };
        for entry in entries.flatten() {
            let name = entry.file_name().to_string_lossy().into_owned();
            if name.starts_with('.') {
                continue;
            }
            let path = entry.path();
            if path.is_dir() {
                self.folders.push(name);
            } else if extension.is_some_and(|e| has_extension(&path, e)) {
                self.files.push(name);
            }
        }
        self.folders.sort();
        self.files.sort();
    }

    /// Tab: the typed path completed as far as the entries of its folder agree.
    pub fn complete(&mut self) {
        let typed = PathBuf::from(&self.typed);
        let ends_in_separator = self.typed.ends_with(std::path::MAIN_SEPARATOR);
        let (folder, stem) = if ends_in_separator {
            (typed.clone(), String::new())
        } else {
            (
                typed.parent().map(Path::to_path_buf).unwrap_or_default(),
                typed
                    .file_name()
                    .map(|n| n.to_string_lossy().into_owned())
                    .unwrap_or_default(),
            )
        };
        let folder = if folder.as_os_str().is_empty() {
            PathBuf::from(".")
        } else {
            folder
        };
        self.list(&folder);
        let names: Vec<&str> = self
            .folders
            .iter()
            .chain(&self.files)
            .map(String::as_str)
            .collect();
        if let Some(done) = completion(&stem, &names) {
            let mut path = folder.join(&done).display().to_string();
            if self.folders.contains(&done) {
                path.push(std::path::MAIN_SEPARATOR);
            }
            self.typed = path;
        }
    }

    /// The typed path, checked for the purpose; `.ron`/`.csv` added when saving without one.
    fn chosen(&self) -> Result<PathBuf, String> {
        let kind = kind(self.purpose);
        let mut path = PathBuf::from(self.typed.trim());
        if path.as_os_str().is_empty() {
            return Err("type or pick a path".into());
        }
        if kind.must_exist {
            if !path.is_file() {
                return Err(format!("{} is not a file", path.display()));
            }
        } else if let Some(e) = kind.extension {
            if path.is_dir() {
                return Err(format!("{} is a folder: add a file name", path.display()));
            }
            if path.extension().is_none() {
                path.set_extension(e);
            }
            if path
                .parent()
                .is_some_and(|p| !p.as_os_str().is_empty() && !p.is_dir())
            {
                return Err(format!(
                    "there is no folder {}",
                    path.parent().unwrap_or(&path).display()
                ));
            }
        }
        Ok(path)
    }

    /// Draw the chooser in its own modal window.
    pub fn show(&mut self, ctx: &egui::Context) -> Outcome {
        let kind = kind(self.purpose);
        let mut outcome = Outcome::Waiting;
        egui::Modal::new(egui::Id::unique("tiltyard chooser")).show(ctx, |ui| {
            ui.set_width(560.0);
            ui.heading(kind.title);
            ui.label(
                "The desktop's file dialog did not open; choose here. Tab completes the path.",
            );
            let label = ui.label("Path");
            let field = ui
                .add(
                    egui::TextEdit::singleline(&mut self.typed)
                        .desired_width(f32::INFINITY)
                        .hint_text("a path"),
                )
                .labelled_by(label.id);
            if field.has_focus()
                && ui.input_mut(|i| i.consume_key(egui::Modifiers::NONE, egui::Key::Tab))
            {
                self.complete();
            }
            if field.lost_focus() && ui.input(|i| i.key_pressed(egui::Key::Enter)) {
                outcome = self.confirm();
            }
            ui.label(format!(
                "In {}",
                std::path::absolute(&self.folder)
                    .unwrap_or_else(|_| self.folder.clone())
                    .display()
            ));
            egui::ScrollArea::vertical()
                .max_height(260.0)
                .show(ui, |ui| {
                    if let Some(up) = self.folder.parent().map(Path::to_path_buf)
                        && ui
                            .selectable_label(false, ".. (the folder above)")
                            .clicked()
                    {
                        self.enter(&up);
                    }
                    for name in self.folders.clone() {
                        if ui
                            .selectable_label(false, format!("{name}{}", std::path::MAIN_SEPARATOR))
                            .clicked()
                        {
                            let inner = self.folder.join(&name);
                            self.enter(&inner);
                        }
                    }
                    for name in self.files.clone() {
                        let path = self.folder.join(&name);
                        let picked = self.typed == path.display().to_string();
                        let row = ui.selectable_label(picked, &name);
                        if row.clicked() {
                            self.typed = path.display().to_string();
                        }
                        if row.double_clicked() {
                            outcome = self.confirm();
                        }
                    }
                });
            if !self.recent.is_empty() {
                ui.separator();
                ui.label("Used in this session");
                for path in self.recent.clone() {
                    if ui
                        .selectable_label(false, path.display().to_string())
                        .clicked()
                    {
                        self.typed = path.display().to_string();
                    }
                }
            }
            if let Some(problem) = &self.problem {
                ui.colored_label(ui.visuals().warn_fg_color, problem);
            }
            ui.horizontal(|ui| {
                if ui.button(kind.action).clicked() {
                    outcome = self.confirm();
                }
                if ui.button("Cancel").clicked() {
                    outcome = Outcome::Cancelled;
                }
            });
        });
        outcome
    }

    fn enter(&mut self, folder: &Path) {
        self.problem = None;
        self.list(folder);
        let kind = kind(self.purpose);
        if kind.must_exist || kind.extension.is_none() {
            self.typed = format!("{}{}", folder.display(), std::path::MAIN_SEPARATOR);
        } else {
            let name = Path::new(&self.typed)
                .file_name()
                .map(|n| n.to_string_lossy().into_owned())
                .unwrap_or_default();
            self.typed = folder.join(name).display().to_string();
        }
    }

    fn confirm(&mut self) -> Outcome {
        match self.chosen() {
            Ok(path) => Outcome::Chosen(path),
            Err(problem) => {
                self.problem = Some(problem);
                Outcome::Waiting
            }
        }
    }
}

fn has_extension(path: &Path, extension: &str) -> bool {
    path.extension()
        .is_some_and(|e| e.to_string_lossy().eq_ignore_ascii_case(extension))
}

/// The longest name all `names` starting with `stem` share (`None` when none starts so).
pub fn completion(stem: &str, names: &[&str]) -> Option<String> {
    let matching: Vec<&str> = names
        .iter()
        .copied()
        .filter(|n| n.starts_with(stem))
        .collect();
    let first = matching.first()?;
    let mut end = first.len();
    for other in &matching[1..] {
        end = end.min(
            first
                .char_indices()
                .zip(other.chars())
                .find(|((_, a), b)| a != b)
                .map_or(first.len().min(other.len()), |((i, _), _)| i),
        );
    }
    Some(first[..end].to_string())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn completion_goes_as_far_as_the_names_agree() {
        let names = ["adverse.ron", "adverse-pins.ron", "baseline.ron"];
        assert_eq!(completion("ad", &names).as_deref(), Some("adverse"));
        assert_eq!(completion("b", &names).as_deref(), Some("baseline.ron"));
        assert_eq!(completion("x", &names), None);
        assert_eq!(completion("", &["a1", "a2"]).as_deref(), Some("a"));
    }
}
