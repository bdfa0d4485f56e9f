//! `month-of-mornings`: thirty invented cold mornings of an invented forty-vehicle fleet, fed to
//! the service as observed start attempts, then the service's calibration of each vehicle and
//! the fleet's reliability chart before and after calibration.
//!
//! Starts the embedded server on loopback with a fresh SQLite store in a temporary directory (or
//! uses `--endpoint`, whose store then keeps the history), reports each morning's attempts with
//! `ReportStartAttempts`, prints the calibration table and the scores, and writes
//! `reliability.svg` into `--out`. All data are invented (see `startmargin_demo::mornings`).

use std::path::PathBuf;
use std::process::ExitCode;
use std::time::{Duration, UNIX_EPOCH};

use anyhow::Context;
use clap::Parser;
use startmargin_demo::mornings::{self, Morning, MorningVehicle};
use startmargin_demo::reliability_chart::{Curve, reliability_chart};
use startmargin_sdk::{Client, api};

/// A month of invented cold mornings: start attempts in, calibration and reliability out.
#[derive(Debug, Parser)]
#[command(name = "month-of-mornings", version)]
struct Args {
    /// Server URI (e.g. http://127.0.0.1:50051); without it an embedded server runs on loopback
    /// with a fresh store.
    #[arg(long)]
    endpoint: Option<String>,
    /// Directory for the SVG chart.
    #[arg(long, default_value = "demo-output")]
    out: PathBuf,
}

/// Local midnight before the first morning (2026-01-05 00:00 at UTC−07:00), as a UTC instant:
/// a past January, so that every attempt lies before the server's clock.
const FIRST_MIDNIGHT_UTC_S: u64 = 1_767_596_400;
/// Offset of the depot's local time, for the text.
const LOCAL_OFFSET: &str = "UTC−07:00";
/// Mornings that calibrate before the chart's "after" window opens.
const WARM_UP_MORNINGS: usize = 10;
/// The cold morning every vehicle is assessed for at the end, °C.
const TEST_MORNING_AIR_C: f64 = -16.0;

#[tokio::main]
async fn main() -> ExitCode {
    match run(Args::parse()).await {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("month-of-mornings: {e:#}");
            ExitCode::from(1)
        }
    }
}

async fn run(args: Args) -> anyhow::Result<()> {
    let store_dir =
        std::env::temp_dir().join(format!("startmargin-mornings-{}", std::process::id()));
    let (endpoint, server) = match args.endpoint {
        Some(e) => (e, None),
        None => {
            std::fs::create_dir_all(&store_dir)?;
            let s = startmargin_service::server::spawn_on_loopback_with_store(
                &store_dir.join("starts.db"),
            )
            .await?;
            (format!("http://{}", s.addr), Some(s))
        }
    };
    let client = Client::builder([endpoint.as_str()])
        .timeout(Duration::from_secs(30))
        .build()
        .await
        .with_context(|| format!("connecting to {endpoint}"))?;

    let fleet = mornings::fleet()?;
    let month = mornings::mornings(UNIX_EPOCH + Duration::from_secs(FIRST_MIDNIGHT_UTC_S));
    println!(
        "A month of mornings: {} vehicles, {} mornings, departures at 06:00 local time ({LOCAL_OFFSET}).",
        fleet.len(),
        month.len()
    );
    println!(
        "Air at departure: {:.1} to {:.1} °C. The records say every vehicle is as its archetype; {} are not.\n",
        month.iter().map(|m| m.air_c).fold(f64::INFINITY, f64::min),
        month
            .iter()
            .map(|m| m.air_c)
            .fold(f64::NEG_INFINITY, f64::max),
        fleet
            .iter()
            .filter(|v| v.truth != mornings::Truth::AsRecorded)
            .count()
    );

    let mut no_starts = 0usize;
    let mut refused = 0usize;
    for (day, m) in month.iter().enumerate() {
        let mut attempts = Vec::with_capacity(fleet.len());
        for (i, v) in fleet.iter().enumerate() {
            let d = mornings::draw(&client, v, m, day, i).await?;
            if d.attempt.outcome == api::AttemptOutcome::DidNotFire as i32 {
                no_starts += 1;
            }
            attempts.push(d.attempt);
        }
        for r in client.report_start_attempts(attempts).await? {
            if let Some(api::attempt_result::Outcome::Error(e)) = r.outcome {
                refused += 1;
                eprintln!(
                    "morning {}: attempt {} refused: {}",
                    day + 1,
                    r.index,
                    e.message
                );
            }
        }
    }
    println!(
        "Reported {} attempts ({} did not fire, {} refused).\n",
        fleet.len() * month.len(),
        no_starts,
        refused
    );

    print_calibrations(&client, &fleet, &month).await?;

    let after_from = month[WARM_UP_MORNINGS].at - Duration::from_secs(3600);
    let all = client.fleet_reliability(None, 10).await?;
    let late = client.fleet_reliability(Some(after_from), 10).await?;
    print_scores("whole month", &all);
    print_scores(
        &format!("mornings {}–{}", WARM_UP_MORNINGS + 1, month.len()),
        &late,
    );

    let (Some(before), Some(after)) = (late.uncalibrated.as_ref(), late.calibrated.as_ref()) else {
        anyhow::bail!("the reliability read-out carries no scores");
    };
    std::fs::create_dir_all(&args.out)?;
    let path = args.out.join("reliability.svg");
    let title = "Predicted against observed no-starts — a month of mornings";
    let subtitle = format!(
        "Mornings {}–{} ({} attempts), each predicted before it was learned from:\n\
         with the archetype defaults, and with the calibration of the mornings before it.",
        WARM_UP_MORNINGS + 1,
        month.len(),
        late.attempt_count
    );
    std::fs::write(
        &path,
        reliability_chart(
            title,
            &subtitle,
            &[
                Curve {
                    label: "before: archetype defaults",
                    score: before,
                },
                Curve {
                    label: "after: calibrated per vehicle",
                    score: after,
                },
            ],
        ),
    )?;
    println!("\nWrote {}", path.display());
    if let Some(s) = server {
        s.shutdown().await?;
        let _ = std::fs::remove_dir_all(&store_dir);
    }
    Ok(())
}

fn print_scores(window: &str, r: &api::GetFleetReliabilityResponse) {
    let line = |label: &str, s: Option<&api::ReliabilityScore>| {
        if let Some(s) = s {
            println!(
                "  {label:<26} Brier {:.4}   log loss {:.3}   largest bin gap {:>4.1} points",
                s.brier_score, s.log_loss, s.largest_bin_gap_pct
            );
        }
    };
    println!(
        "Reliability, {window}: {} attempts, {} did not fire",
        r.attempt_count, r.no_start_count
    );
    line("archetype defaults", r.uncalibrated.as_ref());
    line("calibrated per vehicle", r.calibrated.as_ref());
}

/// Each vehicle's calibration and its no-start probability for one more, colder morning: as its
/// archetype, as calibrated, and as it really is (which only the demo knows).
async fn print_calibrations(
    client: &Client,
    fleet: &[MorningVehicle],
    month: &[Morning],
) -> anyhow::Result<()> {
    let last = month.last().context("no mornings")?;
    let test = Morning {
        at: last.at + Duration::from_secs(86_400),
        air_c: TEST_MORNING_AIR_C,
    };
    println!(
        "{:<7} {:<14} {:<22} {:>4} {:>15} {:>10}   no-start at {:.0} °C: {:>8} {:>10} {:>7}",
        "vehicle",
        "archetype",
        "really",
        "obs",
        "thermal K",
        "cranking",
        TEST_MORNING_AIR_C,
        "defaults",
        "calibrated",
        "really"
    );
    for v in fleet {
        let c = client.vehicle_calibration(&v.id, 0).await?;
        let cal = c.calibration.unwrap_or_default();
        let offset = cal.thermal_offset_k.unwrap_or_default();
        let crank = cal.cranking_log_factor.unwrap_or_default();
        let defaults = client
            .assess_vehicle(mornings::night_for(&v.recorded, &test)?.ignore_calibration())
            .await?;
        let calibrated = client
            .assess_vehicle(mornings::night_for(&v.recorded, &test)?)
            .await?;
        let really = client
            .assess_vehicle(mornings::night_for(&v.truth_profile, &test)?.ignore_calibration())
            .await?;
        println!(
            "{:<7} {:<14} {:<22} {:>4} {:>+7.1} ± {:<5.1} {:>+9.0} %   {:>26.1} % {:>9.1} % {:>6.1} %",
            v.id,
            v.archetype,
            v.truth.words(),
            cal.observations,
            offset.mean,
            offset.sd,
            (crank.mean.exp() - 1.0) * 100.0,
            defaults.no_start_pct,
            calibrated.no_start_pct,
            really.no_start_pct,
        );
    }
    println!();
    Ok(())
}
