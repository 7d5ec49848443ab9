//! The Diffusor desktop window: potential-step transients in, a diffusion coefficient with an
//! honest uncertainty out, with the plots that show why.
//!
//! [`DiffusorApp`] holds the view state and draws everything in [`DiffusorApp::ui`]; [`run`]
//! opens it in a native window (the `diffusor` binary calls it). The science is not here:
//! files are read by [`diffusor_trace`], every fit, interval and statistic comes from
//! [`diffusor_fit`], and this crate only chooses what to show and how. Imports and fits run
//! on a background thread ([`worker`]), so the window keeps drawing on a big file.
//!
//! Panels: the **Runs** list ([`runs_panel`]) and **Cell & electrode** form ([`cell_form`]) on
//! the left; the **Fit** view in the middle with four linked plots ([`plots`]) or the
//! **Replicates** comparison ([`compare`]); the **Result** of the run in focus on the right
//! ([`results`]); **Help & notes** ([`help`]).
//!
//! ```
//! use diffusor_gui::DiffusorApp;
//!
//! // A fresh start: the bundled demo set, to be read and fitted in the background.
//! let app = DiffusorApp::demo();
//! assert_eq!(app.runs().len(), diffusor_gui::demo::FILES.len());
//! assert!(app.is_busy());
//! ```
#![deny(missing_docs)]

pub mod app;
pub mod cell_form;
pub mod compare;
pub mod decimate;
pub mod demo;
pub mod export;
pub mod files_window;
pub mod format;
pub mod help;
pub mod messages;
pub mod model_form;
pub mod plots;
pub mod results;
pub mod runs;
pub mod runs_panel;
pub mod session;
pub mod units;
pub mod worker;

use std::path::PathBuf;

pub use app::{DiffusorApp, Prefs, ThemeChoice, View};

/// Opens the Diffusor window with `files` loaded (the demo set when there are none) and
/// returns when it is closed.
///
/// # Errors
///
/// When no window can be opened (no display, no usable graphics).
pub fn run(files: Vec<PathBuf>) -> Result<(), eframe::Error> {
    let options = eframe::NativeOptions {
        viewport: eframe::egui::ViewportBuilder::default()
            .with_title("Diffusor")
            .with_app_id("diffusor")
            .with_inner_size([1280.0, 800.0])
            .with_min_inner_size([900.0, 600.0])
            .with_drag_and_drop(true),
        ..Default::default()
    };
    eframe::run_native(
        "Diffusor",
        options,
        Box::new(move |cc| {
            let prefs = cc
                .storage
                .and_then(|s| eframe::get_value::<Prefs>(s, app::PREFS_KEY))
                .unwrap_or_default();
            Ok(Box::new(DiffusorApp::new(&files).with_prefs(prefs)))
        }),
    )
}
