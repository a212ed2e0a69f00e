//! Cost of one `Monitor::push`, f32 and f64, for a check (all five rungs live) and for a
//! reading. Run: `cargo bench -p steadycal-core --bench push`.

use criterion::{black_box, criterion_group, criterion_main, Criterion};
use steadycal_core::monitor::{Monitor, MonitorConfig};
use steadycal_core::real::Real;
use steadycal_core::sample::Sample;

/// A warmed-up monitor on a proportional-scatter feed (deterministic pseudo-noise).
fn warmed<R: Real>() -> (Monitor<R>, Vec<(R, R)>) {
    let config = MonitorConfig::<R>::default_for_range(R::from_f64(2.0), R::from_f64(1000.0));
    let mut monitor: Monitor<R> = Monitor::new(config).unwrap();
    let mut state = 0x2545_f491_4f6c_dd1du64;
    let mut next = || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state >> 11) as f64 / (1u64 << 53) as f64
    };
    let mut pairs = Vec::with_capacity(4096);
    for _ in 0..4096 {
        let reference = (5f64.ln() + next() * (500f64 / 5.0).ln()).exp();
        let noise = (next() + next() + next() - 1.5) * 2.0;
        let raw = 0.5 + reference * (1.0 + 0.02 * noise);
        pairs.push((R::from_f64(raw), R::from_f64(reference)));
    }
    for (i, &(raw, reference)) in pairs.iter().cycle().take(5000).enumerate() {
        monitor.push(&Sample::check(i as u64, i as f64, raw, reference));
        while monitor.pop_event().is_some() {}
    }
    (monitor, pairs)
}

fn bench_type<R: Real>(c: &mut Criterion, name: &str) {
    let (mut monitor, pairs) = warmed::<R>();
    let mut i = 0usize;
    c.bench_function(&format!("push check {name}"), |b| {
        b.iter(|| {
            let (raw, reference) = pairs[i & 4095];
            i += 1;
            let outcome = monitor.push(black_box(&Sample::check(
                i as u64, i as f64, raw, reference,
            )));
            while monitor.pop_event().is_some() {}
            outcome
        })
    });
    c.bench_function(&format!("push reading {name}"), |b| {
        b.iter(|| {
            let (raw, _) = pairs[i & 4095];
            i += 1;
            monitor.push(black_box(&Sample::reading(i as u64, i as f64, raw)))
        })
    });
}

fn benches(c: &mut Criterion) {
    bench_type::<f32>(c, "f32");
    bench_type::<f64>(c, "f64");
}

criterion_group!(push, benches);
criterion_main!(push);
