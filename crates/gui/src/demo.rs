//! The demo set, bundled into the binary so a newcomer sees it fitted on the first start, even
//! from an installed program with no repository beside it. Every file is synthetic: made by
//! `sample-data/generate.py` from the model equations with seeded noise (see
//! `sample-data/README.md`); none is a measurement.

/// A bundled file: its name and its bytes, exactly as in `sample-data/`.
#[derive(Debug, Clone, Copy)]
pub struct DemoFile {
    /// The file name.
    pub name: &'static str,
    /// Its bytes.
    pub bytes: &'static [u8],
    /// Whether it starts selected (in the overlays and the replicate comparison).
    pub selected: bool,
}

/// The three replicates on a 3.00 mm disk, then a longer run on the same disk where natural
/// convection sets in late (not selected at first: it is not a replicate of the other three's
/// protocol, 60 s instead of 20 s).
pub const FILES: [DemoFile; 4] = [
    DemoFile {
        name: "planar-rep1.csv",
        bytes: include_bytes!("../../../sample-data/planar-rep1.csv"),
        selected: true,
    },
    DemoFile {
        name: "planar-rep2.csv",
        bytes: include_bytes!("../../../sample-data/planar-rep2.csv"),
        selected: true,
    },
    DemoFile {
        name: "planar-rep3.csv",
        bytes: include_bytes!("../../../sample-data/planar-rep3.csv"),
        selected: true,
    },
    DemoFile {
        name: "planar-convection.csv",
        bytes: include_bytes!("../../../sample-data/planar-convection.csv"),
        selected: false,
    },
];

/// What the window says about the demo wherever it is shown.
pub const NOTE: &str = "Demo set: synthetic transients computed from the Cottrell equation with seeded noise (not measurements). Electrode 3.00 mm disk, A = 0.0707 cm² ± 1 %, C = 1.00 mM ± 1 %, n = 1.";
