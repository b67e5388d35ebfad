//! The PostgreSQL server of the archive tests: `POREWISE_TEST_PG` (set by `.ci/run` through
//! `.ci/postgres.sh`). Without it a test says it was skipped and passes, so `cargo test`
//! still passes on a machine without a server. Each test works in a schema of its own, so
//! tests running in parallel threads do not meet.

#![allow(dead_code)] // each test crate uses a different subset

use porewise::archive::Target;
use porewise::archive::target::PasswordSources;

/// The server's URL, or `None` after saying the test is skipped.
pub fn server(test: &str) -> Option<String> {
    if let Ok(url) = std::env::var("POREWISE_TEST_PG")
        && !url.is_empty()
    {
        return Some(url);
    }
    eprintln!("{test}: skipped: POREWISE_TEST_PG not set");
    None
}

/// `url` with another query key added.
pub fn with_key(url: &str, key: &str, value: &str) -> String {
    let sep = if url.contains('?') { '&' } else { '?' };
    format!("{url}{sep}{key}={value}")
}

/// A URL for a fresh, empty schema named after the test (dropped first if a former run left
/// it), and the schema's name.
pub fn fresh_schema(test: &str) -> Option<(String, String)> {
    let url = server(test)?;
    let schema = format!(
        "t_{}",
        test.to_ascii_lowercase().replace(['-', ' ', ':'], "_")
    );
    let target = Target::parse(&url, &PasswordSources::default()).expect("POREWISE_TEST_PG parses");
    let mut client = porewise::archive::connect(&target).expect("the test server answers");
    client
        .batch_execute(&format!("DROP SCHEMA IF EXISTS \"{schema}\" CASCADE"))
        .expect("drop the schema");
    Some((with_key(&url, "schema", &schema), schema))
}

/// A target for a URL (no password sources besides the URL).
pub fn target(url: &str) -> Target {
    Target::parse(url, &PasswordSources::default()).expect("parses")
}

/// A connection to a URL's schema.
pub fn client(url: &str) -> postgres::Client {
    porewise::archive::connect(&target(url)).expect("connects")
}
