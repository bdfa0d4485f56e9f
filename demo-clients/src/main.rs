//! `evening-run`: the evening check of an invented depot's fleet before a cold front.
//!
//! Starts the embedded server on loopback (or uses `--endpoint`), streams the fleet through the
//! SDK's `assess_fleet` with margin paths on, prints a table (or `--json` lines), writes
//! `margin.svg` and `fuel.svg` into `--out`. Exit status: 0 when every vehicle was assessed, 1 on
//! a transport or stream error, 3 when some vehicle got its own error.

use std::path::PathBuf;
use std::process::ExitCode;
use std::time::Duration;

use anyhow::Context;
use clap::Parser;
use startmargin_demo::chart::{self, Assessed};
use startmargin_demo::table::Row;
use startmargin_demo::{console, report, run, scenario};
use startmargin_sdk::Client;

/// Evening start-outlook run of an invented depot (all data invented).
#[derive(Debug, Parser)]
#[command(name = "evening-run", version)]
struct Args {
    /// Server URI (e.g. http://127.0.0.1:50051); without it an embedded server runs on loopback.
    #[arg(long)]
    endpoint: Option<String>,
    /// Directory for the SVG charts.
    #[arg(long, default_value = "demo-output")]
    out: PathBuf,
    /// Print one JSON object per vehicle instead of the table.
    #[arg(long)]
    json: bool,
}

#[tokio::main]
async fn main() -> ExitCode {
    match run(Args::parse()).await {
        Ok(code) => code,
        Err(e) => {
            eprintln!("evening-run: {e:#}");
            ExitCode::from(1)
        }
    }
}

async fn run(args: Args) -> anyhow::Result<ExitCode> {
    let scenario = scenario::evening_cold_front().context("building the scenario")?;
    let (endpoint, server) = match args.endpoint {
        Some(e) => (e, None),
        None => {
            let s = startmargin_service::server::spawn_on_loopback().await?;
            (format!("http://{}", s.addr), Some(s))
        }
    };
    let client = Client::builder([endpoint.as_str()])
        .timeout(Duration::from_secs(10))
        .stream_timeout(Duration::from_secs(120))
        .build()
        .await
        .with_context(|| format!("connecting to {endpoint}"))?;

    let fleet = run::assess_fleet(&client, &scenario).await?;

    let rows: Vec<Row<'_>> = scenario
        .vehicles
        .iter()
        .zip(&fleet.vehicles)
        .map(|(vehicle, outcome)| Row { vehicle, outcome })
        .collect();
    if args.json {
        for r in &rows {
            println!("{}", report::json_line(r.vehicle, r.outcome));
        }
        for plan in &fleet.plans {
            println!("{}", report::plan_line(plan));
        }
    } else {
        print!("{}", console::evening_text(&scenario, &rows));
        let yard_no_starts: f64 = rows
            .iter()
            .filter(|r| !r.vehicle.night.as_pb().depot_id.is_empty())
            .filter_map(|r| r.outcome.as_ref().ok())
            .map(|a| a.no_start_pct / 100.0)
            .sum();
        for plan in &fleet.plans {
            print!("{}", console::plan_text(plan, yard_no_starts));
        }
    }

    let assessed: Vec<Assessed<'_>> = rows
        .iter()
        .filter_map(|r| {
            r.outcome.as_ref().ok().map(|a| Assessed {
                vehicle: r.vehicle,
                assessment: a,
            })
        })
        .collect();
    std::fs::create_dir_all(&args.out)
        .with_context(|| format!("creating {}", args.out.display()))?;
    for (name, svg) in [
        ("margin.svg", chart::margin_chart(&scenario, &assessed)),
        ("fuel.svg", chart::fuel_chart(&scenario, &assessed)),
    ] {
        let path = args.out.join(name);
        std::fs::write(&path, svg).with_context(|| format!("writing {}", path.display()))?;
        eprintln!("wrote {}", path.display());
    }

    if let Some(s) = server {
        s.shutdown().await?;
    }
    let failed = rows.iter().filter(|r| r.outcome.is_err()).count();
    Ok(if failed == 0 {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(3)
    })
}
