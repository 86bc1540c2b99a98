//! `resinlot serve`: the read-only web pages over the record (issue #21); the server itself is
//! `crate::web`.

use std::io::Write;
use std::net::SocketAddr;
use std::path::PathBuf;

use crate::cmd::args::{CertificatesFolder, RegisterFolder, SpecsFolder};
use crate::cmd::Outcome;
use crate::error::Error;

/// Arguments of `resinlot serve`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Address and port to listen on. The default answers this PC only; any other address
    /// (such as 0.0.0.0:8640 for the office network) needs --token-file. Port 0 picks a free
    /// port, printed at start.
    #[arg(long, value_name = "ADDR:PORT", default_value = "127.0.0.1:8640", value_parser = bind_address)]
    pub bind: SocketAddr,
    /// A file whose first line is the access token (at least 20 characters of letters,
    /// digits and -_.~+/=). With it every page asks for the token once; the browser then keeps
    /// it in a cookie. Required to listen on an address other than loopback.
    #[arg(long, value_name = "FILE")]
    pub token_file: Option<PathBuf>,
    /// The register folder (`--register`).
    #[command(flatten)]
    pub register: RegisterFolder,
    /// The specs folder (`--specs`).
    #[command(flatten)]
    pub specs: SpecsFolder,
    /// The certificates folder (`--certificates`), from which logged PDFs are served.
    #[command(flatten)]
    pub certificates: CertificatesFolder,
}

/// clap value parser: an IP address and port (`127.0.0.1:8640`, `[::1]:8640`).
fn bind_address(text: &str) -> Result<SocketAddr, String> {
    text.parse().map_err(|_| {
        "not an address and port. Write it as 127.0.0.1:8640 (this PC only) or 0.0.0.0:8640 \
         (the office network, with --token-file)"
            .into()
    })
}

/// Runs the command: serves until stopped (Ctrl-C).
pub fn run(args: &Args) -> anyhow::Result<Outcome> {
    let token = match &args.token_file {
        Some(f) => Some(
            crate::web::access::read_token(f)
                .map_err(|e| e.at(|place| format!("--token-file {place}")))?,
        ),
        None => None,
    };
    let config = crate::web::Config {
        bind: args.bind,
        register: args.register.to_path_buf(),
        specs: args.specs.to_path_buf(),
        certificates: args.certificates.to_path_buf(),
        token,
    };
    let guarded = config.token.is_some();
    crate::web::run(config, |addr| {
        let mut out = std::io::stdout().lock();
        // The first line is the address (tests and scripts read it); then what it is for.
        let _ = writeln!(out, "Serving the record read-only at http://{addr}/");
        let _ = writeln!(
            out,
            "{}Stop with Ctrl-C.",
            if guarded {
                "Every page asks once for the token in the token file. "
            } else {
                "Answers this PC only. "
            }
        );
        let _ = out.flush();
    })
    .map_err(|e: Error| anyhow::Error::from(e))?;
    Ok(Outcome::AllGood)
}
