//! The terminal UI on the demo campaign: every pane at 100x30 and 80x24 as text snapshots, a
//! scripted session of keys, and the styles that carry meaning (colour is not in the text).
//!
//! The demo campaign is built once per run into a temporary folder through the library (the
//! same path `porewise demo` takes); each test works on its own copy of the file.

use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use porewise::tui::keymap::Key;
use porewise::tui::runtime::{Session, SessionOptions};
use porewise::tui::theme::Theme;
use ratatui::Terminal;
use ratatui::backend::TestBackend;
use ratatui::crossterm::event::KeyCode;
use ratatui::style::{Color, Modifier};
use tempfile::TempDir;

/// The demo campaign, built once from the committed sources.
///
/// It is built under a relative folder (tests run in the package folder), because the review's
/// reasons name the source files as they were given: the snapshots then read the same on every
/// machine, wherever the checkout or the temporary folder is.
fn built_demo() -> &'static Path {
    static DEMO: OnceLock<PathBuf> = OnceLock::new();
    DEMO.get_or_init(|| {
        let dir = Path::new("target/tmp/tui-demo");
        let _ = std::fs::remove_dir_all(dir);
        std::fs::create_dir_all(dir).expect("build folder");
        let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-db");
        for file in porewise::demo::generate() {
            std::fs::copy(src.join(file.name), dir.join(file.name)).expect("copy");
        }
        porewise::cli::demo::ensure_built(dir).expect("demo builds")
    })
}

/// A private copy of the demo campaign.
struct Copy {
    dir: TempDir,
    file: PathBuf,
}

fn demo_copy() -> Copy {
    let dir = tempfile::tempdir().expect("temp dir");
    let file = dir.path().join("demo.sqlite");
    std::fs::copy(built_demo(), &file).expect("copy the demo campaign");
    Copy { dir, file }
}

fn session(copy: &Copy, width: u16, height: u16) -> Session {
    Session::open(&copy.file, SessionOptions::scripted(width, height)).expect("opens")
}

/// Keys as the user types them: single characters, or names in angle brackets.
fn keys(script: &str) -> Vec<Key> {
    let mut out = Vec::new();
    let mut rest = script;
    while let Some(c) = rest.chars().next() {
        if c == '<'
            && let Some(end) = rest.find('>')
        {
            let name = &rest[1..end];
            out.push(match name {
                "enter" => Key::plain(KeyCode::Enter),
                "esc" => Key::plain(KeyCode::Esc),
                "tab" => Key::plain(KeyCode::Tab),
                "down" => Key::plain(KeyCode::Down),
                "up" => Key::plain(KeyCode::Up),
                "right" => Key::plain(KeyCode::Right),
                "left" => Key::plain(KeyCode::Left),
                "bs" => Key::plain(KeyCode::Backspace),
                "ctrl-f" => Key::ctrl('f'),
                other => panic!("unknown key <{other}>"),
            });
            rest = &rest[end + 1..];
        } else {
            out.push(Key::char(c));
            rest = &rest[c.len_utf8()..];
        }
    }
    out
}

fn type_keys(s: &mut Session, script: &str) {
    for key in keys(script) {
        s.press(&key.event());
    }
}

/// The screen as text, with the temporary folder (should it ever show) filtered out.
fn screen(s: &Session, copy: &Copy) -> String {
    let (w, h) = s.state.size;
    let mut terminal = Terminal::new(TestBackend::new(w, h)).expect("terminal");
    s.draw(&mut terminal).expect("draws");
    terminal
        .backend()
        .to_string()
        .replace(&copy.dir.path().display().to_string(), "[tmp]")
}

fn buffer(s: &Session) -> ratatui::buffer::Buffer {
    let (w, h) = s.state.size;
    let mut terminal = Terminal::new(TestBackend::new(w, h)).expect("terminal");
    s.draw(&mut terminal).expect("draws");
    terminal.backend().buffer().clone()
}

/// Keys that bring each pane up, from a fresh session.
const PANES: [(&str, &str); 27] = [
    ("start", ""),
    ("site_open", "<enter>"),
    ("layer_summary", "<enter>j"),
    ("sample", "/LEV1-Ap-a<enter>G"),
    ("sample_card", "/LEV1-Ap-a<enter>G<tab><tab><tab>"),
    (
        "sample_card_advice",
        "/BSW1-Ah-a<enter>G<tab><tab><tab>jjjjjjjjjjjjjjjjjjjj",
    ),
    // The card scrolled to the derived values: a fit near its bounds (Monte Carlo intervals).
    (
        "sample_card_derived",
        "/BAS1-Bw-a<enter>G<tab><tab><tab>jjjjjjjjjjjjjjjjjjjj",
    ),
    ("flagged_sample_kpa_band", "/LEV1-C2-b<enter>G<tab><tab>Gub"),
    ("readings_pf", "/BSW1-Bg1-b<enter>G<tab><tab>uu"),
    ("depth", "/LEV1<enter>G2"),
    ("review", "3"),
    ("help", "?"),
    ("filter", "/bt"),
    ("flag_prompt", "/TER1-A-a<enter>G<tab><tab>jjtplate leak"),
    ("field_sample", "/TER1-field-15cm<enter>G"),
    ("field_readings_kpa", "/TER1-field-45cm<enter>G<tab><tab>u"),
    ("depth_field", "/TER1-A-a<enter>G2"),
    ("series", "/TER1-field-45cm<enter>G4"),
    ("series_zoomed_later", "/TER1-A-a<enter>G4++l"),
    ("series_no_loggers", "4"),
    // The four-reading core fitted with its loam texture prior: the side-by-side.
    (
        "sample_card_prior",
        "/TER1-A-c<enter>G<tab><tab><tab>jjjjjjjjj",
    ),
    // The clay basin's depth view: its lowest layer has texture and no core.
    ("depth_texture_only", "/BAS1<enter>G2"),
    // The same with the key that fills it from texture, marked ≈.
    ("depth_texture_filled", "/BAS1<enter>G2e"),
    ("review_logger_record", "3jjjjj"),
    // A core fitted with its measured conductivity: the K(h) view and the card with Ks and L.
    ("conductivity_fitted", "/TER1-Bt-b<enter>Gc"),
    (
        "conductivity_card",
        "/TER1-Bt-b<enter>G<tab><tab><tab>jjjjjjjj",
    ),
    // A core without measured K: the prediction from its layer's Ks, in kPa.
    ("conductivity_predicted_kpa", "/LEV1-Ap-a<enter>Gcu"),
];

#[test]
fn every_pane_at_both_reference_sizes() {
    let copy = demo_copy();
    for (w, h) in [(100, 30), (80, 24)] {
        for (name, script) in PANES {
            let mut s = session(&copy, w, h);
            type_keys(&mut s, script);
            insta::assert_snapshot!(format!("{name}_{w}x{h}"), screen(&s, &copy));
        }
    }
}

/// A day's work in keys: find a core, flag its bad reading, refit, then clear the review queue.
#[test]
fn scripted_session_flags_refits_and_reviews() {
    let copy = demo_copy();
    let mut s = session(&copy, 100, 30);
    let fits_before: i64 = count(&copy, "SELECT count(*) FROM fit");
    let queue = |s: &mut Session| {
        type_keys(s, "3");
        let n = s.state.review.items.len();
        type_keys(s, "1");
        n
    };
    let suspects = queue(&mut s);
    assert!(
        suspects >= 5,
        "the demo's planted readings are in the queue: {suspects}"
    );
    // The third step of TER1-A-a drained on the bench (demo-db/README.md).
    type_keys(
        &mut s,
        "/TER1-A-a<enter>G<tab><tab>jjtdrained on the bench<enter>",
    );
    let flagged = screen(&s, &copy);
    assert!(
        flagged.contains("~ stale (readings changed since"),
        "{flagged}"
    );
    assert!(flagged.contains("7 used, 1 excluded"), "{flagged}");
    type_keys(&mut s, "f");
    let refitted = screen(&s, &copy);
    insta::assert_snapshot!("session_flagged_and_refitted_100x30", refitted);
    assert!(refitted.contains("✓ current"), "{refitted}");
    assert_eq!(count(&copy, "SELECT count(*) FROM fit"), fits_before + 1);
    assert_eq!(
        count(
            &copy,
            "SELECT count(*) FROM flag WHERE origin = 'manual' AND status = 'accepted'
             AND reason = 'drained on the bench'"
        ),
        1
    );
    // The open suggestion on the same reading went with the manual flag.
    assert_eq!(queue(&mut s), suspects - 1);
    // Accept the worst suspect with one key: it leaves the queue and its sample is refitted
    // without it.
    type_keys(&mut s, "3");
    let worst = s.state.review.items[0].clone();
    type_keys(&mut s, "a");
    assert_eq!(s.state.review.items.len(), suspects - 2);
    assert!(
        s.state
            .review
            .items
            .iter()
            .all(|i| i.flag_id != worst.flag_id)
    );
    insta::assert_snapshot!("session_review_accepted_100x30", screen(&s, &copy));
    type_keys(&mut s, "1");
    let porewise::tui::app::Suspect::Reading { sample, .. } = &worst.suspect else {
        panic!("the worst suspect is a lab reading: {worst:?}");
    };
    type_keys(&mut s, &format!("/{sample}<enter>G"));
    let shown = screen(&s, &copy);
    assert!(
        shown.contains("✓ current") && shown.contains(", 1 excluded"),
        "{shown}"
    );
    // Unflag: the reading is used again and the sample is stale again.
    type_keys(&mut s, "1");
    type_keys(&mut s, "/TER1-A-a<enter>G<tab><tab>jjtback in<enter>");
    assert!(screen(&s, &copy).contains("8 used, 0 excluded"));
    type_keys(&mut s, "q");
    assert!(s.state.quit);
}

fn count(copy: &Copy, sql: &str) -> i64 {
    rusqlite::Connection::open(&copy.file)
        .expect("open")
        .query_row(sql, [], |r| r.get(0))
        .expect("count")
}

#[test]
fn quit_asks_while_a_background_fit_runs_and_results_arrive() {
    let copy = demo_copy();
    let options = SessionOptions {
        jobs: porewise::tui::runtime::Jobs::Background,
        ..SessionOptions::scripted(80, 24)
    };
    let mut s = Session::open(&copy.file, options).expect("opens");
    type_keys(&mut s, "/BAS1<enter>G");
    type_keys(&mut s, "F");
    assert!(
        s.state.jobs.is_busy(),
        "the site fit runs in the background"
    );
    type_keys(&mut s, "q");
    insta::assert_snapshot!("quit_confirm_80x24", {
        // The spinner and progress move with the worker: freeze them for the snapshot.
        let mut frozen =
            Session::open(&copy.file, SessionOptions::scripted(80, 24)).expect("opens");
        frozen.state = s.state.clone();
        if let Some(job) = frozen.state.jobs.running.as_mut() {
            job.done = 0;
            job.total = 0;
        }
        frozen.state.ticks = 0;
        screen(&frozen, &copy)
    });
    type_keys(&mut s, "n");
    assert!(!s.state.quit);
    // Liveness only (no timing claim): the worker's result comes back through the channel.
    assert!(s.wait_for_jobs(std::time::Duration::from_secs(300)));
    assert!(
        s.state.status.text.starts_with("fitted 6 samples"),
        "{:?}",
        s.state.status
    );
}

/// Where a glyph sits on the screen, and its cell.
fn find_cell<'a>(
    buf: &'a ratatui::buffer::Buffer,
    area: ratatui::layout::Rect,
    symbol: &str,
) -> Option<&'a ratatui::buffer::Cell> {
    area.positions()
        .map(|p| &buf[(p.x, p.y)])
        .find(|c| c.symbol() == symbol)
}

#[test]
fn meaning_carried_by_colour_is_also_in_glyphs_and_modifiers() {
    let copy = demo_copy();
    let options = SessionOptions {
        theme: Theme::default(),
        ..SessionOptions::scripted(100, 30)
    };
    let mut s = Session::open(&copy.file, options).expect("opens");
    type_keys(&mut s, "/TER1-A-a<enter>G");
    let buf = buffer(&s);
    // The tree cursor: reversed and bold (readable without colour).
    let tree = ratatui::layout::Rect::new(1, 2, 24, 3);
    let cursor_row = (2..6)
        .find(|&y| buf[(5, y)].modifier.contains(Modifier::REVERSED))
        .expect("a reversed cursor row");
    assert!(buf[(5, cursor_row)].modifier.contains(Modifier::BOLD));
    assert!(find_cell(&buf, tree, "▾").is_some());
    // Flag the third reading: its point becomes a red `x` and the sample a yellow `~`.
    type_keys(&mut s, "<tab><tab>jjtdrained<enter><tab><tab>");
    let buf = buffer(&s);
    let plot = ratatui::layout::Rect::new(26, 2, 40, 12);
    let x = find_cell(&buf, plot, "x").expect("an excluded point in the curve");
    assert_eq!(x.fg, Color::Red);
    assert!(x.modifier.contains(Modifier::BOLD));
    let stale = find_cell(&buf, ratatui::layout::Rect::new(1, 2, 24, 6), "~").expect("stale glyph");
    assert_eq!(stale.fg, Color::Yellow);
    let selected = find_cell(&buf, plot, "◆").expect("selected reading");
    assert!(selected.modifier.contains(Modifier::REVERSED));
    // The focused pane's title carries a ▶ as well as its colour.
    assert!(screen(&s, &copy).contains("╭▶ Campaign"));
}

#[test]
fn no_color_draws_every_screen_without_a_single_colour() {
    let copy = demo_copy();
    for script in [
        "",
        "/LEV1-C2-b<enter>G<tab><tab>Gb",
        "2",
        "3",
        "?",
        "/TER1-field-15cm<enter>G4",
        "3jjjjj",
    ] {
        let mut s = session(&copy, 100, 30);
        type_keys(&mut s, script);
        let buf = buffer(&s);
        for cell in buf.content() {
            assert_eq!(cell.fg, Color::Reset, "{script:?}: {cell:?}");
            assert_eq!(cell.bg, Color::Reset, "{script:?}: {cell:?}");
        }
    }
}

#[test]
fn open_refuses_a_missing_or_foreign_file_before_touching_the_terminal() {
    let dir = tempfile::tempdir().expect("temp dir");
    let missing = dir.path().join("nothing.sqlite");
    let out = assert_cmd::Command::cargo_bin("porewise")
        .expect("binary")
        .arg("open")
        .arg(&missing)
        .assert()
        .code(1);
    let stderr = String::from_utf8_lossy(&out.get_output().stderr).into_owned();
    assert!(stderr.contains("does not exist"), "{stderr}");
    let foreign = dir.path().join("notes.txt");
    std::fs::write(&foreign, "not a campaign").expect("write");
    let out = assert_cmd::Command::cargo_bin("porewise")
        .expect("binary")
        .arg("open")
        .arg(&foreign)
        .assert()
        .code(1);
    let stderr = String::from_utf8_lossy(&out.get_output().stderr).into_owned();
    assert!(stderr.contains("not a porewise campaign"), "{stderr}");
}

/// The field logger in keys: a suspect record of the review queue shown in its series, the
/// series screen zoomed and widened, the record's flag accepted, then a layer's series and the
/// field pairing of its depth.
#[test]
fn scripted_session_follows_a_logger_suspect_into_its_series() {
    use porewise::tui::app::{Screen, Suspect};
    let copy = demo_copy();
    let mut s = session(&copy, 100, 30);
    type_keys(&mut s, "3");
    let at = s
        .state
        .review
        .items
        .iter()
        .position(|i| matches!(i.suspect, Suspect::Record { .. }))
        .expect("logger records wait in the queue");
    let item = s.state.review.items[at].clone();
    let Suspect::Record {
        sensor_id, time, ..
    } = item.suspect.clone()
    else {
        unreachable!()
    };
    type_keys(&mut s, &"j".repeat(at));
    let reviewing = screen(&s, &copy);
    assert!(
        reviewing.contains(&format!("Series · TER1 {sensor_id}")),
        "{reviewing}"
    );
    assert!(reviewing.contains('◆'), "the record is marked: {reviewing}");
    // Enter: the series screen on that sensor, three days either side of the record.
    type_keys(&mut s, "<enter>");
    assert_eq!(s.state.screen, Screen::Series);
    assert_eq!(
        s.state.series.current().map(|c| c.sensor_id.clone()),
        Some(sensor_id.clone())
    );
    let data = s.state.series.data.clone().expect("the series is loaded");
    assert_eq!(data.window, (time - 3 * 86_400, time + 3 * 86_400));
    insta::assert_snapshot!("session_series_of_a_record_100x30", screen(&s, &copy));
    type_keys(&mut s, "-");
    let wider = s.state.series.data.clone().expect("loaded").window;
    assert_eq!(wider.1 - wider.0, 12 * 86_400);
    type_keys(&mut s, "w");
    assert!(screen(&s, &copy).contains("1 May – 31 Jul 2026"));
    // Accept the record's flag from the queue: stored, and it leaves the queue.
    type_keys(&mut s, "3");
    let before = s.state.review.items.len();
    type_keys(&mut s, &format!("g{}a", "j".repeat(at)));
    assert_eq!(s.state.review.items.len(), before - 1);
    assert!(
        s.state.status.text.contains("left out of the next pairing"),
        "{:?}",
        s.state.status
    );
    assert_eq!(
        count(
            &copy,
            &format!(
                "SELECT count(*) FROM flag WHERE id = {} AND status = 'accepted'",
                item.flag_id
            )
        ),
        1
    );
    // From a layer of the tree, 4 lands on the tensiometer logging in it; Enter opens the
    // field pairing of that depth.
    type_keys(&mut s, "1/TER1-Bt-a<enter>G4");
    assert_eq!(
        s.state.series.current().map(|c| c.sensor_id.clone()),
        Some("T45".to_string())
    );
    type_keys(&mut s, "<enter>");
    assert_eq!(s.state.screen, Screen::Browse);
    assert_eq!(
        s.state.detail.ready().map(|d| d.code.clone()),
        Some("TER1-field-45cm".to_string())
    );
}

#[test]
fn branches_field_samples_and_flagged_records_carry_glyphs_beside_colour() {
    let copy = demo_copy();
    let options = SessionOptions {
        theme: Theme::default(),
        ..SessionOptions::scripted(100, 30)
    };
    let mut s = Session::open(&copy.file, options).expect("opens");
    type_keys(&mut s, "/TER1-field-15cm<enter>G");
    let buf = buffer(&s);
    let tree = ratatui::layout::Rect::new(1, 2, 24, 6);
    let tag = find_cell(&buf, tree, "≈").expect("the field tag in the tree");
    assert!(tag.modifier.contains(Modifier::BOLD));
    assert_eq!(tag.fg, Color::Green);
    let plot = ratatui::layout::Rect::new(26, 2, 40, 12);
    for glyph in ["▼", "▲"] {
        let cell = find_cell(&buf, plot, glyph).expect("both branches on the curve");
        assert!(cell.modifier.contains(Modifier::BOLD), "{glyph}");
    }
    let readings = ratatui::layout::Rect::new(26, 16, 3, 12);
    assert!(find_cell(&buf, readings, "▼").is_some() && find_cell(&buf, readings, "▲").is_some());
    type_keys(&mut s, "4");
    let buf = buffer(&s);
    let series = ratatui::layout::Rect::new(26, 2, 74, 26);
    let flagged = find_cell(&buf, series, "x").expect("the flagged dry spell");
    assert_eq!(flagged.fg, Color::Red);
    assert!(flagged.modifier.contains(Modifier::BOLD));
}

#[test]
fn slow_queries_load_on_the_worker_and_the_newest_request_wins() {
    use porewise::tui::action::Action;
    use porewise::tui::runtime::Jobs;
    use std::time::Duration;
    let copy = demo_copy();
    let options = SessionOptions {
        jobs: Jobs::Background,
        ..SessionOptions::scripted(100, 30)
    };
    let mut s = Session::open(&copy.file, options).expect("opens");
    // The key returns at once: the sensors and the series are asked of the load worker.
    type_keys(&mut s, "/TER1-field-45cm<enter>G");
    s.dispatch(Action::ShowSeries);
    assert!(!s.state.series.loaded);
    assert!(screen(&s, &copy).contains("loading…"));
    assert!(s.wait_for_loads(Duration::from_secs(60)), "loads finish");
    assert!(s.state.series.loaded);
    let data = s.state.series.data.as_ref().expect("a series");
    assert_eq!(Some(&data.request), s.state.series.wanted.as_ref());
    // Three pans before any answer: what arrives last is the newest window.
    for _ in 0..3 {
        s.dispatch(Action::Left);
    }
    let wanted = s.state.series.wanted.clone().expect("wanted");
    assert!(s.wait_for_loads(Duration::from_secs(60)), "loads finish");
    let data = s.state.series.data.as_ref().expect("a series");
    assert_eq!(data.request, wanted);
    // The review queue and the depth view load the same way.
    s.dispatch(Action::ShowReview);
    assert!(s.wait_for_loads(Duration::from_secs(60)), "loads finish");
    assert!(s.state.review.loaded && !s.state.review.items.is_empty());
    assert!(!screen(&s, &copy).contains("loading…"));
}

/// `C` refits the selected core with its measured conductivity: a new joint fit becomes
/// current; a core without measured K is named and keeps its fit.
#[test]
fn a_joint_refit_from_the_keyboard() {
    let copy = demo_copy();
    let mut s = session(&copy, 100, 30);
    let joint = "SELECT count(*) FROM fit WHERE joint IS NOT NULL";
    let before = count(&copy, joint);
    type_keys(&mut s, "/TER1-Bt-b<enter>GC");
    assert_eq!(count(&copy, joint), before + 1);
    let current: i64 = count(
        &copy,
        "SELECT count(*) FROM fit f JOIN sample m ON m.id = f.sample_id
         WHERE m.code = 'TER1-Bt-b' AND f.is_current = 1 AND f.joint IS NOT NULL
           AND f.requested = 'van-genuchten+conductivity'",
    );
    assert_eq!(current, 1);
    let fits = count(&copy, "SELECT count(*) FROM fit");
    type_keys(&mut s, "<esc>/LEV1-Ap-a<enter>GC");
    assert_eq!(
        count(&copy, "SELECT count(*) FROM fit"),
        fits,
        "nothing recorded"
    );
    let text = screen(&s, &copy);
    assert!(
        text.contains("1 could not be fitted (LEV1-Ap-a: no conductivity"),
        "{text}"
    );
}

/// `f` refits as `porewise fit` would: the demo campaign's default gives samples with at most
/// five readings the texture prior, so the four-reading core is refitted with it, and a core
/// with more readings without it.
#[test]
fn a_refit_from_the_keyboard_follows_the_campaign_texture_prior_default() {
    let copy = demo_copy();
    let mut s = session(&copy, 100, 30);
    let current = |code: &str| -> i64 {
        count(
            &copy,
            &format!(
                "SELECT f.id FROM fit f JOIN sample m ON m.id = f.sample_id
                 WHERE m.code = '{code}' AND f.is_current = 1"
            ),
        )
    };
    let requested = |code: &str| -> String {
        rusqlite::Connection::open(&copy.file)
            .expect("open")
            .query_row(
                "SELECT f.requested FROM fit f JOIN sample m ON m.id = f.sample_id
                 WHERE m.code = ?1 AND f.is_current = 1",
                [code],
                |r| r.get(0),
            )
            .expect("a current fit")
    };
    let before = current("TER1-A-c");
    type_keys(&mut s, "/TER1-A-c<enter>Gf");
    assert!(current("TER1-A-c") > before, "a new fit is current");
    assert_eq!(requested("TER1-A-c"), "van-genuchten+texture-prior");
    let before = current("TER1-A-b");
    type_keys(&mut s, "<esc>/TER1-A-b<enter>Gf");
    assert!(current("TER1-A-b") > before, "a new fit is current");
    assert_eq!(requested("TER1-A-b"), "auto");
}
