//! Deterministic generator of extracts for the demo scenario: a fictional volunteer
//! river-monitoring network. All names and values are invented.
//!
//! ```text
//! cargo run --release --example generate -- --rows 1000000 > samples_1m.csv
//! cargo run --release --example generate -- --demo > demo/field_samples.csv
//! cargo run --release --example generate -- --rows 1000000 --month 3 > samples_m3.csv
//! ```
//!
//! `--demo` writes the bundled 2,000-row demo extract with its planted problems. `--month K`
//! (K ≥ 1) changes about 1% of the rows of month 0 per month, deterministically, the way a
//! monthly re-extract would (corrections at source, new rows appended, a few rows withdrawn).

use std::io::{BufWriter, Write};

/// splitmix64: small, fast and fully deterministic across platforms.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn below(&mut self, n: u64) -> u64 {
        self.next() % n
    }
    fn unit(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }
    fn normal(&mut self, mean: f64, sd: f64) -> f64 {
        // Box–Muller.
        let u1 = self.unit().max(1e-12);
        let u2 = self.unit();
        mean + sd * (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }
}

const SITES: [&str; 8] = [
    "Mill Creek",
    "Alder Brook",
    "Heron Pool",
    "Stony Ford",
    "Willow Bend",
    "Fox Hollow Weir",
    "Upper Marsh Outfall",
    "Quarry Run",
];
const WEATHER: [&str; 5] = ["clear", "cloudy", "rain", "fog", "snow"];
const NOTES: [&str; 6] = [
    "",
    "",
    "",
    "bank eroded near gauge",
    "algae on rocks",
    "cattle upstream",
];

fn row(rng: &mut Rng, i: u64, demo: bool) -> Vec<String> {
    let site_idx = rng.below(SITES.len() as u64) as usize;
    let mut site = SITES[site_idx].to_string();
    let day = 1 + (i * 7 + rng.below(5)) % 365;
    let date = chrono_like(2025, day);
    let volunteer = format!("V-{:03}", 1 + rng.below(120));
    let temp = rng.normal(12.0 + 6.0 * (site_idx as f64 / 8.0), 3.5);
    let mut temp_s = format!("{temp:.1}");
    let ph = rng.normal(7.4, 0.35);
    let mut ph_s = format!("{ph:.2}");
    let turb = rng.normal(8.0, 3.0).abs();
    let mut turb_s = format!("{turb:.1}");
    let oxygen = rng.normal(9.0, 1.2);
    let mut weather =
        WEATHER[rng.below(if (60..=330).contains(&day) { 4 } else { 5 }) as usize].to_string();
    let notes = NOTES[rng.below(NOTES.len() as u64) as usize].to_string();
    let roll = rng.below(1000);
    // Planted problems, at rates that stand out in a profile.
    if roll < 30 {
        turb_s = "-999".into(); // meter absent
    }
    if site_idx == 0 {
        match rng.below(100) {
            0..=5 => site = "mill creek".into(),
            6..=7 => site = "MILL CREEK".into(),
            8 => site = "Mill Craek".into(),
            _ => {}
        }
    }
    if site_idx == 2 && rng.below(100) < 5 {
        site = " Heron Pool".into();
    }
    if site_idx == 3 && rng.below(100) < 4 {
        site = "Stony Ford.".into();
    }
    let w = rng.below(1000);
    if w < 4 {
        weather = [
            "light drizzle then sun",
            "overcast-ish",
            "rain?",
            "windy, dry",
        ][w as usize]
            .into();
    }
    if demo {
        match i {
            412 => ph_s = "71".into(),
            1210 => ph_s = "14.8".into(),
            1533 => temp_s = "185.0".into(),
            _ => {}
        }
    } else if roll == 999 {
        ph_s = format!("{:.0}", ph * 10.0);
    }
    vec![
        format!("S-{i:05}"),
        site,
        date,
        volunteer,
        temp_s,
        ph_s,
        turb_s,
        format!("{oxygen:.1}"),
        weather,
        "no".into(),
        notes,
    ]
}

fn chrono_like(year: u32, day_of_year: u64) -> String {
    const DAYS: [u64; 12] = [31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31];
    let mut d = day_of_year;
    for (m, len) in DAYS.iter().enumerate() {
        if d <= *len {
            return format!("{year}-{:02}-{d:02}", m + 1);
        }
        d -= len;
    }
    format!("{year}-12-31")
}

fn main() {
    let mut rows: u64 = 2000;
    let mut demo = false;
    let mut month: u64 = 0;
    let mut args = std::env::args().skip(1);
    while let Some(a) = args.next() {
        match a.as_str() {
            "--demo" => demo = true,
            "--rows" => rows = args.next().and_then(|v| v.parse().ok()).expect("--rows N"),
            "--month" => month = args.next().and_then(|v| v.parse().ok()).expect("--month K"),
            other => {
                eprintln!(
                    "unknown argument {other}; see the comment at the top of examples/generate.rs"
                );
                std::process::exit(2);
            }
        }
    }
    let stdout = std::io::stdout();
    let mut out = BufWriter::with_capacity(1 << 20, stdout.lock());
    writeln!(
        out,
        "sample_id,site,sampled_on,volunteer,water_temp_c,ph,turbidity_ntu,dissolved_oxygen_mg_l,weather,calibrated,notes"
    )
    .unwrap();
    for i in 1..=rows {
        let mut rng = Rng(i.wrapping_mul(0x2545_F491_4F6C_DD1D));
        let mut r = row(&mut rng, i, demo);
        if demo && i == 977 {
            // A duplicate visit: the same bottle logged twice.
            let mut prev = Rng((i - 1).wrapping_mul(0x2545_F491_4F6C_DD1D));
            let twin = row(&mut prev, i - 1, demo);
            r = twin;
            r[0] = format!("S-{i:05}");
        }
        // Each month changes about 1% of rows for good: a correction at source (0.8%) or a
        // withdrawn row (0.1%). The draw depends only on the row and the month, so month K
        // holds every change of months 1..K, as real re-extracts do.
        let mut withdrawn = false;
        for j in 1..=month {
            let mut churn =
                Rng(i.wrapping_mul(0x9E37_79B9_7F4A_7C15) ^ j.wrapping_mul(0xD1B5_4A32_D192_ED03));
            match churn.below(1000) {
                0..=7 => r[4] = format!("{:.1}", churn.normal(12.0, 3.0)),
                8 => withdrawn = true,
                _ => {}
            }
        }
        if withdrawn {
            continue;
        }
        let line: Vec<String> = r.iter().map(|f| quote(f)).collect();
        writeln!(out, "{}", line.join(",")).unwrap();
    }
    for j in 0..(rows / 100) * month.min(1) * month {
        let i = rows + j + 1;
        let mut rng = Rng(i.wrapping_mul(0x2545_F491_4F6C_DD1D));
        let r = row(&mut rng, i, false);
        let line: Vec<String> = r.iter().map(|f| quote(f)).collect();
        writeln!(out, "{}", line.join(",")).unwrap();
    }
    out.flush().unwrap();
}

fn quote(f: &str) -> String {
    if f.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", f.replace('"', "\"\""))
    } else {
        f.to_string()
    }
}
