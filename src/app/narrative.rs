//! The scenario's narrative, editable in the window, with the conditions in plain words beside
//! it. When a condition on a series the narrative mentions changes (by column name or label),
//! the narrative is marked "may be out of date" until the user edits it or says it still holds.

use egui::RichText;

use super::TiltyardApp;
use super::palette::Palette;
use crate::report::pack::{corridor_words, pin_words};
use crate::scenario::{CorridorSpec, PinSpec, ScenarioFile};

/// The conditions the narrative was last checked against, and the text being typed.
#[derive(Debug, Clone, Default)]
pub struct NarrativeState {
    basis: (Vec<PinSpec>, Vec<CorridorSpec>),
    pub draft: Option<String>,
}

impl NarrativeState {
    /// The state of a file just opened: its narrative is taken to fit its conditions.
    pub fn for_file(file: &ScenarioFile) -> NarrativeState {
        let mut state = NarrativeState::default();
        state.touch(file);
        state
    }

    /// The narrative is taken to fit the file's conditions as they are now.
    pub fn touch(&mut self, file: &ScenarioFile) {
        self.basis = (file.pins.clone(), file.corridors.clone());
    }

    /// The series (as the file labels them) of conditions changed since the narrative was
    /// last touched that the narrative mentions; empty when it still fits.
    pub fn stale_mentions(&self, file: &ScenarioFile) -> Vec<String> {
        let (pins, corridors) = &self.basis;
        // What each changed condition is on (a series, or a shock named after one).
        let target = |series: &Option<String>, shock: &Option<String>| {
            series.clone().or_else(|| shock.clone())
        };
        let pins_changed = file
            .pins
            .iter()
            .filter(|p| !pins.contains(p))
            .chain(pins.iter().filter(|p| !file.pins.contains(p)))
            .filter_map(|p| target(&p.series, &p.shock));
        let corridors_changed = file
            .corridors
            .iter()
            .filter(|c| !corridors.contains(c))
            .chain(corridors.iter().filter(|c| !file.corridors.contains(c)))
            .filter_map(|c| target(&c.series, &c.shock));
        let mut changed: Vec<String> = Vec::new();
        for name in pins_changed.chain(corridors_changed) {
            if !changed.contains(&name) {
                changed.push(name);
            }
        }
        let text = file.narrative.to_lowercase();
        let mentioned = |name: &str, label: &str| {
            let spaced = name.replace('_', " ");
            [name, spaced.as_str(), label]
                .iter()
                .any(|w| !w.is_empty() && has_word(&text, &w.to_lowercase()))
        };
        changed
            .into_iter()
            .filter_map(|name| {
                let spec = file.series.iter().find(|s| s.name == name);
                let label = spec.map_or(name.as_str(), |s| s.shown());
                mentioned(&name, label).then(|| label.to_string())
            })
            .collect()
    }
}

/// `text` holds `word` as a whole word (not inside a longer one: "gdp" is not in "gdps").
fn has_word(text: &str, word: &str) -> bool {
    let inside = |c: Option<char>| c.is_some_and(|c| c.is_alphanumeric() || c == '_');
    text.match_indices(word).any(|(at, _)| {
        !inside(text[..at].chars().next_back()) && !inside(text[at + word.len()..].chars().next())
    })
}

/// The conditions in plain words, one sentence each.
pub fn conditions_in_words(file: &ScenarioFile) -> String {
    let words: Vec<String> = file
        .pins
        .iter()
        .map(|p| pin_words(file, p))
        .chain(file.corridors.iter().map(|c| corridor_words(file, c)))
        .collect();
    if words.is_empty() {
        "no conditions: the model's unconditional forecast".into()
    } else {
        words.join("; ")
    }
}

/// The narrative (or the field it is typed in), its state, and the conditions in words.
pub fn show(ui: &mut egui::Ui, app: &mut TiltyardApp, pal: &Palette) {
    if let Some(draft) = app.narrative.draft.as_mut() {
        ui.add(
            egui::TextEdit::multiline(draft)
                .desired_rows(2)
                .desired_width(f32::INFINITY)
                .hint_text("what the scenario says happens, in a few sentences"),
        )
        .accessible_name("narrative");
        let (done, cancel) = ui
            .horizontal(|ui| {
                (
                    ui.small_button("done").clicked(),
                    ui.small_button("cancel").clicked(),
                )
            })
            .inner;
        if done && let Some(text) = app.narrative.draft.take() {
            app.doc.edit(|f| f.narrative = text);
            app.narrative.touch(&app.doc.file);
        }
        if cancel {
            app.narrative.draft = None;
        }
        return;
    }
    let stale = app.narrative.stale_mentions(&app.doc.file);
    // One line of fixed height (the narrative cut to fit, whole on hover): the charts below
    // must not move when the "out of date" mark comes and goes, least of all under a drag.
    ui.horizontal(|ui| {
        if ui
            .small_button("edit narrative")
            .on_hover_text("Write what the scenario says happens")
            .clicked()
        {
            app.narrative.draft = Some(app.doc.file.narrative.clone());
        }
        if !stale.is_empty() {
            ui.label(
                RichText::new(format!(
                    "may be out of date: conditions on {} changed",
                    stale.join(", ")
                ))
                .small()
                .color(pal.strain),
            );
            if ui
                .small_button("still right")
                .on_hover_text("The narrative still fits the conditions")
                .clicked()
            {
                app.narrative.touch(&app.doc.file);
            }
        }
        let text = if app.doc.file.narrative.is_empty() {
            RichText::new("no narrative yet").color(pal.muted)
        } else {
            RichText::new(&app.doc.file.narrative).italics()
        };
        ui.add(egui::Label::new(text.small()).truncate())
            .on_hover_text(&app.doc.file.narrative);
    });
    let words = conditions_in_words(&app.doc.file);
    ui.add(
        egui::Label::new(
            RichText::new(format!("The conditions in words: {words}."))
                .small()
                .color(pal.muted),
        )
        .truncate(),
    )
    .on_hover_text(words);
}

#[cfg(test)]
mod tests {
    use super::*;

    fn demo() -> ScenarioFile {
        let path = concat!(env!("CARGO_MANIFEST_DIR"), "/scenarios-demo/adverse.ron");
        crate::scenario::read(std::path::Path::new(path)).expect("the demo scenario")
    }

    /// A change to a condition on a series the narrative names (by label or column name)
    /// marks it; a change elsewhere does not; touching it clears the mark.
    #[test]
    fn the_narrative_is_marked_when_a_condition_it_mentions_changes() {
        let mut file = demo();
        file.narrative = "House prices fall for two years; unemployment rises.".into();
        let mut state = NarrativeState::for_file(&file);
        assert!(state.stale_mentions(&file).is_empty());
        // policy_rate's corridor: not mentioned.
        let k = file
            .corridors
            .iter()
            .position(|c| c.series.as_deref() == Some("policy_rate"))
            .expect("a policy-rate corridor");
        file.corridors[k].from = "2026Q2".into();
        assert!(state.stale_mentions(&file).is_empty());
        // house_prices' pin: mentioned by its label.
        let p = file
            .pins
            .iter()
            .position(|p| p.series.as_deref() == Some("house_prices"))
            .expect("a house-prices pin");
        file.pins[p].value -= 2.0;
        assert_eq!(
            state.stale_mentions(&file),
            vec!["House prices".to_string()]
        );
        // unemployment's corridor removed: mentioned by its column name.
        file.corridors
            .retain(|c| c.series.as_deref() != Some("unemployment"));
        assert_eq!(state.stale_mentions(&file).len(), 2);
        state.touch(&file);
        assert!(state.stale_mentions(&file).is_empty());
    }

    #[test]
    fn only_whole_words_count_as_mentions() {
        assert!(has_word("house prices fall", "house prices"));
        assert!(has_word("(wages) rise", "wages"));
        assert!(!has_word("wagesx rise", "wages"));
        assert!(!has_word("the output_gap widens", "output"));
    }
}
