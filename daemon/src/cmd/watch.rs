//! `veer watch`: runs the daemon until SIGINT or SIGTERM.

use crate::cli::WatchArgs;
use crate::config::model::LogFormat;
use anyhow::{anyhow, Result};
use tokio_util::sync::CancellationToken;
use tracing_subscriber::EnvFilter;

/// Logs through tracing: human lines by default, JSON with the flag or the configuration, the
/// level from `VEER_LOG` (or `RUST_LOG`), `info` when neither is set.
fn init_logging(json: bool) {
    let filter = EnvFilter::try_from_env("VEER_LOG")
        .or_else(|_| EnvFilter::try_from_default_env())
        .unwrap_or_else(|_| EnvFilter::new("info"));
    let builder = tracing_subscriber::fmt()
        .with_env_filter(filter)
        .with_writer(std::io::stderr);
    let _ = if json {
        builder.json().try_init()
    } else {
        builder.try_init()
    };
}

pub(crate) fn run(a: WatchArgs) -> Result<()> {
    let cfg = crate::config::load(&a.config).map_err(|e| anyhow!("{e}"))?;
    init_logging(a.log_json || cfg.daemon.log_format == LogFormat::Json);
    let rt = tokio::runtime::Builder::new_multi_thread()
        .worker_threads(2)
        .enable_all()
        .build()?;
    rt.block_on(async move {
        let shutdown = CancellationToken::new();
        let s = shutdown.clone();
        tokio::spawn(async move {
            wait_for_signal().await;
            s.cancel();
        });
        crate::watch::run(cfg, shutdown).await
    })
}

async fn wait_for_signal() {
    #[cfg(unix)]
    {
        use tokio::signal::unix::{signal, SignalKind};
        match signal(SignalKind::terminate()) {
            Ok(mut term) => {
                tokio::select! {
                    _ = tokio::signal::ctrl_c() => {}
                    _ = term.recv() => {}
                }
            }
            Err(_) => {
                let _ = tokio::signal::ctrl_c().await;
            }
        }
    }
    #[cfg(not(unix))]
    {
        let _ = tokio::signal::ctrl_c().await;
    }
}
