//! Fitting engine for potential-step transients (work in progress: see DEVELOPERS.md).
#![deny(missing_docs)]
