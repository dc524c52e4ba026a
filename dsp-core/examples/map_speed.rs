//! Times the direct and the fast (Gaunt) power-map paths on the same random covariance.
//!
//! `cargo run --release -p fieldglass-dsp --example map_speed -- --order 7 --grid-deg 1`
//!
//! Plan construction is timed and printed separately; the last line is
//! `order N grid Gdeg: direct X ms, fast Y ms, speedup Z, max rel err E`.

use fieldglass_dsp::beam::{
    BeamKind, PowerMapPlan, beam_weights, direct_power_map, sn3d_steering_gains,
};
use fieldglass_dsp::sh::{channel_count, order_degree, sh_sn3d};
use fieldglass_dsp::sphere::grid::EquirectGrid;
use std::process::ExitCode;
use std::time::{Duration, Instant};

struct Options {
    order: usize,
    grid_deg: f64,
}

fn parse_options() -> Result<Options, String> {
    let mut options = Options {
        order: 7,
        grid_deg: 1.0,
    };
    let mut args = std::env::args().skip(1);
    while let Some(flag) = args.next() {
        let value = args.next().ok_or_else(|| format!("{flag} needs a value"))?;
        match flag.as_str() {
            "--order" => {
                options.order = value
                    .parse()
                    .map_err(|_| format!("--order: '{value}' is not a whole number"))?
            }
            "--grid-deg" => {
                options.grid_deg = value
                    .parse()
                    .map_err(|_| format!("--grid-deg: '{value}' is not a number"))?
            }
            other => {
                return Err(format!(
                    "unknown option '{other}' (use --order N --grid-deg G)"
                ));
            }
        }
    }
    Ok(options)
}

/// SplitMix64: a small seeded generator, enough for test data.
struct SplitMix(u64);

impl SplitMix {
    fn next_f64(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^= z >> 31;
        (z >> 11) as f64 / (1u64 << 53) as f64 * 2.0 - 1.0
    }
}

/// Median wall time of `run`, repeated until `budget` is spent (at least `min_runs` times).
fn median_ms(min_runs: usize, budget: Duration, mut run: impl FnMut()) -> (f64, usize) {
    let mut times = Vec::new();
    let start = Instant::now();
    while times.len() < min_runs || start.elapsed() < budget {
        let t = Instant::now();
        run();
        times.push(t.elapsed().as_secs_f64() * 1e3);
    }
    times.sort_by(f64::total_cmp);
    (times[times.len() / 2], times.len())
}

fn main() -> ExitCode {
    let options = match parse_options() {
        Ok(o) => o,
        Err(message) => {
            eprintln!("map_speed: {message}");
            return ExitCode::from(2);
        }
    };
    let grid = match EquirectGrid::with_step_deg(options.grid_deg) {
        Ok(g) => g,
        Err(e) => {
            eprintln!("map_speed: {e}");
            return ExitCode::from(2);
        }
    };
    let order = options.order;
    let channels = channel_count(order);
    let mut rng = SplitMix(0x05EE_D0FF_1E1D);
    let mut q = vec![0.0; channels * channels];
    for i in 0..channels {
        for j in i..channels {
            let v = rng.next_f64();
            q[i * channels + j] = v;
            q[j * channels + i] = v;
        }
    }
    let weights = beam_weights(BeamKind::MaxRe, order);

    let plan_start = Instant::now();
    let mut plan = match PowerMapPlan::new(order, grid) {
        Ok(p) => p,
        Err(e) => {
            eprintln!("map_speed: {e}");
            return ExitCode::from(2);
        }
    };
    let plan_ms = plan_start.elapsed().as_secs_f64() * 1e3;
    println!(
        "plan: order {order}, {}x{} grid, {} Gaunt couplings, built in {plan_ms:.2} ms",
        grid.width(),
        grid.height(),
        plan.coupling_count()
    );

    let mut direct = vec![0.0f32; grid.len()];
    let mut fast = vec![0.0f32; grid.len()];
    let (direct_ms, direct_runs) = median_ms(1, Duration::from_millis(1500), || {
        direct_power_map(order, &grid, &q, &weights, &mut direct).expect("valid sizes")
    });
    let (fast_ms, fast_runs) = median_ms(20, Duration::from_millis(1500), || {
        plan.evaluate(&q, &weights, &mut fast).expect("valid sizes")
    });
    println!("runs: direct {direct_runs}, fast {fast_runs} (median times)");

    let peak = direct.iter().fold(0.0f64, |m, &v| m.max((v as f64).abs()));
    let max_error = direct
        .iter()
        .zip(&fast)
        .fold(0.0f64, |m, (&a, &b)| m.max((a as f64 - b as f64).abs()));
    let relative = if peak > 0.0 {
        max_error / peak
    } else {
        max_error
    };

    // The maps are f32; also compare the fast expansion with direct steering in f64 on a
    // sample of pixels, so rounding to f32 cannot hide a difference.
    let mut gains = vec![0.0; order + 1];
    sn3d_steering_gains(&weights, &mut gains);
    let mut worst_f64 = 0.0f64;
    for pixel in (0..grid.len()).step_by(grid.len().div_ceil(2000)) {
        let direction = grid.direction(pixel / grid.width(), pixel % grid.width());
        let y = sh_sn3d(order, direction);
        let v: Vec<f64> = (0..channels)
            .map(|a| gains[order_degree(a).0] * y[a])
            .collect();
        let exact: f64 = (0..channels)
            .map(|i| {
                v[i] * (0..channels)
                    .map(|j| q[i * channels + j] * v[j])
                    .sum::<f64>()
            })
            .sum();
        worst_f64 = worst_f64.max((plan.expanded_value_at(direction) - exact).abs());
    }
    println!(
        "f64 check on sampled pixels: max rel err {:.2e}",
        worst_f64 / peak.max(f64::MIN_POSITIVE)
    );
    println!(
        "order {order} grid {}deg: direct {direct_ms:.3} ms, fast {fast_ms:.4} ms, speedup {:.1}, max rel err {relative:.2e}",
        options.grid_deg,
        direct_ms / fast_ms
    );
    ExitCode::SUCCESS
}
