//! The chart grid: which charts are shown, in what order, a page at a time.
//!
//! At 20–40 series a user works on a few: the grid shows the series that carry conditions
//! first (then the rest in the file's order), lets the series list untick the ones not wanted,
//! narrows the grid by typing part of a name, and pages through the rest. The order is fixed
//! when a scenario opens and when the user asks for it again ("conditioned first"), never by
//! an edit, so that a chart never jumps away from under the pointer.

use egui::RichText;

use super::TiltyardApp;
use super::chart::{self, ChartInput};
use super::gesture::{ChartAction, CondRef};
use super::legend::Legend;
use super::palette::Palette;
use super::panels::{severity_colour, shock_order, units_box};
use super::worker::{EngineState, Results, SeriesView, Subject};
use crate::scenario::ScenarioFile;

/// What the centre of the window shows.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Pane {
    /// The chart grid (series or shocks, by `TiltyardApp::view`).
    #[default]
    Charts,
    /// Where the scenario comes from.
    Sources,
    /// The differences from a second scenario.
    Difference,
    /// The fans as a table.
    Table,
}

/// Charts per page offered.
pub const PAGE_SIZES: [usize; 4] = [4, 8, 12, 24];

/// What the grid shows.
#[derive(Debug, Clone, PartialEq)]
pub struct GridView {
    /// Only charts whose name contains this (ignoring case).
    pub filter: String,
    pub page: usize,
    pub per_page: usize,
    /// Series in the grid's order.
    pub order: Vec<String>,
    /// The charts' height as last laid out: kept while a drag lasts, so that nothing above
    /// the grid (a message, the legend) can resize the chart under the pointer.
    height: Option<f32>,
}

impl Default for GridView {
    fn default() -> Self {
        GridView {
            filter: String::new(),
            page: 0,
            per_page: 12,
            order: Vec::new(),
            height: None,
        }
    }
}

impl GridView {
    /// The grid of a scenario just opened: its conditioned series first.
    pub fn for_file(file: &ScenarioFile) -> GridView {
        let mut g = GridView::default();
        g.conditioned_first(file);
        g
    }

    /// Series with a pin or corridor first (in the file's order), then the rest.
    pub fn conditioned_first(&mut self, file: &ScenarioFile) {
        let conditioned = |name: &str| {
            file.pins.iter().any(|p| p.series.as_deref() == Some(name))
                || file
                    .corridors
                    .iter()
                    .any(|c| c.series.as_deref() == Some(name))
        };
        let names = file.series.iter().map(|s| s.name.clone());
        let (first, rest): (Vec<String>, Vec<String>) = names.partition(|n| conditioned(n));
        self.order = first.into_iter().chain(rest).collect();
        self.page = 0;
    }

    /// The order kept in step with the file's series (new ones last, gone ones dropped).
    fn sync(&mut self, file: &ScenarioFile) {
        self.order
            .retain(|n| file.series.iter().any(|s| &s.name == n));
        for s in &file.series {
            if !self.order.contains(&s.name) {
                self.order.push(s.name.clone());
            }
        }
    }

    fn matches(&self, name: &str) -> bool {
        self.filter.is_empty() || name.to_lowercase().contains(&self.filter.to_lowercase())
    }

    /// The names on the current page (the page moved into range), and the number of pages.
    pub fn page_of(&mut self, names: &[String]) -> (Vec<String>, usize) {
        let per = self.per_page.max(1);
        let kept: Vec<String> = names.iter().filter(|n| self.matches(n)).cloned().collect();
        let pages = kept.len().div_ceil(per).max(1);
        self.page = self.page.min(pages - 1);
        let shown = kept.into_iter().skip(self.page * per).take(per).collect();
        (shown, pages)
    }
}

/// Height a chart takes beyond its plot: the title row and the gap below it.
const CHART_CHROME: f32 = 36.0;

/// The controls above the grid (one row that never changes height) and the charts.
pub fn show(ui: &mut egui::Ui, app: &mut TiltyardApp, pal: &Palette) {
    app.view.grid.sync(&app.doc.file);
    let subject = app.view.subject;
    let names: Vec<String> = match subject {
        Subject::Series => app
            .view
            .grid
            .order
            .iter()
            .filter(|n| !app.view.hidden.contains(*n))
            .cloned()
            .collect(),
        Subject::Shock => shock_order(app),
    };
    let (page_names, pages) = app.view.grid.page_of(&names);
    controls(ui, app, pal, pages);
    if app.view.pane == Pane::Difference && app.second.is_none() {
        app.view.pane = Pane::Charts;
    }
    match app.view.pane {
        Pane::Sources => return super::sources::show(ui, app, pal),
        Pane::Difference => return super::second::table(ui, app, pal),
        Pane::Table => return super::paths_table::show(ui, app, pal),
        Pane::Charts => {}
    }
    let Some(results) = app.session.results.clone() else {
        let text = match app.session.state {
            EngineState::Failed => "No fans: the engine stopped on the error named above.",
            _ => "The fans appear here as soon as the engine has the first draws.",
        };
        ui.centered_and_justified(|ui| {
            ui.label(text);
        });
        return;
    };
    let views = match subject {
        Subject::Series => &results.series,
        Subject::Shock => &results.shocks,
    };
    let enlarged = app
        .view
        .enlarged
        .filter(|&(s, i)| s == subject && i < views.len())
        .map(|(_, i)| i);
    let shown: Vec<usize> = match enlarged {
        Some(i) => vec![i],
        None => page_names
            .iter()
            .filter_map(|name| views.iter().position(|v| &v.name == name))
            .collect(),
    };
    if shown.is_empty() {
        ui.label(
            RichText::new("No chart matches: clear the search or tick series on the left.")
                .color(pal.muted),
        );
        return;
    }
    let width = ui.available_width();
    let columns = if enlarged.is_some() {
        1
    } else {
        ((width / 360.0).floor() as usize).clamp(1, 4)
    };
    let height = chart_height(ui, app, shown.len().div_ceil(columns), enlarged.is_some());
    let mut actions = Vec::new();
    egui::ScrollArea::vertical().show(ui, |ui| {
        for row in shown.chunks(columns) {
            ui.columns(columns, |cols| {
                for (col, &i) in cols.iter_mut().zip(row) {
                    let place = Place {
                        index: i,
                        height,
                        enlarged: enlarged == Some(i),
                    };
                    let done = one_chart(col, app, pal, &results, &views[i], place);
                    actions.extend(done.into_iter().map(|a| (views[i].name.clone(), a)));
                }
            });
            ui.add_space(6.0);
        }
    });
    for (name, action) in actions {
        app.apply(subject, &name, action);
    }
}

/// Width of the page group (previous, "page N of M", next).
const PAGE_GROUP_WIDTH: f32 = 210.0;

/// The height of each chart: a few charts share the height there is (up to a comfortable
/// size), many scroll; kept during a drag.
fn chart_height(ui: &egui::Ui, app: &mut TiltyardApp, rows: usize, enlarged: bool) -> f32 {
    let fitted = if enlarged {
        (ui.available_height() - 60.0).max(240.0)
    } else {
        let per_row = ui.available_height() / rows as f32 - CHART_CHROME;
        per_row.clamp(190.0, 420.0)
    };
    let height = match app.view.grid.height {
        Some(kept) if app.dragging() => kept,
        _ => fitted,
    };
    app.view.grid.height = Some(height);
    height
}

/// Where a chart sits in the grid.
#[derive(Clone, Copy)]
struct Place {
    index: usize,
    height: f32,
    enlarged: bool,
}

/// One chart with its header (name, units, enlarge, re-fit); the actions it asks for.
fn one_chart(
    col: &mut egui::Ui,
    app: &mut TiltyardApp,
    pal: &Palette,
    results: &Results,
    view: &SeriesView,
    place: Place,
) -> Vec<ChartAction> {
    let (subject, i) = (app.view.subject, place.index);
    let mut actions = Vec::new();
    let mut refit = false;
    col.horizontal(|ui| {
        match subject {
            Subject::Series => {
                ui.strong(app.shown(&view.name));
                units_box(ui, app, i, &view.name);
            }
            Subject::Shock => {
                ui.strong(format!("{} shock", app.shown(&view.name)));
            }
        }
        let label = if place.enlarged {
            "back to all"
        } else {
            "enlarge"
        };
        if ui.small_button(label).clicked() {
            actions.push(ChartAction::Enlarge);
        }
        refit = ui
            .small_button("re-fit")
            .on_hover_text(
                "Fit the value range to what the chart holds now (it otherwise \
                 stays put as the fans update, and only widens)",
            )
            .clicked();
    });
    let mut memory = app.view.charts.remove(&(subject, i)).unwrap_or_default();
    if refit {
        memory.range = None;
    }
    let status = |r: CondRef| app.status_of(r).map(|s| severity_colour(pal, s));
    let measure = match subject {
        Subject::Series => app.measure(&view.name, view.units),
        Subject::Shock => "standard deviations".to_string(),
    };
    let second = app
        .second
        .as_ref()
        .filter(|_| subject == Subject::Series)
        .and_then(|s| s.comparable(results))
        .and_then(|r| r.series.iter().find(|v| v.name == view.name));
    let input = ChartInput {
        any_drag: app.dragging(),
        index: i,
        measure: &measure,
        view,
        results,
        file: &app.doc.file,
        stale: app.stale(),
        selected: app.view.selected,
        status: &status,
        height: place.height,
        palette: pal,
        snapping: app.view.snapping,
        second,
    };
    actions.extend(chart::show(col, &input, &mut memory));
    app.view.charts.insert((subject, i), memory);
    actions
}

/// The view switch, the search and the pager in one row; then why the fans are greyed, or
/// how to draw on them, in a second row of its own.
fn controls(ui: &mut egui::Ui, app: &mut TiltyardApp, pal: &Palette, pages: usize) {
    // Wrapped when the panel is narrow; the page label has a fixed width, so the row keeps
    // its height as pages turn.
    ui.horizontal_wrapped(|ui| {
        pane_tabs(ui, app);
        if app.view.pane == Pane::Charts {
            page_controls(ui, app, pages);
        }
    });
    if app.view.pane != Pane::Charts {
        return;
    }
    page_keys(ui, app, pages);
    hint_row(ui, app, pal);
    legend_row(ui, app, pal);
}

/// The views of the centre: series or shock charts, where it comes from, the table, the
/// difference from a second scenario.
fn pane_tabs(ui: &mut egui::Ui, app: &mut TiltyardApp) {
    let charts = app.view.pane == Pane::Charts;
    for (subject, label) in [
        (Subject::Series, "Series paths"),
        (Subject::Shock, "Structural shocks"),
    ] {
        if ui
            .selectable_label(charts && app.view.subject == subject, label)
            .clicked()
        {
            app.view.subject = subject;
            app.view.pane = Pane::Charts;
        }
    }
    if ui
        .selectable_label(app.view.pane == Pane::Sources, "Where it comes from")
        .on_hover_text("The scenario's move away from the unconditional forecast, split by structural shock or by condition")
        .clicked()
    {
        app.view.pane = Pane::Sources;
    }
    if ui
        .selectable_label(app.view.pane == Pane::Table, "Table")
        .on_hover_text("The fans as numbers: medians and bands by series and period")
        .clicked()
    {
        app.view.pane = Pane::Table;
    }
    if app.second.is_some()
        && ui
            .selectable_label(app.view.pane == Pane::Difference, "Difference")
            .on_hover_text("This scenario against the second one, by series and period")
            .clicked()
    {
        app.view.pane = Pane::Difference;
    }
}

/// Search, pages and page size of the chart grid, and "conditioned first".
fn page_controls(ui: &mut egui::Ui, app: &mut TiltyardApp, pages: usize) {
    ui.separator();
    let find = ui
        .add(
            egui::TextEdit::singleline(&mut app.view.grid.filter)
                .hint_text("find a chart")
                .desired_width(120.0),
        )
        .accessible_name("find a chart");
    if find.changed() {
        app.view.grid.page = 0;
    }
    ui.separator();
    // The page group stays on one row when the controls wrap (a row too short for it ends
    // before it, so that it never runs past the panel).
    if ui.max_rect().right() - ui.cursor().left() < PAGE_GROUP_WIDTH {
        ui.end_row();
    }
    ui.horizontal(|ui| {
        let page = app.view.grid.page;
        if ui
            .add_enabled(page > 0, egui::Button::new("previous").small())
            .on_hover_text("Page Up")
            .clicked()
        {
            app.view.grid.page -= 1;
        }
        ui.add_sized(
            [80.0, ui.spacing().interact_size.y],
            egui::Label::new(format!("page {} of {pages}", page + 1)),
        );
        if ui
            .add_enabled(page + 1 < pages, egui::Button::new("next").small())
            .on_hover_text("Page Down")
            .clicked()
        {
            app.view.grid.page += 1;
        }
    });
    egui::ComboBox::from_id_salt("charts per page")
        .selected_text(format!("{} a page", app.view.grid.per_page))
        .show_ui(ui, |ui| {
            for size in PAGE_SIZES {
                ui.selectable_value(&mut app.view.grid.per_page, size, format!("{size} a page"));
            }
        })
        .response
        .accessible_name("charts per page");
    if app.view.subject == Subject::Series
        && ui
            .small_button("conditioned first")
            .on_hover_text("Put the series with pins or corridors at the front")
            .clicked()
    {
        app.view.grid.conditioned_first(&app.doc.file);
    }
}

/// Page Up and Page Down turn the pages (unless a text field has the keyboard).
fn page_keys(ui: &mut egui::Ui, app: &mut TiltyardApp, pages: usize) {
    let (up, down) = ui.input(|i| {
        (
            i.key_pressed(egui::Key::PageUp),
            i.key_pressed(egui::Key::PageDown),
        )
    });
    if !ui.ctx().egui_wants_keyboard_input() {
        if up {
            app.view.grid.page = app.view.grid.page.saturating_sub(1);
        }
        if down && app.view.grid.page + 1 < pages {
            app.view.grid.page += 1;
        }
    }
}

/// One line under the controls: why the fans are greyed, or how to edit on the charts.
fn hint_row(ui: &mut egui::Ui, app: &TiltyardApp, pal: &Palette) {
    ui.horizontal(|ui| {
        if app.stale() && app.session.results.is_some() {
            let what = if app.session.results.as_ref().is_some_and(|r| r.without_conditions) {
                "the greyed fans are the model's forecast without any conditions"
            } else {
                "the greyed fans are the last that could be drawn"
            };
            let why = match app.session.state {
                EngineState::Failed => "The engine stopped on an error",
                _ => "The conditions clash",
            };
            ui.add(
                egui::Label::new(
                    RichText::new(format!("{why}: {what}. See the checks.")).color(pal.clash),
                )
                .truncate(),
            );
            return;
        }
        let hint = match app.view.subject {
            Subject::Series => {
                "drag across future periods: corridor · Ctrl+click: pin · arrows: nudge the selected"
            }
            Subject::Shock => {
                "standardised shocks; grey: their usual N(0, 1) · drag: corridor · Ctrl+click: pin"
            }
        };
        ui.add(egui::Label::new(RichText::new(hint).small().color(pal.muted)).truncate());
    });
}

/// The legend of the charts, once there are fans.
fn legend_row(ui: &mut egui::Ui, app: &TiltyardApp, pal: &Palette) {
    if app.session.results.is_none() {
        return;
    }
    let second = app.second.as_ref().map(|s| s.name().to_string());
    let greyed = match app.session.results.as_ref() {
        Some(r) if r.without_conditions => "without the conditions",
        _ => "last fans drawn",
    };
    let legend = Legend {
        subject: app.view.subject,
        stale: app.stale().then_some(greyed),
        second: second
            .as_deref()
            .filter(|_| app.view.subject == Subject::Series),
    };
    super::legend::show(ui, &legend, pal);
}
