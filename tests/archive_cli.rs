//! The shared archive on a real PostgreSQL server (`POREWISE_TEST_PG`, see
//! `tests/common/pg.rs`): migrations, the summary of current fits, TLS, passwords.

mod common;
#[path = "common/pg.rs"]
mod pg;

use common::{porewise, stderr, stdout};
use porewise::archive::migrate::{check, known_version, migrate, version};
use porewise::archive::stats::{StatRow, StatsFilter, stats};
use porewise::model::texture::TextureClass;

#[test]
fn migrations_apply_in_order_once_and_a_second_init_changes_nothing() {
    let Some((url, schema)) = pg::fresh_schema("migrations_twice") else {
        return;
    };
    let target = pg::target(&url);
    let mut client = pg::client(&url);
    assert_eq!(version(&mut client, &target).expect("version"), 0);
    assert!(
        check(&mut client, &target).is_err(),
        "an empty schema is refused"
    );
    let first = migrate(&mut client, &target).expect("first");
    assert_eq!(first.from, 0);
    assert_eq!(first.to, known_version());
    assert_eq!(first.applied, vec!["0001_archive".to_string()]);
    let second = migrate(&mut client, &target).expect("second");
    assert!(second.applied.is_empty());
    assert_eq!(second.from, known_version());
    check(&mut client, &target).expect("current");
    let recorded: i64 = client
        .query_one("SELECT count(*) FROM archive_migration", &[])
        .expect("count")
        .get(0);
    assert_eq!(recorded, 1);
    // The tables are in the test's schema, not elsewhere.
    let tables: i64 = client
        .query_one(
            "SELECT count(*) FROM information_schema.tables WHERE table_schema = $1",
            &[&schema],
        )
        .expect("tables")
        .get(0);
    assert_eq!(tables, 12, "11 archive tables and the migration table");

    // The command says so too, twice.
    let out = stdout(
        &porewise()
            .args(["archive", "init", &url])
            .assert()
            .success(),
    );
    assert!(out.contains("is up to date (version 1)"), "{out}");
}

#[test]
fn a_schema_newer_than_the_program_is_refused() {
    let Some((url, _)) = pg::fresh_schema("newer_schema") else {
        return;
    };
    let target = pg::target(&url);
    let mut client = pg::client(&url);
    migrate(&mut client, &target).expect("init");
    client
        .execute(
            "INSERT INTO archive_migration (version, name) VALUES (99, '0099_future')",
            &[],
        )
        .expect("future");
    let err = migrate(&mut client, &target).expect_err("too new");
    assert!(err.to_string().contains("version 99"), "{err}");
    let err = check(&mut client, &target).expect_err("too new");
    assert!(err.to_string().contains("use a newer porewise"), "{err}");
}

const CAMPAIGN_A: &str = "aaaaaaaa-0000-4000-8000-000000000001";
const CAMPAIGN_B: &str = "bbbbbbbb-0000-4000-8000-000000000002";

/// A uid of 36 characters from a short tag.
fn uid(tag: &str) -> String {
    format!("{tag:0>8}-1111-4111-8111-111111111111")
}

/// Two campaigns: A has a silt loam Ap layer (0-20 cm) and a clay Bw layer (20-50 cm), B a
/// silt loam "ap" layer (0-30 cm). Van Genuchten alpha 0.01, 0.02, 0.03 on A's Ap, 0.04 on
/// B's ap, 0.5 on A's Bw; available water 0.1 .. 0.4 and 0.05 alike; a Brooks-Corey fit on
/// A's Ap; an older (not current) fit with alpha 9.9 that must never count.
fn fill(client: &mut postgres::Client) {
    client
        .batch_execute(&format!(
            "INSERT INTO campaign (uid, name, fc_kpa, pwp_kpa, created_at) VALUES
                ('{CAMPAIGN_A}', 'A', 33, 1500, '2026-01-01T00:00:00Z'),
                ('{CAMPAIGN_B}', 'B', 33, 1500, '2026-01-01T00:00:00Z');
             INSERT INTO site (campaign_uid, uid, code) VALUES
                ('{CAMPAIGN_A}', '{s1}', 'S1'), ('{CAMPAIGN_B}', '{s2}', 'S2');
             INSERT INTO layer (campaign_uid, uid, site_uid, top_cm, bottom_cm, horizon, texture_class) VALUES
                ('{CAMPAIGN_A}', '{l1}', '{s1}', 0, 20, 'Ap', 'silt loam'),
                ('{CAMPAIGN_A}', '{l2}', '{s1}', 20, 50, 'Bw', 'clay'),
                ('{CAMPAIGN_B}', '{l3}', '{s2}', 0, 30, 'ap', 'silt loam');",
            s1 = uid("s1"),
            s2 = uid("s2"),
            l1 = uid("l1"),
            l2 = uid("l2"),
            l3 = uid("l3"),
        ))
        .expect("sites and layers");
    let fits: [(&str, &str, &str, &str, f64, f64, bool); 7] = [
        (CAMPAIGN_A, "l1", "p1", "van-genuchten", 0.01, 0.1, true),
        (CAMPAIGN_A, "l1", "p2", "van-genuchten", 0.02, 0.2, true),
        (CAMPAIGN_A, "l1", "p3", "van-genuchten", 0.03, 0.3, true),
        (CAMPAIGN_A, "l1", "p3", "van-genuchten", 9.9, 9.9, false),
        (CAMPAIGN_B, "l3", "p4", "van-genuchten", 0.04, 0.4, true),
        (CAMPAIGN_A, "l2", "p5", "van-genuchten", 0.5, 0.05, true),
        (CAMPAIGN_A, "l1", "p6", "brooks-corey", 0.07, 0.15, true),
    ];
    for (i, (campaign, layer, sample, model, alpha, aw, current)) in fits.iter().enumerate() {
        client
            .execute(
                "INSERT INTO sample (campaign_uid, uid, layer_uid, code, kind)
                 VALUES ($1, $2, $3, $4, 'lab_core') ON CONFLICT DO NOTHING",
                &[campaign, &uid(sample), &uid(layer), sample],
            )
            .expect("sample");
        let parameters = format!("{{\"alpha_per_cm\":{alpha},\"theta_s\":0.45}}");
        client
            .execute(
                "INSERT INTO fit (campaign_uid, uid, sample_uid, model, parameters, statistics,
                                  n_points, readings_key, created_at, is_current, status,
                                  available_water)
                 VALUES ($1, $2, $3, $4, $5, '{}', 8, 'x', '2026-01-02T00:00:00Z', $6, 'ok', $7)",
                &[
                    campaign,
                    &uid(&format!("f{i}")),
                    &uid(sample),
                    model,
                    &parameters,
                    current,
                    aw,
                ],
            )
            .expect("fit");
    }
}

fn row<'a>(rows: &'a [StatRow], model: &str, quantity: &str) -> &'a StatRow {
    rows.iter()
        .find(|r| r.model == model && r.quantity == quantity)
        .unwrap_or_else(|| panic!("no {model} {quantity} in {rows:?}"))
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() < 1e-12
}

#[test]
fn stats_summarise_current_fits_with_every_filter() {
    let Some((url, _)) = pg::fresh_schema("stats_filters") else {
        return;
    };
    let target = pg::target(&url);
    let mut client = pg::client(&url);
    migrate(&mut client, &target).expect("init");
    fill(&mut client);

    // Quartiles by linear interpolation between order statistics, as PostgreSQL's
    // percentile_cont defines them (PostgreSQL 15 manual, "Ordered-Set Aggregate
    // Functions"): for 0.01, 0.02, 0.03, 0.04 the first quartile sits at position
    // 0.25 * 3 = 0.75, i.e. 0.0175; the median 0.025; the third quartile 0.0325.
    let silt = stats(
        &mut client,
        &StatsFilter {
            texture_class: Some(TextureClass::SiltLoam),
            model: Some("van-genuchten".into()),
            ..StatsFilter::default()
        },
    )
    .expect("stats");
    let alpha = row(&silt, "van-genuchten", "alpha_per_cm");
    assert_eq!((alpha.fits, alpha.campaigns), (4, 2));
    assert!(close(alpha.q1, 0.0175), "{alpha:?}");
    assert!(close(alpha.median, 0.025), "{alpha:?}");
    assert!(close(alpha.q3, 0.0325), "{alpha:?}");
    assert!(close(alpha.min, 0.01) && close(alpha.max, 0.04) && close(alpha.mean, 0.025));
    let aw = row(&silt, "van-genuchten", "available_water");
    assert_eq!(aw.fits, 4);
    assert!(close(aw.median, 0.25) && close(aw.q1, 0.175), "{aw:?}");
    assert!(silt.iter().all(|r| r.model == "van-genuchten"));

    // No filter: the clay layer's fit and the Brooks-Corey fit join; the old fit never does.
    let all = stats(&mut client, &StatsFilter::default()).expect("stats");
    let alpha = row(&all, "van-genuchten", "alpha_per_cm");
    assert_eq!(alpha.fits, 5);
    assert!(
        close(alpha.max, 0.5) && close(alpha.median, 0.03),
        "{alpha:?}"
    );
    assert_eq!(row(&all, "brooks-corey", "alpha_per_cm").fits, 1);

    // The horizon in any case: A's Ap and B's ap.
    let horizon = stats(
        &mut client,
        &StatsFilter {
            horizon: Some("AP".into()),
            ..StatsFilter::default()
        },
    )
    .expect("stats");
    assert_eq!(row(&horizon, "van-genuchten", "alpha_per_cm").fits, 4);
    assert_eq!(row(&horizon, "brooks-corey", "theta_s").fits, 1);

    // Layers overlapping 25-40 cm: A's Bw (20-50) and B's ap (0-30).
    let deep = stats(
        &mut client,
        &StatsFilter {
            depth_cm: Some((25.0, 40.0)),
            ..StatsFilter::default()
        },
    )
    .expect("stats");
    let alpha = row(&deep, "van-genuchten", "alpha_per_cm");
    assert_eq!((alpha.fits, alpha.campaigns), (2, 2));
    assert!(close(alpha.min, 0.04) && close(alpha.max, 0.5), "{alpha:?}");
    assert!(deep.iter().all(|r| r.model != "brooks-corey"));

    // The command: CSV and JSON of the same numbers.
    let csv = stdout(
        &porewise()
            .args([
                "archive",
                "stats",
                &url,
                "--texture-class",
                "SiL",
                "--model",
                "van-genuchten",
            ])
            .assert()
            .success(),
    );
    assert!(csv.starts_with("model,quantity,fits,campaigns,min,q1,median,q3,max,mean\n"));
    assert!(
        csv.contains("van-genuchten,alpha_per_cm,4,2,0.01,0.0175,0.025,0.0325,0.04,0.025\n"),
        "{csv}"
    );
    let json = stdout(
        &porewise()
            .args([
                "archive",
                "stats",
                &url,
                "--depth-cm",
                "25-40",
                "--format",
                "json",
            ])
            .assert()
            .success(),
    );
    let value: serde_json::Value = serde_json::from_str(&json).expect("json");
    let alpha = value
        .as_array()
        .expect("array")
        .iter()
        .find(|r| r["quantity"] == "alpha_per_cm")
        .expect("alpha");
    assert_eq!(alpha["fits"], 2);
    assert_eq!(alpha["max"], 0.5);

    // A bad depth range is a user error.
    let err = stderr(
        &porewise()
            .args(["archive", "stats", &url, "--depth-cm", "30-10"])
            .assert()
            .code(1),
    );
    assert!(err.contains("depth range \"30-10\""), "{err}");
}

#[test]
fn sslmode_require_encrypts_and_plain_does_not() {
    let Some((url, _)) = pg::fresh_schema("tls_modes") else {
        return;
    };
    let on = |url: &str| -> bool {
        pg::client(url)
            .query_one(
                "SELECT ssl FROM pg_stat_ssl WHERE pid = pg_backend_pid()",
                &[],
            )
            .expect("pg_stat_ssl")
            .get(0)
    };
    assert!(!on(&pg::with_key(&url, "sslmode", "disable")));
    assert!(!on(&pg::with_key(&url, "sslmode", "prefer")));
    let mut client = pg::client(&url);
    let server_ssl: String = client.query_one("SHOW ssl", &[]).expect("show ssl").get(0);
    if server_ssl == "on" {
        assert!(on(&pg::with_key(&url, "sslmode", "require")));
    } else {
        eprintln!("tls_modes: the server has ssl off; sslmode=require not tried");
    }
}

#[test]
fn printed_addresses_never_show_the_password() {
    let Some((url, _)) = pg::fresh_schema("masked_urls") else {
        return;
    };
    let target = pg::target(&url);
    let password = target
        .config()
        .get_password()
        .map(|p| String::from_utf8_lossy(p).into_owned())
        .expect("the test URL holds a password");
    let out = stdout(
        &porewise()
            .args(["archive", "init", &url])
            .assert()
            .success(),
    );
    assert!(out.contains(":***@"), "{out}");
    assert!(!out.contains(&password), "{out}");
    // A refused login: the error names the server, masked.
    let user = target.config().get_user().expect("user").to_string();
    let wrong = url.replacen(
        &format!("{user}:{password}@"),
        &format!("{user}:not-{password}@"),
        1,
    );
    let err = stderr(
        &porewise()
            .args(["archive", "list", &wrong])
            .assert()
            .code(1),
    );
    assert!(err.contains(":***@"), "{err}");
    assert!(!err.contains(&password), "{err}");
    // Help and a bad schema name: masked too.
    let bad = pg::with_key(&url, "schema", "No-Good");
    let err = stderr(&porewise().args(["archive", "init", &bad]).assert().code(1));
    assert!(err.contains(":***@") && !err.contains(&password), "{err}");
}

#[test]
fn the_password_can_come_from_a_file_or_the_environment() {
    let Some((url, _)) = pg::fresh_schema("password_sources") else {
        return;
    };
    let target = pg::target(&url);
    let password = target
        .config()
        .get_password()
        .map(|p| String::from_utf8_lossy(p).into_owned())
        .expect("password");
    let user = target.config().get_user().expect("user").to_string();
    let bare = url.replacen(&format!("{user}:{password}@"), &format!("{user}@"), 1);
    assert_ne!(bare, url);
    let dir = tempfile::tempdir().expect("tempdir");
    let file = dir.path().join("pgpass");
    std::fs::write(&file, format!("*:*:*:{user}:{password}\n")).expect("write");
    let out = stdout(
        &porewise()
            .args(["archive", "init", &bare, "--password-file"])
            .arg(&file)
            .env_remove("PGPASSWORD")
            .env_remove("PGPASSFILE")
            .assert()
            .success(),
    );
    assert!(out.contains("version 0 -> 1"), "{out}");
    porewise()
        .args(["archive", "list", &bare])
        .env("PGPASSWORD", &password)
        .env_remove("PGPASSFILE")
        .assert()
        .success();
    porewise()
        .args(["archive", "list", &bare])
        .env("PGPASSFILE", &file)
        .env_remove("PGPASSWORD")
        .assert()
        .success();
}
