//! The model-choice helper: the edge share it uses is the disk's edge current over its
//! Cottrell current (Shoup & Szabo, J. Electroanal. Chem. 140 (1982) 237), and its
//! recommendations follow the geometry and this program's 5 % convention.

use diffusor_fit::cell::Geometry;
use diffusor_fit::constants::FARADAY_C_PER_MOL;
use diffusor_fit::geometry::{ChoiceInput, RecommendedModel, edge_share, recommend_model};
use diffusor_fit::models::planar::cottrell_current_a;

const D: f64 = 1e-9;

#[test]
fn edge_share_is_the_edge_term_over_the_cottrell_term() {
    // π·n·F·D·C·r over n·F·π·r²·C·√(D/(πt)) (the two leading terms of the disk current).
    let (r, t) = (1.5e-3, 2.0);
    let edge = std::f64::consts::PI * FARADAY_C_PER_MOL * D * r;
    let cottrell = cottrell_current_a(1.0, std::f64::consts::PI * r * r, 1.0, D, t);
    assert!((edge_share(D, t, r) / (edge / cottrell) - 1.0).abs() < 1e-14);
}

fn disk(radius_m: f64, end_s: f64) -> ChoiceInput {
    ChoiceInput {
        geometry: Geometry::Planar,
        radius_m: Some(radius_m),
        thickness_m: None,
        window_s: [1e-3, end_s],
        rough_d_m2_s: D,
    }
}

#[test]
fn a_three_millimetre_disk_is_planar_for_a_second_but_not_for_ten() {
    // √(π·1e-9·1)/1.5e-3 = 3.7 % < 5 %; at 10 s it is 11.8 % (computed).
    let short = recommend_model(&disk(1.5e-3, 1.0)).unwrap();
    assert_eq!(short.model, RecommendedModel::Planar, "{}", short.reason);
    assert!((short.edge_share.unwrap()[1] - 0.0374).abs() < 1e-4);
    let long = recommend_model(&disk(1.5e-3, 10.0)).unwrap();
    assert_eq!(long.model, RecommendedModel::Disk, "{}", long.reason);
    assert!(long.reason.contains("11.8 %"), "{}", long.reason);
    // A 5 µm disk is never planar on these time scales.
    assert_eq!(
        recommend_model(&disk(5e-6, 0.01)).unwrap().model,
        RecommendedModel::Disk
    );
}

#[test]
fn spheres_and_slabs_follow_their_geometry() {
    let sphere = ChoiceInput {
        geometry: Geometry::Hemisphere,
        ..disk(10e-6, 1.0)
    };
    assert_eq!(
        recommend_model(&sphere).unwrap().model,
        RecommendedModel::Hemisphere
    );
    let slab = ChoiceInput {
        thickness_m: Some(1e-6),
        rough_d_m2_s: 1e-14,
        ..disk(1e-2, 200.0)
    };
    let choice = recommend_model(&slab).unwrap();
    assert_eq!(choice.model, RecommendedModel::FiniteSlab);
    // Dt/L² = 1e-14 × 200 / 1e-12 = 2 at the end (computed).
    assert!((choice.slab_time.unwrap()[1] - 2.0).abs() < 1e-12);
}

#[test]
fn an_inverted_window_is_refused() {
    let bad = ChoiceInput {
        window_s: [2.0, 1.0],
        ..disk(1e-3, 1.0)
    };
    assert_eq!(
        recommend_model(&bad).unwrap_err().to_string(),
        "window end must be later than the window start, got 1"
    );
}
