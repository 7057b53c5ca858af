//! File dialogs off the window's thread. Dialogs sit behind [`PathPicker`] so that tests give
//! paths directly and never open one; the real picker uses the desktop's file dialog (rfd).
//! A dialog runs on its own thread and answers through a channel, so a slow or hung dialog
//! service never freezes the window.

use std::path::{Path, PathBuf};
use std::sync::mpsc::{Receiver, Sender, channel};

/// Asks the user for paths.
pub trait PathPicker: Send + Sync {
    /// A scenario to open.
    fn open(&self, start: &Path) -> Option<PathBuf>;
    /// Where to save a scenario.
    fn save(&self, start: &Path, name: &str) -> Option<PathBuf>;
}

/// The desktop's file dialogs.
pub struct DesktopPicker;

impl PathPicker for DesktopPicker {
    fn open(&self, start: &Path) -> Option<PathBuf> {
        rfd::FileDialog::new()
            .set_directory(start)
            .add_filter("scenario", &["ron"])
            .pick_file()
    }

    fn save(&self, start: &Path, name: &str) -> Option<PathBuf> {
        rfd::FileDialog::new()
            .set_directory(start)
            .set_file_name(name)
            .add_filter("scenario", &["ron"])
            .save_file()
    }
}

/// What a picked path is for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Purpose {
    Open,
    SaveAs,
}

/// Dialogs in flight.
pub struct Dialogs {
    picker: std::sync::Arc<dyn PathPicker>,
    tx: Sender<(Purpose, Option<PathBuf>)>,
    rx: Receiver<(Purpose, Option<PathBuf>)>,
    pub open: bool,
}

impl Dialogs {
    pub fn new(picker: std::sync::Arc<dyn PathPicker>) -> Dialogs {
        let (tx, rx) = channel();
        Dialogs {
            picker,
            tx,
            rx,
            open: false,
        }
    }

    /// Ask for a path on a thread of its own; `wake` repaints the window when it answers.
    pub fn ask(
        &mut self,
        purpose: Purpose,
        start: PathBuf,
        name: String,
        wake: std::sync::Arc<dyn Fn() + Send + Sync>,
    ) {
        if self.open {
            return;
        }
        self.open = true;
        let picker = self.picker.clone();
        let tx = self.tx.clone();
        std::thread::spawn(move || {
            let path = match purpose {
                Purpose::Open => picker.open(&start),
                Purpose::SaveAs => picker.save(&start, &name),
            };
            let _ = tx.send((purpose, path));
            wake();
        });
    }

    /// An answered dialog, if any.
    pub fn answer(&mut self) -> Option<(Purpose, Option<PathBuf>)> {
        let answer = self.rx.try_recv().ok();
        if answer.is_some() {
            self.open = false;
        }
        answer
    }
}
