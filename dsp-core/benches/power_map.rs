//! Criterion benchmarks of the power-map paths on the 1° equirectangular grid (360 × 180).
//!
//! - `plan_construction/N`: `PowerMapPlan::new` (Gaunt table, Legendre and trig tables).
//! - `fast_evaluate/N`: one `PowerMapPlan::evaluate` on a fixed random covariance.
//!
//! Direct steering is timed by the `map_speed` example (it takes about a second per map at
//! order 7, too slow for a criterion loop).

use criterion::{BenchmarkId, Criterion, criterion_group, criterion_main};
use fieldglass_dsp::beam::{BeamKind, PowerMapPlan, beam_weights};
use fieldglass_dsp::sh::channel_count;
use fieldglass_dsp::sphere::grid::EquirectGrid;
use std::hint::black_box;
use std::time::Duration;

const ORDERS: [usize; 4] = [1, 3, 5, 7];

fn random_symmetric(channels: usize, mut state: u64) -> Vec<f64> {
    let mut next = move || {
        state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = state;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64 * 2.0 - 1.0
    };
    let mut q = vec![0.0; channels * channels];
    for i in 0..channels {
        for j in i..channels {
            let v = next();
            q[i * channels + j] = v;
            q[j * channels + i] = v;
        }
    }
    q
}

fn plan_construction(c: &mut Criterion) {
    let grid = EquirectGrid::with_step_deg(1.0).expect("1° grid");
    let mut group = c.benchmark_group("plan_construction");
    group
        .sample_size(10)
        .measurement_time(Duration::from_secs(3));
    for order in ORDERS {
        group.bench_with_input(BenchmarkId::from_parameter(order), &order, |b, &order| {
            b.iter(|| PowerMapPlan::new(black_box(order), grid).expect("plan"))
        });
    }
    group.finish();
}

fn fast_evaluate(c: &mut Criterion) {
    let grid = EquirectGrid::with_step_deg(1.0).expect("1° grid");
    let mut group = c.benchmark_group("fast_evaluate");
    group
        .sample_size(20)
        .measurement_time(Duration::from_secs(3));
    for order in ORDERS {
        let mut plan = PowerMapPlan::new(order, grid).expect("plan");
        let q = random_symmetric(channel_count(order), 0x5EED + order as u64);
        let weights = beam_weights(BeamKind::MaxRe, order);
        let mut map = vec![0.0f32; grid.len()];
        group.bench_with_input(BenchmarkId::from_parameter(order), &order, |b, _| {
            b.iter(|| {
                plan.evaluate(black_box(&q), &weights, &mut map)
                    .expect("sizes");
                black_box(map[0])
            })
        });
    }
    group.finish();
}

criterion_group!(benches, plan_construction, fast_evaluate);
criterion_main!(benches);
