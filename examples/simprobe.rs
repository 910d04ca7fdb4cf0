//! Prints the simulator's truth for the embedded demo plan, every 2 s: a
//! tool for tuning scenarios (`cargo run --release --example simprobe`).
use std::sync::Arc;
use termvel::sources::EventSource;
fn main() {
    let (plan, cfg) =
        termvel::config::load_plan(std::env::args().nth(1).as_deref().map(std::path::Path::new), &[]).expect("plan");
    let mut sim = termvel::sim::Simulator::new(Arc::new(cfg), Arc::new(plan));
    while sim.next_event().is_some() {}
    let t0 = sim.truth()[0].t_ns;
    let mut peak = (0.0, 0.0, 0.0);
    for (i, p) in sim.truth().iter().enumerate() {
        let t = (p.t_ns - t0) as f64 * 1e-9;
        if p.v_mps > peak.0 {
            peak = (p.v_mps, p.x_m, t);
        }
        if i % 200 == 0 {
            println!(
                "t={t:6.1} x={:7.0} v={:6.1} km/h a={:5.2} boost={} limit={:4.0} kW motor={:4.0} kW wheel={:4.0} kW soc={:.3} T={:.1} E={:.2} MJ in-boost={:.1} s",
                p.x_m,
                p.v_mps * 3.6,
                p.a_mps2,
                u8::from(p.boosting),
                p.battery_limit_w / 1e3,
                p.motor_power_w / 1e3,
                p.wheel_power_w / 1e3,
                p.soc,
                p.pack_temp_c,
                p.energy_above_reserve_j / 1e6,
                p.boost_time_s
            );
        }
    }
    println!("peak {:.1} km/h at {:.0} m, t = {:.1} s", peak.0 * 3.6, peak.1, peak.2);
}
