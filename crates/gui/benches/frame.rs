//! One frame's plot data for a 10-million-point transient: what the four plots of the fit view
//! (transient, residuals, I·√t, Cottrell plot) hand to egui_plot, across 1200 pixel columns.
//!
//! `pyramid` is what the window does (bisection per column, block extremes from the
//! precomputed pyramids); `scan` is the plain min/max envelope over every sample in view;
//! `stride` is the naive peer, every k-th sample (fast, but it loses spikes). Target: ≤ 8 ms per
//! frame for the pyramid (a 60 Hz frame is 16.7 ms and the plots must leave room for drawing).
//! The data are synthetic: a Cottrell decay with a deterministic wiggle standing in for noise.

use std::hint::black_box;

use criterion::{Criterion, criterion_group, criterion_main};
use diffusor_gui::decimate::{Pyramid, envelope, envelope_fast, stride};
use diffusor_gui::plots::{Scale, series_in_view};

const N: usize = 10_000_000;
const COLUMNS: usize = 1200;

struct Data {
    time_s: Vec<f64>,
    current_a: Vec<f64>,
    residual_a: Vec<f64>,
    i_sqrt_t: Vec<f64>,
    inv_sqrt_s: Vec<f64>,
    pyramids: [Pyramid; 3],
}

fn data() -> Data {
    // 10 µs sampling for 100 s; S = 1e-5 A·s^½ with a wiggle of 1 %.
    let time_s: Vec<f64> = (1..=N).map(|i| i as f64 * 1e-5).collect();
    let wiggle = |i: usize| 1e-7 * (((i * 7919) % 1013) as f64 / 1013.0 - 0.5);
    let current_a: Vec<f64> = time_s
        .iter()
        .enumerate()
        .map(|(i, t)| 1e-5 / t.sqrt() + wiggle(i))
        .collect();
    let residual_a: Vec<f64> = (0..N).map(wiggle).collect();
    let i_sqrt_t: Vec<f64> = current_a
        .iter()
        .zip(&time_s)
        .map(|(i, t)| i * t.sqrt())
        .collect();
    let inv_sqrt_s: Vec<f64> = time_s.iter().map(|t| 1.0 / t.sqrt()).collect();
    let pyramids = [
        Pyramid::new(&current_a),
        Pyramid::new(&residual_a),
        Pyramid::new(&i_sqrt_t),
    ];
    Data {
        time_s,
        current_a,
        residual_a,
        i_sqrt_t,
        inv_sqrt_s,
        pyramids,
    }
}

/// The window the residual and Cottrell plots show: 1 ms to 10 s.
const WINDOW: std::ops::Range<usize> = 99..1_000_000;

fn frame_pyramid(d: &Data, visible: Option<(f64, f64)>) -> usize {
    let [pc, pr, pi] = &d.pyramids;
    let a = series_in_view(
        &d.time_s,
        0..N,
        Scale::Log,
        visible,
        COLUMNS,
        |i| d.current_a[i] * 1e6,
        Some((&d.current_a, pc)),
    );
    let b = series_in_view(
        &d.time_s,
        WINDOW,
        Scale::Log,
        visible,
        COLUMNS,
        |i| d.residual_a[i] * 1e9,
        Some((&d.residual_a, pr)),
    );
    let c = series_in_view(
        &d.time_s,
        0..N,
        Scale::Log,
        visible,
        COLUMNS,
        |i| d.i_sqrt_t[i] * 1e6,
        Some((&d.i_sqrt_t, pi)),
    );
    let x = |i: usize| d.inv_sqrt_s[i];
    let e = envelope_fast(
        WINDOW,
        x,
        (&d.current_a, pc),
        |i| d.current_a[i] * 1e6,
        x(WINDOW.end - 1),
        x(WINDOW.start),
        COLUMNS,
    );
    a.len() + b.len() + c.len() + e.len()
}

fn frame_scan(d: &Data) -> usize {
    let a = series_in_view(
        &d.time_s,
        0..N,
        Scale::Log,
        None,
        COLUMNS,
        |i| d.current_a[i] * 1e6,
        None,
    );
    let b = series_in_view(
        &d.time_s,
        WINDOW,
        Scale::Log,
        None,
        COLUMNS,
        |i| d.residual_a[i] * 1e9,
        None,
    );
    let c = series_in_view(
        &d.time_s,
        0..N,
        Scale::Log,
        None,
        COLUMNS,
        |i| d.i_sqrt_t[i] * 1e6,
        None,
    );
    let x = |i: usize| d.inv_sqrt_s[i];
    let e = envelope(
        WINDOW,
        x,
        |i| d.current_a[i] * 1e6,
        x(WINDOW.end - 1),
        x(WINDOW.start),
        COLUMNS,
    );
    a.len() + b.len() + c.len() + e.len()
}

fn frame_stride(d: &Data) -> usize {
    let log = |i: usize| d.time_s[i].log10();
    let a = stride(0..N, log, |i| d.current_a[i] * 1e6, COLUMNS);
    let b = stride(WINDOW, log, |i| d.residual_a[i] * 1e9, COLUMNS);
    let c = stride(0..N, log, |i| d.i_sqrt_t[i] * 1e6, COLUMNS);
    let e = stride(
        WINDOW,
        |i| d.inv_sqrt_s[i],
        |i| d.current_a[i] * 1e6,
        COLUMNS,
    );
    a.len() + b.len() + c.len() + e.len()
}

fn bench(c: &mut Criterion) {
    let d = data();
    let mut g = c.benchmark_group("frame_10M");
    g.sample_size(20);
    g.bench_function("pyramid_whole_trace", |b| {
        b.iter(|| frame_pyramid(black_box(&d), None));
    });
    // Zoomed to 0.1–1 s (log10 plot coordinates).
    g.bench_function("pyramid_zoomed", |b| {
        b.iter(|| frame_pyramid(black_box(&d), Some((-1.0, 0.0))));
    });
    g.bench_function("stride_peer", |b| b.iter(|| frame_stride(black_box(&d))));
    g.sample_size(10);
    g.bench_function("scan_envelope_peer", |b| {
        b.iter(|| frame_scan(black_box(&d)));
    });
    g.finish();
    let mut g = c.benchmark_group("prepare_10M");
    g.sample_size(10);
    // Paid once per import (current) and per fit (residuals, I·√t), on the worker thread.
    g.bench_function("pyramid_build", |b| {
        b.iter(|| Pyramid::new(black_box(&d.current_a)));
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
