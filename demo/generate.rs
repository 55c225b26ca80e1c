//! Generates the bundled demo: an invented intraday strategy ("Lantern",
//! 50 parameter sets) traded by an invented desk on four FX pairs and a US
//! index CFD from 2021 to 2024, plus invented release calendars covering the
//! same span. Nothing here is an official schedule or real trading.
//!
//! Run: `cargo run --example generate-demo` (writes demo/trades.csv and
//! calendars/demo-*.{ics,csv}; output is identical for the same seed).
//!
//! Rules:
//! - Calendar (all dates generated, not taken from any publisher):
//!   USD (ICS, America/New_York): payrolls report on the first Friday
//!   08:30 as an RRULE; consumer prices on the first weekday on or after the
//!   12th, 08:30; rate decision eight times a year on the third Wednesday of
//!   Jan/Mar/May/Jun/Jul/Sep/Nov/Dec, 14:00; retail sales (medium) on the
//!   first weekday on or after the 15th, 08:30; business survey (medium) on
//!   the first weekday of the month 10:00; weekly claims (low) Thursdays.
//!   EUR (CSV, Europe/Berlin date+time columns): rate decision eight times a
//!   year on the second Thursday of Jan/Mar/Apr/Jun/Jul/Sep/Oct/Dec, 14:15;
//!   flash inflation on the last weekday of the month 11:00; business
//!   climate (medium) on the first weekday on or after the 24th, 10:00.
//!   GBP and JPY (ICS, Europe/London and Asia/Tokyo): UK consumer prices on
//!   the first Wednesday on or after the 15th 07:00; UK rate decision on the
//!   first Thursday of Feb/Mar/May/Jun/Aug/Sep/Nov/Dec 12:00; UK labour
//!   figures (medium) on the second Tuesday 07:00; Japan rate decision on the
//!   last Friday of Jan/Mar/Apr/Jun/Jul/Sep/Oct/Dec 12:00; Japan trade
//!   balance (low) on the third Monday 08:50.
//! - Trades: 50 runs; each run has an edge, a holding time and a "release
//!   luck" drawn from the seed. Opens fall on weekdays 06:00–20:00 UTC;
//!   holding times are log-normal. P/L is the run's edge plus Student-t(3)
//!   noise scaled by √(holding hours); a trade open across a high-tier
//!   release window of one of its currencies gets five times the noise plus
//!   the run's release luck times a half-normal move, so a few runs look
//!   best only because of release trades. Times are written on a broker
//!   server clock, America/New_York+07:00, as `YYYY.MM.DD HH:MM:SS`.

use chrono::{Datelike, Duration, NaiveDate, NaiveDateTime, NaiveTime, TimeZone, Weekday};
use chrono_tz::Tz;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::fmt::Write as _;
use std::path::Path;

const SEED: u64 = 20_261_202;
const FIRST_YEAR: i32 = 2021;
const LAST_YEAR: i32 = 2024;
const RUNS: usize = 50;

struct Rel {
    utc: NaiveDateTime,
    local: NaiveDateTime,
    zone: Tz,
    title: &'static str,
    currency: &'static str,
    tier: &'static str,
    category: &'static str,
}

/// Calendar months: one month either side of the trades, so the calendar
/// covers every trade.
fn months() -> impl Iterator<Item = (i32, u32)> {
    std::iter::once((FIRST_YEAR - 1, 12))
        .chain((FIRST_YEAR..=LAST_YEAR).flat_map(|y| (1..=12).map(move |m| (y, m))))
        .chain(std::iter::once((LAST_YEAR + 1, 1)))
}

fn nth_weekday(y: i32, m: u32, wd: Weekday, n: u8) -> NaiveDate {
    NaiveDate::from_weekday_of_month_opt(y, m, wd, n).expect("valid")
}

fn last_weekday_of(y: i32, m: u32, wd: Weekday) -> NaiveDate {
    NaiveDate::from_weekday_of_month_opt(y, m, wd, 5).unwrap_or_else(|| nth_weekday(y, m, wd, 4))
}

fn weekday_on_or_after(d: NaiveDate) -> NaiveDate {
    let mut d = d;
    while matches!(d.weekday(), Weekday::Sat | Weekday::Sun) {
        d += Duration::days(1);
    }
    d
}

fn last_weekday_of_month(y: i32, m: u32) -> NaiveDate {
    let next = if m == 12 {
        NaiveDate::from_ymd_opt(y + 1, 1, 1)
    } else {
        NaiveDate::from_ymd_opt(y, m + 1, 1)
    }
    .unwrap();
    let mut d = next - Duration::days(1);
    while matches!(d.weekday(), Weekday::Sat | Weekday::Sun) {
        d -= Duration::days(1);
    }
    d
}

fn rel(
    date: NaiveDate,
    hm: (u32, u32),
    zone: Tz,
    title: &'static str,
    currency: &'static str,
    tier: &'static str,
    category: &'static str,
) -> Rel {
    let local = date.and_time(NaiveTime::from_hms_opt(hm.0, hm.1, 0).unwrap());
    let utc = zone
        .from_local_datetime(&local)
        .earliest()
        .expect("demo times avoid DST gaps")
        .naive_utc();
    Rel {
        utc,
        local,
        zone,
        title,
        currency,
        tier,
        category,
    }
}

fn calendar() -> Vec<Rel> {
    use chrono_tz::{America::New_York as NY, Asia::Tokyo, Europe::Berlin, Europe::London};
    let mut v = Vec::new();
    for (y, m) in months() {
        let d = |day| NaiveDate::from_ymd_opt(y, m, day).unwrap();
        v.push(rel(
            nth_weekday(y, m, Weekday::Fri, 1),
            (8, 30),
            NY,
            "US payrolls report",
            "USD",
            "high",
            "employment",
        ));
        v.push(rel(
            weekday_on_or_after(d(12)),
            (8, 30),
            NY,
            "US consumer prices",
            "USD",
            "high",
            "inflation",
        ));
        if [1, 3, 5, 6, 7, 9, 11, 12].contains(&m) {
            v.push(rel(
                nth_weekday(y, m, Weekday::Wed, 3),
                (14, 0),
                NY,
                "US rate decision",
                "USD",
                "high",
                "rates",
            ));
        }
        v.push(rel(
            weekday_on_or_after(d(15)),
            (8, 30),
            NY,
            "US retail sales",
            "USD",
            "medium",
            "consumer",
        ));
        v.push(rel(
            weekday_on_or_after(d(1)),
            (10, 0),
            NY,
            "US business survey",
            "USD",
            "medium",
            "business",
        ));
        if [1, 3, 4, 6, 7, 9, 10, 12].contains(&m) {
            v.push(rel(
                nth_weekday(y, m, Weekday::Thu, 2),
                (14, 15),
                Berlin,
                "Euro area rate decision",
                "EUR",
                "high",
                "rates",
            ));
        }
        v.push(rel(
            last_weekday_of_month(y, m),
            (11, 0),
            Berlin,
            "Euro area flash inflation",
            "EUR",
            "high",
            "inflation",
        ));
        v.push(rel(
            weekday_on_or_after(d(24)),
            (10, 0),
            Berlin,
            "Euro area business climate",
            "EUR",
            "medium",
            "business",
        ));
        let mut uk_cpi = d(15);
        while uk_cpi.weekday() != Weekday::Wed {
            uk_cpi += Duration::days(1);
        }
        v.push(rel(
            uk_cpi,
            (7, 0),
            London,
            "UK consumer prices",
            "GBP",
            "high",
            "inflation",
        ));
        if [2, 3, 5, 6, 8, 9, 11, 12].contains(&m) {
            v.push(rel(
                nth_weekday(y, m, Weekday::Thu, 1),
                (12, 0),
                London,
                "UK rate decision",
                "GBP",
                "high",
                "rates",
            ));
        }
        v.push(rel(
            nth_weekday(y, m, Weekday::Tue, 2),
            (7, 0),
            London,
            "UK labour figures",
            "GBP",
            "medium",
            "employment",
        ));
        if [1, 3, 4, 6, 7, 9, 10, 12].contains(&m) {
            v.push(rel(
                last_weekday_of(y, m, Weekday::Fri),
                (12, 0),
                Tokyo,
                "Japan rate decision",
                "JPY",
                "high",
                "rates",
            ));
        }
        v.push(rel(
            nth_weekday(y, m, Weekday::Mon, 3),
            (8, 50),
            Tokyo,
            "Japan trade balance",
            "JPY",
            "low",
            "trade",
        ));
    }
    // Weekly claims: every Thursday 08:30 New York.
    let mut d = nth_weekday(FIRST_YEAR - 1, 12, Weekday::Thu, 1);
    while d < NaiveDate::from_ymd_opt(LAST_YEAR + 1, 2, 1).unwrap() {
        v.push(rel(
            d,
            (8, 30),
            NY,
            "US weekly claims",
            "USD",
            "low",
            "employment",
        ));
        d += Duration::days(7);
    }
    v.sort_by_key(|r| r.utc);
    v
}

fn ics_escape(s: &str) -> String {
    s.replace('\\', "\\\\")
        .replace(',', "\\,")
        .replace(';', "\\;")
}

fn write_ics(path: &Path, rels: &[&Rel], payroll_rrule: bool) {
    let mut s = String::new();
    s.push_str("BEGIN:VCALENDAR\r\nVERSION:2.0\r\nPRODID:-//eventfence//demo calendar (generated, not official)//EN\r\nCALSCALE:GREGORIAN\r\n");
    let stamp = "20261202T000000Z";
    if payroll_rrule {
        // The payrolls series as one recurring event, to exercise RRULE.
        let first = rels
            .iter()
            .find(|r| r.title == "US payrolls report")
            .expect("payrolls");
        let _ = write!(
            s,
            "BEGIN:VEVENT\r\nUID:us-payrolls@demo.eventfence\r\nDTSTAMP:{stamp}\r\nDTSTART;TZID=America/New_York:{}\r\nRRULE:FREQ=MONTHLY;BYDAY=1FR;UNTIL={}0131T235959Z\r\nSUMMARY:US payrolls report\r\nPRIORITY:1\r\nCATEGORIES:USD,employment\r\nX-EVENTFENCE-REGION:US\r\nEND:VEVENT\r\n",
            first.local.format("%Y%m%dT%H%M%S"),
            LAST_YEAR + 1
        );
    }
    for r in rels {
        if payroll_rrule && r.title == "US payrolls report" {
            continue;
        }
        let priority = match r.tier {
            "high" => 1,
            "medium" => 5,
            _ => 8,
        };
        let uid = format!(
            "{}-{}@demo.eventfence",
            r.title.to_lowercase().replace(' ', "-"),
            r.local.format("%Y%m%d")
        );
        let _ = write!(
            s,
            "BEGIN:VEVENT\r\nUID:{uid}\r\nDTSTAMP:{stamp}\r\nDTSTART;TZID={}:{}\r\nSUMMARY:{}\r\nPRIORITY:{priority}\r\nCATEGORIES:{},{}\r\nEND:VEVENT\r\n",
            r.zone.name(),
            r.local.format("%Y%m%dT%H%M%S"),
            ics_escape(r.title),
            r.currency,
            r.category
        );
    }
    s.push_str("END:VCALENDAR\r\n");
    std::fs::write(path, s).expect("write ics");
}

fn write_csv(path: &Path, rels: &[&Rel]) {
    let mut s = String::from("id,date,time,title,currency,tier,category,region\n");
    for (i, r) in rels.iter().enumerate() {
        let _ = writeln!(
            s,
            "eur-{:04},{},{},{},{},{},{},EA",
            i + 1,
            r.local.format("%Y-%m-%d"),
            r.local.format("%H:%M"),
            r.title,
            r.currency,
            r.tier,
            r.category
        );
    }
    std::fs::write(path, s).expect("write csv");
}

fn normal(rng: &mut ChaCha8Rng) -> f64 {
    let u1: f64 = rng.random::<f64>().max(1e-12);
    let u2: f64 = rng.random();
    (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
}

fn student_t3(rng: &mut ChaCha8Rng) -> f64 {
    let z = normal(rng);
    let chi2: f64 = (0..3).map(|_| normal(rng).powi(2)).sum();
    z / (chi2 / 3.0).sqrt()
}

fn main() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let cal = calendar();
    let usd: Vec<&Rel> = cal.iter().filter(|r| r.currency == "USD").collect();
    let eur: Vec<&Rel> = cal.iter().filter(|r| r.currency == "EUR").collect();
    let gbp_jpy: Vec<&Rel> = cal
        .iter()
        .filter(|r| r.currency == "GBP" || r.currency == "JPY")
        .collect();
    write_ics(&root.join("calendars/demo-usd.ics"), &usd, true);
    write_csv(&root.join("calendars/demo-eur.csv"), &eur);
    write_ics(&root.join("calendars/demo-gbp-jpy.ics"), &gbp_jpy, false);

    // High-tier windows per currency, UTC seconds, for the P/L rule.
    let high: Vec<(i64, &str)> = cal
        .iter()
        .filter(|r| r.tier == "high")
        .map(|r| (r.utc.and_utc().timestamp(), r.currency))
        .collect();
    let instruments: [(&str, &[&str], f64); 5] = [
        ("EURUSD", &["EUR", "USD"], 0.35),
        ("GBPUSD", &["GBP", "USD"], 0.2),
        ("USDJPY", &["USD", "JPY"], 0.15),
        ("EURGBP", &["EUR", "GBP"], 0.1),
        ("US500", &["USD"], 0.2),
    ];
    let server: Tz = chrono_tz::America::New_York;
    let shift = Duration::hours(7);
    let fmt = |secs: i64| {
        let utc = chrono::DateTime::from_timestamp(secs, 0).unwrap();
        (utc.with_timezone(&server).naive_local() + shift)
            .format("%Y-%m-%dT%H:%M:%S")
            .to_string()
    };
    let mut rng = ChaCha8Rng::seed_from_u64(SEED);
    let start = NaiveDate::from_ymd_opt(FIRST_YEAR, 1, 4).unwrap();
    let days = (NaiveDate::from_ymd_opt(LAST_YEAR, 12, 31).unwrap() - start).num_days();
    let mut out = String::from("run,opened_at,closed_at,instrument,side,size,pnl\n");
    for run in 1..=RUNS {
        let edge = 1.5 + 1.2 * normal(&mut rng);
        let hold_median_min = 20.0 + 200.0 * rng.random::<f64>();
        let luck = 0.6 + 1.4 * normal(&mut rng);
        let n = 300 + rng.random_range(0..200);
        let mut trades = Vec::with_capacity(n);
        for _ in 0..n {
            let mut day = start + Duration::days(rng.random_range(0..=days));
            while matches!(day.weekday(), Weekday::Sat | Weekday::Sun) {
                day += Duration::days(1);
            }
            let open = day.and_hms_opt(0, 0, 0).unwrap().and_utc().timestamp()
                + rng.random_range(6 * 3600..20 * 3600) / 60 * 60;
            let hold = (hold_median_min * (0.9 * normal(&mut rng)).exp() * 60.0)
                .round()
                .min(3.0 * 86400.0) as i64;
            let mut close = open + hold.max(60);
            // Markets are shut at weekends: a close that would fall there
            // moves to Monday 00:05 UTC.
            let close_day = chrono::DateTime::from_timestamp(close, 0)
                .unwrap()
                .date_naive();
            if matches!(close_day.weekday(), Weekday::Sat | Weekday::Sun) {
                let monday = weekday_on_or_after(close_day);
                close = monday.and_hms_opt(0, 5, 0).unwrap().and_utc().timestamp();
            }
            let u: f64 = rng.random();
            let mut acc = 0.0;
            let inst = instruments
                .iter()
                .find(|(_, _, w)| {
                    acc += w;
                    u < acc
                })
                .unwrap_or(&instruments[0]);
            let exposed = high
                .iter()
                .any(|&(t, c)| inst.1.contains(&c) && open <= t + 30 * 60 && close >= t - 15 * 60);
            let scale = 18.0 * (hold as f64 / 3600.0).sqrt().max(0.3);
            let mut pnl = edge + scale * student_t3(&mut rng);
            if exposed {
                pnl = edge
                    + 5.0 * scale * student_t3(&mut rng)
                    + luck * 120.0 * normal(&mut rng).abs();
            }
            let side = if rng.random::<bool>() { "buy" } else { "sell" };
            let size = [0.5, 1.0, 2.0][rng.random_range(0..3)];
            trades.push((
                open,
                close,
                inst.0,
                side,
                size,
                (pnl * 100.0).round() / 100.0,
            ));
        }
        trades.sort_by_key(|t| t.0);
        for (o, c, i, s, z, p) in trades {
            let _ = writeln!(out, "p{run:02},{},{},{i},{s},{z},{p:.2}", fmt(o), fmt(c));
        }
    }
    std::fs::write(root.join("demo/trades.csv"), out).expect("write trades");
    eprintln!("wrote demo/trades.csv and calendars/demo-usd.ics, demo-eur.csv, demo-gbp-jpy.ics");
}
