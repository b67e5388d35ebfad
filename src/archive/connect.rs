//! Opening a connection to the archive: plain, or TLS through rustls (no OpenSSL needed).

use std::sync::Arc;
use std::time::Duration;

use rustls::client::WebPkiServerVerifier;
use rustls::client::danger::{HandshakeSignatureValid, ServerCertVerified, ServerCertVerifier};
use rustls::crypto::{CryptoProvider, verify_tls12_signature, verify_tls13_signature};
use rustls::pki_types::pem::PemObject;
use rustls::pki_types::{CertificateDer, ServerName, UnixTime};
use rustls::{
    CertificateError, ClientConfig, DigitallySignedStruct, RootCertStore, SignatureScheme,
};
use tokio_postgres_rustls::MakeRustlsConnect;

use super::target::{Target, Tls};
use super::{ArchiveError, Result, server};

/// Where Debian-like systems keep the trusted roots (used by `verify-ca` / `verify-full`
/// without `sslrootcert`).
const SYSTEM_ROOTS: &str = "/etc/ssl/certs/ca-certificates.crt";

/// How long to wait for the server to answer a connection, unless the address says.
const CONNECT_TIMEOUT: Duration = Duration::from_secs(15);

/// Connect to the archive server and put its schema first on the search path.
///
/// # Errors
/// The server cannot be reached or refuses the login (the message shows the masked
/// address), or TLS cannot be set up.
pub fn connect(target: &Target) -> Result<postgres::Client> {
    let mut config = target.config().clone();
    if config.get_connect_timeout().is_none() {
        config.connect_timeout(CONNECT_TIMEOUT);
    }
    if config.get_application_name().is_none() {
        config.application_name("porewise");
    }
    let context = format!("cannot connect to {}", target.shown());
    let mut client = match target.tls() {
        Tls::Plain => config.connect(postgres::NoTls),
        tls => config.connect(MakeRustlsConnect::new(client_config(tls)?)),
    }
    .map_err(server(context))?;
    // The schema is a checked identifier (Target::parse), so quoting it is enough.
    client
        .batch_execute(&format!("SET search_path TO \"{}\"", target.schema()))
        .map_err(server("cannot select the archive schema"))?;
    Ok(client)
}

fn provider() -> Arc<CryptoProvider> {
    Arc::new(rustls::crypto::ring::default_provider())
}

/// The rustls configuration of a TLS mode.
fn client_config(tls: &Tls) -> Result<ClientConfig> {
    let provider = provider();
    let builder = ClientConfig::builder_with_provider(provider.clone())
        .with_safe_default_protocol_versions()
        .map_err(|e| ArchiveError::Tls(e.to_string()))?;
    let config = match tls {
        Tls::Plain | Tls::Encrypted => builder
            .dangerous()
            .with_custom_certificate_verifier(Arc::new(Unchecked(provider)))
            .with_no_client_auth(),
        Tls::Verified { roots, check_name } => {
            let path = roots
                .clone()
                .unwrap_or_else(|| std::path::PathBuf::from(SYSTEM_ROOTS));
            let mut store = RootCertStore::empty();
            let certs = CertificateDer::pem_file_iter(&path)
                .map_err(|e| ArchiveError::Tls(format!("{}: {e}", path.display())))?;
            for cert in certs {
                let cert =
                    cert.map_err(|e| ArchiveError::Tls(format!("{}: {e}", path.display())))?;
                store
                    .add(cert)
                    .map_err(|e| ArchiveError::Tls(format!("{}: {e}", path.display())))?;
            }
            let verifier = WebPkiServerVerifier::builder_with_provider(Arc::new(store), provider)
                .build()
                .map_err(|e| ArchiveError::Tls(e.to_string()))?;
            if *check_name {
                builder.with_webpki_verifier(verifier).with_no_client_auth()
            } else {
                builder
                    .dangerous()
                    .with_custom_certificate_verifier(Arc::new(ChainOnly(verifier)))
                    .with_no_client_auth()
            }
        }
    };
    Ok(config)
}

/// `sslmode=require`: encrypted, the certificate not checked (handshake signatures are).
#[derive(Debug)]
struct Unchecked(Arc<CryptoProvider>);

impl ServerCertVerifier for Unchecked {
    fn verify_server_cert(
        &self,
        _end_entity: &CertificateDer<'_>,
        _intermediates: &[CertificateDer<'_>],
        _server_name: &ServerName<'_>,
        _ocsp_response: &[u8],
        _now: UnixTime,
    ) -> std::result::Result<ServerCertVerified, rustls::Error> {
        Ok(ServerCertVerified::assertion())
    }

    fn verify_tls12_signature(
        &self,
        message: &[u8],
        cert: &CertificateDer<'_>,
        dss: &DigitallySignedStruct,
    ) -> std::result::Result<HandshakeSignatureValid, rustls::Error> {
        verify_tls12_signature(
            message,
            cert,
            dss,
            &self.0.signature_verification_algorithms,
        )
    }

    fn verify_tls13_signature(
        &self,
        message: &[u8],
        cert: &CertificateDer<'_>,
        dss: &DigitallySignedStruct,
    ) -> std::result::Result<HandshakeSignatureValid, rustls::Error> {
        verify_tls13_signature(
            message,
            cert,
            dss,
            &self.0.signature_verification_algorithms,
        )
    }

    fn supported_verify_schemes(&self) -> Vec<SignatureScheme> {
        self.0.signature_verification_algorithms.supported_schemes()
    }
}

/// `sslmode=verify-ca`: the chain must lead to a trusted root; the host name is not checked.
#[derive(Debug)]
struct ChainOnly(Arc<WebPkiServerVerifier>);

impl ServerCertVerifier for ChainOnly {
    fn verify_server_cert(
        &self,
        end_entity: &CertificateDer<'_>,
        intermediates: &[CertificateDer<'_>],
        server_name: &ServerName<'_>,
        ocsp_response: &[u8],
        now: UnixTime,
    ) -> std::result::Result<ServerCertVerified, rustls::Error> {
        match self
            .0
            .verify_server_cert(end_entity, intermediates, server_name, ocsp_response, now)
        {
            Err(rustls::Error::InvalidCertificate(
                CertificateError::NotValidForName | CertificateError::NotValidForNameContext { .. },
            )) => Ok(ServerCertVerified::assertion()),
            other => other,
        }
    }

    fn verify_tls12_signature(
        &self,
        message: &[u8],
        cert: &CertificateDer<'_>,
        dss: &DigitallySignedStruct,
    ) -> std::result::Result<HandshakeSignatureValid, rustls::Error> {
        self.0.verify_tls12_signature(message, cert, dss)
    }

    fn verify_tls13_signature(
        &self,
        message: &[u8],
        cert: &CertificateDer<'_>,
        dss: &DigitallySignedStruct,
    ) -> std::result::Result<HandshakeSignatureValid, rustls::Error> {
        self.0.verify_tls13_signature(message, cert, dss)
    }

    fn supported_verify_schemes(&self) -> Vec<SignatureScheme> {
        self.0.supported_verify_schemes()
    }
}
