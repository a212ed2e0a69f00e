//! Pushes a fixed proportional-scatter feed through a monitor: a workload for profilers
//! (`valgrind --tool=callgrind target/release/examples/push_loop [CHECKS] [quadratic]`; the
//! word `quadratic` adds the quadratic term, so the fits use three parameters).
use steadycal_core::monitor::{Monitor, MonitorConfig};
use steadycal_core::sample::Sample;

fn main() {
    let mut config = MonitorConfig::<f32>::default_for_range(2.0, 1000.0);
    config.basis.quadratic = std::env::args().nth(2).as_deref() == Some("quadratic");
    let mut monitor: Monitor<f32> = Monitor::new(config).unwrap();
    let mut state = 0x2545_f491_4f6c_dd1du64;
    let mut next = || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state >> 11) as f64 / (1u64 << 53) as f64
    };
    let checks: u64 = std::env::args()
        .nth(1)
        .and_then(|a| a.parse().ok())
        .unwrap_or(100_000);
    for i in 0..checks {
        let reference = (5f64.ln() + next() * 100f64.ln()).exp();
        let noise = (next() + next() + next() - 1.5) * 2.0;
        let raw = 0.5 + reference * (1.0 + 0.02 * noise);
        monitor.push(&Sample::check(i, i as f64, raw as f32, reference as f32));
        while monitor.pop_event().is_some() {}
    }
    println!("{} {:?}", monitor.rung().name(), monitor.parameters());
}
