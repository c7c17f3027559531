//! Check 2: a Jeffcott (Laval) rotor built from physical data, against the textbook critical speed.

use crate::support::{critical_near, engine_config, err_pct, run, sim_config};
use std::f64::consts::PI;
use veer_tracker::engine::EventKind;
use veer_tracker::sim::{jeffcott_stiffness, natural_rpm, SimMode, SpeedProfile};

#[test]
fn jeffcott_rotor_from_physical_data() {
    // Steel: E = 210 GPa (EN 1993-1-1 §3.2.6), ρ = 7850 kg/m³ (EN 1991-1-1 Table A.4); REFERENCES §5,
    // confirmed.
    let (e, rho) = (210e9, 7850.0);
    // Shaft d = 30 mm, bearing span L = 500 mm (REFERENCES §5 worked example, confirmed).
    let (d, l): (f64, f64) = (0.030, 0.500);
    // A steel disk of 200 mm diameter and 40.5 mm thickness: ρπD²t/4 = 9.99 kg, the example's 10 kg.
    let (disk_d, disk_t) = (0.200, 0.0405);
    let m = rho * PI * disk_d * disk_d / 4.0 * disk_t;
    assert!((m - 10.0).abs() < 0.05, "disk mass {m}");
    // k = 48EI/L³ with I = πd⁴/64, simply supported massless shaft with a central disk (NPTEL rotor
    // dynamics, R. Tiwari, module 2; REFERENCES §5, confirmed), by hand and by the library.
    let i = PI * d.powi(4) / 64.0;
    let k_hand = 48.0 * e * i / l.powi(3);
    let k = jeffcott_stiffness(e, d, l);
    assert!((k - k_hand).abs() < 1e-6 * k_hand, "k {k} vs {k_hand}");
    // The worked example: k = 3 206 309 N/m (REFERENCES §5, confirmed).
    assert!((k - 3_206_309.0).abs() < 1.0, "k = {k}");
    // ωcr = √(k/m); with 10 kg, Nc = 5 407.2 r/min (REFERENCES §5, recomputed).
    let nc_hand = (k_hand / m).sqrt() * 60.0 / (2.0 * PI);
    assert!((natural_rpm(k, m) - nc_hand).abs() < 1e-9 * nc_hand);
    assert!((natural_rpm(k, 10.0) - 5407.2).abs() < 0.1);

    let zeta = 0.03;
    let mode = SimMode {
        natural_rpm: nc_hand,
        damping_ratio: zeta,
        eccentricity: 5.0,
        heavy_spot_deg: 200.0,
        natural_rpm_end: None,
        heavy_spot_step: None,
    };
    // 1000 → 8000 r/min over 100 s: η = (dΩ/dt)/ωn² ≈ 2·10⁻⁵ (quasi-steady, REFERENCES §6).
    let profile = SpeedProfile::ramp(1000.0, 8000.0, 100.0);
    let sim = sim_config(profile, 4000.0, vec![mode], 0.5);
    let out = run(&sim, &engine_config(&sim), false);
    let ev = out.single(EventKind::RunUp);
    let c = critical_near(ev, nc_hand);
    let fit = c.fit.as_ref().expect("a single-mode fit");
    eprintln!(
        "check 2: m {m:.3} kg, k {k:.0} N/m, √(k/m) {nc_hand:.1} rpm; fit Nn {:.1} ({:+.3} %), \
         Nc {:.1} ({:+.3} % vs √(k/m)), ζ fit {:.4}",
        fit.natural_rpm,
        err_pct(fit.natural_rpm, nc_hand),
        c.speed_rpm,
        err_pct(c.speed_rpm, nc_hand),
        fit.damping_ratio
    );
    assert!(
        err_pct(fit.natural_rpm, nc_hand).abs() < 1.0,
        "fit {}",
        fit.natural_rpm
    );
    assert!(
        err_pct(c.speed_rpm, nc_hand).abs() < 1.0,
        "Nc {}",
        c.speed_rpm
    );
}
