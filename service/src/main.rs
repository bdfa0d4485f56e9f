//! `startmargind`: the startmargin gRPC server binary. Reads the layered configuration (exit 64
//! when it is invalid), sets up logging, serves until SIGTERM or SIGINT, then drains with a
//! deadline. Everything else lives in the library so that tests drive the same server.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Parser, Subcommand};
use startmargin_service::config::{Config, LogFormat};
use tracing::info;
use tracing_subscriber::EnvFilter;

/// Exit code for an invalid configuration (EX_USAGE of sysexits.h).
const EXIT_INVALID_CONFIG: u8 = 64;

/// Overnight cold-start outlook for parked diesel vehicles, over gRPC.
#[derive(Debug, Parser)]
#[command(name = "startmargind", version, about)]
struct Cli {
    /// TOML configuration file; `STARTMARGIN_*` environment variables override it.
    #[arg(long, global = true, value_name = "FILE")]
    config: Option<PathBuf>,
    #[command(subcommand)]
    command: Option<Command>,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Serve the API, health and reflection until SIGTERM or SIGINT (the default).
    Serve,
    /// Check the configuration as `serve` would (keys, TLS files, token sources), print the
    /// effective configuration as TOML and exit (64 when anything is invalid).
    CheckConfig,
    /// Ask the local server whether it serves (gRPC health; `/healthz` with TLS): exit 0 when it
    /// does, 1 otherwise. For container health checks without a shell.
    HealthCheck,
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let config = match Config::load(cli.config.as_deref()) {
        Ok(config) => config,
        Err(e) => {
            eprintln!("startmargind: {e}");
            return ExitCode::from(EXIT_INVALID_CONFIG);
        }
    };
    let command = cli.command.unwrap_or(Command::Serve);
    if matches!(command, Command::CheckConfig | Command::Serve)
        && let Err(e) = startmargin_service::server::check_startup(&config)
    {
        eprintln!("startmargind: invalid configuration: {e:#}");
        return ExitCode::from(EXIT_INVALID_CONFIG);
    }
    match command {
        Command::CheckConfig => match config.to_toml() {
            Ok(text) => {
                print!("{text}");
                ExitCode::SUCCESS
            }
            Err(e) => {
                eprintln!("startmargind: {e}");
                ExitCode::FAILURE
            }
        },
        Command::HealthCheck => {
            let probe = tokio::runtime::Builder::new_current_thread()
                .enable_all()
                .build()
                .map_err(anyhow::Error::from)
                .and_then(|rt| {
                    rt.block_on(startmargin_service::server::probe(
                        &config,
                        std::time::Duration::from_secs(3),
                    ))
                });
            match probe {
                Ok(()) => ExitCode::SUCCESS,
                Err(e) => {
                    eprintln!("startmargind: unhealthy: {e:#}");
                    ExitCode::FAILURE
                }
            }
        }
        Command::Serve => {
            init_tracing(&config);
            let runtime = match tokio::runtime::Builder::new_multi_thread()
                .enable_all()
                .build()
            {
                Ok(runtime) => runtime,
                Err(e) => {
                    eprintln!("startmargind: cannot start the async runtime: {e}");
                    return ExitCode::FAILURE;
                }
            };
            match runtime.block_on(serve(config)) {
                Ok(()) => ExitCode::SUCCESS,
                Err(e) => {
                    tracing::error!("{e:#}");
                    ExitCode::FAILURE
                }
            }
        }
    }
}

fn init_tracing(config: &Config) {
    // `validate()` has already checked the filter.
    let filter = EnvFilter::try_new(&config.log_level).unwrap_or_else(|_| EnvFilter::new("info"));
    let builder = tracing_subscriber::fmt()
        .with_env_filter(filter)
        .with_writer(std::io::stderr)
        .with_ansi(std::io::IsTerminal::is_terminal(&std::io::stderr()));
    match config.log_format {
        LogFormat::Human => builder.init(),
        LogFormat::Json => builder.json().flatten_event(true).init(),
    }
}

async fn serve(config: Config) -> anyhow::Result<()> {
    // Handlers first, so that a signal during start-up drains instead of killing the process.
    let signal = shutdown_signal()?;
    let effective = serde_json::to_string(&config)?;
    let server = startmargin_service::spawn(config).await?;
    // The configuration holds paths and variable names only, never a token or a key.
    info!(addr = %server.addr, config = %effective, version = env!("CARGO_PKG_VERSION"), "startmargind started");
    let signal = signal.await;
    info!(signal, "shutdown requested; draining");
    server.shutdown().await?;
    info!("stopped");
    Ok(())
}

/// Installs the SIGTERM and SIGINT handlers; the future names the first signal received.
#[cfg(unix)]
fn shutdown_signal() -> anyhow::Result<impl Future<Output = &'static str>> {
    use tokio::signal::unix::{SignalKind, signal};
    let mut term = signal(SignalKind::terminate())?;
    let mut int = signal(SignalKind::interrupt())?;
    Ok(async move {
        tokio::select! {
            _ = term.recv() => "SIGTERM",
            _ = int.recv() => "SIGINT",
        }
    })
}

/// Waits for Ctrl-C.
#[cfg(not(unix))]
fn shutdown_signal() -> anyhow::Result<impl Future<Output = &'static str>> {
    Ok(async {
        let _ = tokio::signal::ctrl_c().await;
        "ctrl-c"
    })
}
