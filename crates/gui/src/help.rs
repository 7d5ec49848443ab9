//! The "Help & notes" window: keyboard shortcuts, how to read the plots, how the fit decides,
//! and the cautions that go with any result.

use eframe::egui::{self, Key, KeyboardShortcut, Modifiers, RichText};

/// Open files.
pub const OPEN: KeyboardShortcut = KeyboardShortcut::new(Modifiers::COMMAND, Key::O);
/// Fit every run again.
pub const REFIT: KeyboardShortcut = KeyboardShortcut::new(Modifiers::COMMAND, Key::R);
/// The focused run's window back to automatic.
pub const AUTO_WINDOW: KeyboardShortcut =
    KeyboardShortcut::new(Modifiers::COMMAND.plus(Modifiers::SHIFT), Key::R);
/// Light or dark.
pub const THEME: KeyboardShortcut = KeyboardShortcut::new(Modifiers::COMMAND, Key::T);
/// The fit view.
pub const FIT_VIEW: KeyboardShortcut = KeyboardShortcut::new(Modifiers::COMMAND, Key::Num1);
/// The replicate view.
pub const REPLICATE_VIEW: KeyboardShortcut = KeyboardShortcut::new(Modifiers::COMMAND, Key::Num2);
/// The Save & export window.
pub const EXPORT: KeyboardShortcut = KeyboardShortcut::new(Modifiers::COMMAND, Key::E);
/// Save the session (where it was last saved or opened, else ask where).
pub const SAVE_SESSION: KeyboardShortcut = KeyboardShortcut::new(Modifiers::COMMAND, Key::S);
/// The next run in the list.
pub const NEXT_RUN: KeyboardShortcut = KeyboardShortcut::new(Modifiers::ALT, Key::ArrowDown);
/// The previous run in the list.
pub const PREVIOUS_RUN: KeyboardShortcut = KeyboardShortcut::new(Modifiers::ALT, Key::ArrowUp);
/// Stop the reading and fitting in progress.
pub const CANCEL: KeyboardShortcut = KeyboardShortcut::new(Modifiers::NONE, Key::Escape);
/// This window.
pub const HELP: KeyboardShortcut = KeyboardShortcut::new(Modifiers::NONE, Key::F1);

/// Every shortcut with what it does, in the order the help lists them.
pub const SHORTCUTS: [(KeyboardShortcut, &str); 12] = [
    (OPEN, "open files"),
    (EXPORT, "save & export: report, data, session"),
    (SAVE_SESSION, "save the session"),
    (NEXT_RUN, "next run"),
    (PREVIOUS_RUN, "previous run"),
    (REFIT, "fit every run again"),
    (AUTO_WINDOW, "reset the focused run's window to automatic"),
    (THEME, "light or dark theme"),
    (FIT_VIEW, "fit view"),
    (REPLICATE_VIEW, "replicate comparison"),
    (CANCEL, "cancel the reading and fitting in progress"),
    (HELP, "this help"),
];

/// The help window's view state.
#[derive(Debug, Clone, Default)]
pub struct HelpWindow {
    /// Whether it is shown.
    pub open: bool,
}

fn para(ui: &mut egui::Ui, text: &str) {
    ui.add(egui::Label::new(text).wrap());
}

impl HelpWindow {
    /// Shows the window when open.
    pub fn show(&mut self, ctx: &egui::Context) {
        let mut open = self.open;
        egui::Window::new("Help & notes")
            .open(&mut open)
            .default_pos([720.0, 40.0])
            .default_width(520.0)
            .default_height(560.0)
            .vscroll(true)
            .show(ctx, |ui| self.ui(ui));
        self.open = open;
    }

    /// The window's contents.
    pub fn ui(&mut self, ui: &mut egui::Ui) {
        ui.strong("Keyboard");
        egui::Grid::new("shortcuts").num_columns(2).show(ui, |ui| {
            for (s, what) in SHORTCUTS {
                ui.monospace(ui.ctx().format_shortcut(&s));
                ui.label(what);
                ui.end_row();
            }
            ui.monospace("Ctrl + / Ctrl −");
            ui.label("larger or smaller text");
            ui.end_row();
        });
        ui.add_space(6.0);
        ui.strong("Getting files in");
        para(
            ui,
            "Drop current–time files onto the window, use Open files…, type a path in the Runs panel, or name them on the command line: diffusor gui FILE… The importer finds the separator, decimal mark, units, the step and its sign; what it could not read is shown beside the run. A saved session (a .json file) opens the same ways, replacing the runs shown; while a large file is read, a bar beside its run shows the stage, and Cancel (Esc) stops it.",
        );
        ui.add_space(6.0);
        ui.strong("Reading the plots");
        para(
            ui,
            "Transient: the current after the step, with its sign made positive; the dashed line is the fit over the window. Cottrell plot: I against (t − t0)^-½ with the fitted straight line; its intercept is the background b. Residuals: measured minus fitted current; inside the window they should scatter evenly about zero. I·√t on log time: flat where the Cottrell law holds — high at early times while the double layer charges, rising late when natural convection sets in; the dots are log-time bin means with their standard errors. Shaded regions are outside the fitting window.",
        );
        ui.add_space(6.0);
        ui.strong("How the window is chosen");
        para(
            ui,
            "The start lies past the double-layer charging (5 τ, and where the fitted charging current is below 0.1 % of the faradaic current, or after the leading points that stand significantly above the Cottrell line). The end lies before I·√t departs from its plateau (natural convection) and before edge diffusion reaches 10 % of the current for a disk of the entered size. Type a bound, or drag it on the transient; Automatic window returns to the engine's choice.",
        );
        ui.add_space(6.0);
        ui.strong("Choosing the model");
        para(
            ui,
            "Each run has its own model, chosen under Model in the Result panel; left at the default, it follows the geometry in the cell form (planar → Cottrell, microdisk → the inlaid-disk expression, sphere or hemisphere → the spherical equation). The geometry check compares the edge share √(πDt)/r over the window with 5 % (this program's convention) and says which model suits the electrode and why; Use it switches to that model. The disk, sphere, kinetic and film models are fitted by Levenberg–Marquardt from the first sample past the charging current to the end of the data; the window can still be typed. The plateau bins, the uncertainty budget and the window sensitivity belong to the Cottrell analysis and are shown for it only.",
        );
        ui.add_space(6.0);
        ui.strong("Uncertainty");
        para(
            ui,
            "The standard error and the 95 % interval of D are the fit's own, from a covariance that allows for correlated residuals. The expanded uncertainty U (k = 2) adds the uncertainties you entered for the area and the concentration (GUM, JCGM 100:2008). The uncertainty budget shows each input's share.",
        );
        ui.add_space(6.0);
        ui.strong("Cautions");
        para(ui, crate::results::CAUTION);
        para(
            ui,
            "The default model is planar semi-infinite diffusion after a step to the diffusion-limited potential (Cottrell, 1903); each of the others states its equation, source and range of validity with its result. Results from transients outside its assumptions — slow kinetics, thin layers, microelectrodes at long times, uncompensated resistance — are flagged where the engine can tell, but not always.",
        );
        para(ui, crate::demo::NOTE);
        ui.add_space(6.0);
        ui.label(RichText::new(format!("Diffusor {}", env!("CARGO_PKG_VERSION"))).weak());
    }
}
