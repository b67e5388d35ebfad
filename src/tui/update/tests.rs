//! Tests of the update functions: key sequences on a state built in memory.
use super::*;
use crate::model::domain::{FlagTarget, SensorKind};
use crate::tui::app::fixtures::{detail, tree};
use crate::tui::app::series::{MIN_WINDOW_S, SensorSeries};
use crate::tui::app::{DepthData, ReviewItem, SensorInfo, SeriesData};
use crate::tui::worker::JobId;

/// A state with the fixture tree loaded.
fn loaded() -> AppState {
    let mut state = AppState {
        size: (100, 30),
        ..AppState::default()
    };
    let effects = update(&mut state, Action::Loaded(Loaded::Tree(tree())));
    assert!(
        effects.is_empty(),
        "the cursor starts on a site: {effects:?}"
    );
    state
}

/// Open the first site and walk to its first sample (id 1), loaded.
fn on_first_sample() -> AppState {
    let mut state = loaded();
    update(&mut state, Action::Open);
    update(&mut state, Action::Down);
    let effects = update(&mut state, Action::Down);
    assert_eq!(effects, vec![Effect::LoadSample(1)]);
    update(
        &mut state,
        Action::Loaded(Loaded::Sample(Box::new(detail(1, "AA-0-a")))),
    );
    state
}

#[test]
fn the_first_screen_lists_the_sites_and_selecting_a_sample_loads_it() {
    let state = loaded();
    assert_eq!(state.tree.rows, vec![TreeRow::Site(0), TreeRow::Site(1)]);
    assert!(state.status.text.contains("2 sites, 8 samples"));
    let mut state = on_first_sample();
    assert_eq!(state.detail.ready().map(|d| d.id), Some(1));
    // A sample that arrives after the cursor moved on is dropped.
    let effects = update(&mut state, Action::Down);
    assert_eq!(effects, vec![Effect::LoadSample(2)]);
    update(
        &mut state,
        Action::Loaded(Loaded::Sample(Box::new(detail(1, "AA-0-a")))),
    );
    assert_eq!(state.detail, Detail::Loading(2));
    // Moving back to the site row keeps the sample; Left from a sample goes to its layer.
    update(&mut state, Action::Left);
    assert_eq!(state.tree.current(), Some(TreeRow::Layer(0, 0)));
    update(&mut state, Action::Left);
    assert_eq!(state.tree.rows.len(), 2 + 2 + 2, "layer closed");
    update(&mut state, Action::Left);
    assert_eq!(state.tree.current(), Some(TreeRow::Site(0)));
    update(&mut state, Action::Left);
    assert_eq!(state.tree.rows.len(), 2, "site closed");
}

#[test]
fn refits_run_one_at_a_time_and_a_newer_request_replaces_the_waiting_one() {
    let mut state = on_first_sample();
    let effects = update(&mut state, Action::RefitSample);
    let Some(Effect::StartFit { job, request }) = effects.first().cloned() else {
        panic!("{effects:?}");
    };
    assert_eq!(job, JobId(1));
    assert_eq!(request.choice, ModelChoice::Auto);
    assert!(matches!(request.scope, FitScope::Sample { id: 1, .. }));
    update(&mut state, Action::CycleModel);
    assert!(update(&mut state, Action::RefitSite).is_empty(), "queued");
    assert!(update(&mut state, Action::RefitAll).is_empty(), "queued");
    assert!(state.status.text.contains("replaces the queued site AA"));
    update(
        &mut state,
        Action::FitProgress {
            job,
            done: 1,
            total: 1,
        },
    );
    assert_eq!(state.jobs.running.as_ref().map(|r| r.done), Some(1));
    let effects = update(
        &mut state,
        Action::FitFinished {
            job,
            result: Ok(FitRunSummary {
                fitted: vec![("AA-0-a".into(), "kosugi".into())],
                failed: Vec::new(),
                changed: Vec::new(),
            }),
        },
    );
    // The first job was overtaken by "every sample": its summary is dropped, no reload.
    assert_eq!(
        effects,
        vec![Effect::StartFit {
            job: JobId(3),
            request: FitRequest {
                scope: FitScope::All,
                choice: ModelChoice::One(ModelKind::VanGenuchten),
                with_conductivity: false,
            },
        }]
    );
    let effects = update(
        &mut state,
        Action::FitFinished {
            job: JobId(3),
            result: Ok(FitRunSummary {
                fitted: vec![("AA-0-a".into(), "van-genuchten".into())],
                failed: vec![("AA-0-b".into(), "too few readings".into())],
                changed: vec!["AA-0-c".into()],
            }),
        },
    );
    assert_eq!(effects, vec![Effect::LoadTree, Effect::LoadSample(1)]);
    assert_eq!(state.status.tone, Tone::Warning);
    assert!(
        state
            .status
            .text
            .contains("1 could not be fitted (AA-0-b: too few readings)")
    );
    assert!(
        state
            .status
            .text
            .contains("1 not recorded, readings changed meanwhile (AA-0-c)"),
        "{}",
        state.status.text
    );
    // A result nobody waits for changes nothing.
    let effects = update(
        &mut state,
        Action::FitFinished {
            job: JobId(9),
            result: Err("late".into()),
        },
    );
    assert!(effects.is_empty() && !state.status.text.contains("late"));
}

#[test]
fn quitting_asks_first_while_a_fit_runs() {
    let mut state = on_first_sample();
    assert_eq!(update(&mut state, Action::Quit), vec![Effect::Quit]);
    let mut state = on_first_sample();
    update(&mut state, Action::RefitSample);
    assert!(update(&mut state, Action::Quit).is_empty());
    assert_eq!(state.input, Input::ConfirmQuit);
    update(&mut state, Action::Cancel);
    assert_eq!(state.input, Input::None);
    assert!(!state.quit);
    update(&mut state, Action::Quit);
    assert_eq!(update(&mut state, Action::Submit), vec![Effect::Quit]);
    assert!(state.quit);
    let mut state = loaded();
    assert_eq!(update(&mut state, Action::ForceQuit), vec![Effect::Quit]);
}

#[test]
fn flagging_asks_for_a_reason_and_clearing_for_a_note() {
    let mut state = on_first_sample();
    update(&mut state, Action::ToggleFlag);
    assert_eq!(
        state.input,
        Input::Reason {
            target: FlagTarget::Reading(10),
            flag: true,
            text: String::new()
        }
    );
    assert!(
        update(&mut state, Action::Submit).is_empty(),
        "no reason yet"
    );
    assert_eq!(state.status.tone, Tone::Warning);
    for c in "plate  leak".chars() {
        update(&mut state, Action::Char(c));
    }
    update(&mut state, Action::Backspace);
    update(&mut state, Action::Char('k'));
    assert_eq!(
        update(&mut state, Action::Submit),
        vec![Effect::SetFlag {
            target: FlagTarget::Reading(10),
            reason: "plate  leak".into()
        }]
    );
    // The excluded reading (the third) is cleared instead, the note optional.
    state.reading = 2;
    update(&mut state, Action::ToggleFlag);
    assert_eq!(
        update(&mut state, Action::Submit),
        vec![Effect::ClearFlag {
            target: FlagTarget::Reading(12),
            note: String::new()
        }]
    );
    // A saved flag reloads what shows it.
    let effects = update(&mut state, Action::FlagChanged(Ok("flagged".into())));
    assert_eq!(effects, vec![Effect::LoadTree, Effect::LoadSample(1)]);
    // Typing q in the prompt is text, Esc abandons.
    update(&mut state, Action::ToggleFlag);
    update(&mut state, Action::Quit);
    assert!(!state.quit);
    update(&mut state, Action::Cancel);
    assert_eq!(state.input, Input::None);
    // No flag changes while a fit runs.
    update(&mut state, Action::RefitSample);
    update(&mut state, Action::ToggleFlag);
    assert_eq!(state.input, Input::None);
}

#[test]
fn the_filter_narrows_the_tree_as_it_is_typed() {
    let mut state = loaded();
    update(&mut state, Action::StartFilter);
    for c in "bb-1".chars() {
        update(&mut state, Action::Char(c));
    }
    assert_eq!(state.tree.rows.len(), 1 + 1 + 2);
    assert_eq!(state.input, Input::Filter("bb-1".into()));
    update(&mut state, Action::Submit);
    assert_eq!(state.input, Input::None);
    assert_eq!(state.tree.filter, "bb-1");
    assert!(
        matches!(
            state.tree.rows.get(state.tree.cursor),
            Some(TreeRow::Sample(..))
        ),
        "the cursor lands on the first match"
    );
    let effects = update(&mut state, Action::Bottom);
    assert_eq!(effects, vec![Effect::LoadSample(8)]);
    update(&mut state, Action::Back);
    assert!(state.tree.filter.is_empty());
    assert_eq!(
        state.tree.current_sample().map(|s| s.id),
        Some(8),
        "cursor stays"
    );
    update(&mut state, Action::StartFilter);
    update(&mut state, Action::Char('z'));
    update(&mut state, Action::Cancel);
    assert!(state.tree.filter.is_empty());
}

#[test]
fn models_cycle_then_auto_and_units_and_band_toggle() {
    let mut choice = ModelChoice::Auto;
    let mut seen = Vec::new();
    for _ in 0..ModelKind::ALL.len() {
        choice = next_choice(choice);
        seen.push(choice);
    }
    assert_eq!(seen[0], ModelChoice::One(ModelKind::VanGenuchten));
    assert_eq!(seen[6], ModelChoice::One(ModelKind::Campbell));
    assert_eq!(next_choice(choice), ModelChoice::Auto);
    let mut state = loaded();
    update(&mut state, Action::CycleUnits);
    update(&mut state, Action::CycleUnits);
    assert_eq!(state.units, crate::tui::app::AxisUnit::Pf);
    update(&mut state, Action::ToggleBand);
    assert!(state.band);
    update(&mut state, Action::ToggleConductivity);
    assert!(state.show_conductivity);
    assert!(state.status.text.contains("conductivity K"));
    update(&mut state, Action::ToggleConductivity);
    assert!(!state.show_conductivity);
}

#[test]
fn a_refit_with_conductivity_asks_the_worker_for_a_joint_fit() {
    let mut state = on_first_sample();
    let effects = update(&mut state, Action::RefitSampleWithConductivity);
    let Some(Effect::StartFit { request, .. }) = effects.first().cloned() else {
        panic!("{effects:?}");
    };
    assert!(request.with_conductivity);
    assert!(matches!(request.scope, FitScope::Sample { id: 1, .. }));
    assert_eq!(request.joint_kind(), ModelKind::VanGenuchten);
    assert!(
        request
            .to_string()
            .ends_with("(van-genuchten with conductivity)")
    );
}

#[test]
fn the_depth_view_loads_its_site_and_follows_the_root_zone() {
    let mut state = loaded();
    update(&mut state, Action::Down);
    let effects = update(&mut state, Action::ShowDepth);
    assert_eq!(
        effects,
        vec![Effect::LoadDepth {
            site: "BB".into(),
            root_zone_cm: 100.0
        }]
    );
    assert_eq!(state.screen, Screen::Depth);
    let effects = update(&mut state, Action::DeeperRootZone);
    assert_eq!(
        effects,
        vec![Effect::LoadDepth {
            site: "BB".into(),
            root_zone_cm: 110.0
        }]
    );
    let data = |root_zone_cm| DepthData::from_parts("BB", None, &[], None, root_zone_cm);
    update(
        &mut state,
        Action::Loaded(Loaded::Depth(Box::new(data(100.0)))),
    );
    assert!(
        state.depth.data.is_none(),
        "an answer for the old depth is dropped"
    );
    update(
        &mut state,
        Action::Loaded(Loaded::Depth(Box::new(data(110.0)))),
    );
    assert!(state.depth.data.is_some());
    let effects = update(&mut state, Action::Right);
    assert_eq!(
        effects,
        vec![Effect::LoadDepth {
            site: "AA".into(),
            root_zone_cm: 110.0
        }]
    );
    update(&mut state, Action::Back);
    assert_eq!(state.screen, Screen::Browse);
}

#[test]
fn the_review_queue_shows_the_suspect_and_decides_with_one_key() {
    let mut state = loaded();
    assert_eq!(
        update(&mut state, Action::ShowReview),
        vec![Effect::LoadReview]
    );
    let item = |flag_id, sample_id, reading_id| ReviewItem {
        flag_id,
        suspect: Suspect::Reading {
            reading_id,
            sample_id,
            sample: format!("S{sample_id}"),
            h_cm: 100.0,
            theta: 0.3,
        },
        reason: "off".into(),
        score: Some(3.0),
    };
    let effects = update(
        &mut state,
        Action::Loaded(Loaded::Review(Ok(vec![item(7, 1, 11), item(8, 5, 40)]))),
    );
    assert_eq!(effects, vec![Effect::LoadSample(1)]);
    update(
        &mut state,
        Action::Loaded(Loaded::Sample(Box::new(detail(1, "AA-0-a")))),
    );
    assert_eq!(state.reading, 1, "the suspect reading is the selected one");
    // Accepting writes the decision, then refits the suspect's sample.
    let effects = update(&mut state, Action::Accept);
    assert_eq!(
        effects.first(),
        Some(&Effect::DecideFlag {
            flag_id: 7,
            target: FlagTarget::Reading(11),
            accept: true
        })
    );
    let Some(Effect::StartFit { job, request }) = effects.get(1) else {
        panic!("an accepted reading refits its sample: {effects:?}");
    };
    assert_eq!(
        request.scope,
        FitScope::Sample {
            id: 1,
            code: "S1".into(),
            site: state.tree.sites[0].code.clone(),
        }
    );
    assert_eq!(effects.len(), 2);
    // The refit ends before the next decision (decisions wait for a running fit).
    let job = *job;
    update(
        &mut state,
        Action::FitFinished {
            job,
            result: Err("test".into()),
        },
    );
    assert_eq!(
        update(&mut state, Action::Down),
        vec![Effect::LoadSample(5)]
    );
    assert_eq!(
        update(&mut state, Action::Dismiss),
        vec![Effect::DecideFlag {
            flag_id: 8,
            target: FlagTarget::Reading(40),
            accept: false
        }]
    );
    let effects = update(&mut state, Action::FlagChanged(Ok("dismissed".into())));
    assert!(effects.contains(&Effect::LoadReview) && effects.contains(&Effect::LoadTree));
    let effects = update(&mut state, Action::Open);
    assert_eq!(state.screen, Screen::Browse);
    assert_eq!(state.tree.current_sample().map(|s| s.id), Some(5));
    assert!(effects.is_empty(), "sample 5 is already loading");
}

/// Sensors of site AA: a tensiometer and a water-content probe at 10 and at 30 cm, logging
/// for 100 days from t = 0; and one of site BB.
fn sensors() -> Vec<SensorInfo> {
    let s = |site: &str, id: &str, kind, depth| SensorInfo {
        site: site.into(),
        sensor_id: id.into(),
        kind,
        depth_cm: depth,
        first: 0,
        last: 100 * 86_400,
        flagged: 0,
    };
    vec![
        s("AA", "T10", SensorKind::Tensiometer, 10.0),
        s("AA", "W10", SensorKind::WaterContent, 10.0),
        s("AA", "T30", SensorKind::Tensiometer, 30.0),
        s("AA", "W30", SensorKind::WaterContent, 30.0),
        s("BB", "T5", SensorKind::Tensiometer, 5.0),
    ]
}

fn series_of(effects: &[Effect]) -> SeriesRequest {
    match effects {
        [Effect::LoadSeries(r)] => r.clone(),
        other => panic!("expected one series load: {other:?}"),
    }
}

fn answer(request: &SeriesRequest) -> SeriesData {
    SeriesData {
        request: request.clone(),
        window: request.window.unwrap_or((0, 100 * 86_400)),
        columns: request.columns,
        suction: Some(SensorSeries {
            sensor_id: request.sensor_id.clone(),
            kind: SensorKind::Tensiometer,
            records: 0,
            flagged: 0,
            buckets: Vec::new(),
            mark: None,
        }),
        water: None,
    }
}

#[test]
fn the_series_screen_opens_at_the_layer_depth_and_moves_through_time() {
    let mut state = loaded();
    update(&mut state, Action::Open);
    update(&mut state, Action::Down);
    update(&mut state, Action::Down);
    update(&mut state, Action::Down);
    update(&mut state, Action::Down);
    assert_eq!(state.tree.current(), Some(TreeRow::Layer(0, 1)), "AA 20-50");
    assert_eq!(
        update(&mut state, Action::ShowSeries),
        vec![Effect::LoadSensors]
    );
    assert_eq!(state.screen, Screen::Series);
    let effects = update(&mut state, Action::Loaded(Loaded::Sensors(Ok(sensors()))));
    let first = series_of(&effects);
    assert_eq!(
        (
            first.site.as_str(),
            first.sensor_id.as_str(),
            first.depth_cm
        ),
        ("AA", "T30", 30.0),
        "the tensiometer inside the layer"
    );
    assert_eq!((first.window, first.columns), (None, 200));
    // An answer for another request is dropped; the wanted one is kept.
    let mut other = first.clone();
    other.sensor_id = "W10".into();
    update(
        &mut state,
        Action::Loaded(Loaded::Series(Box::new(answer(&other)))),
    );
    assert!(state.series.data.is_none());
    update(
        &mut state,
        Action::Loaded(Loaded::Series(Box::new(answer(&first)))),
    );
    assert!(state.series.data.is_some());
    // Zoom in about the middle, pan, zoom out to everything, the whole span again.
    let zoomed = series_of(&update(&mut state, Action::ZoomIn));
    assert_eq!(zoomed.window, Some((25 * 86_400, 75 * 86_400)));
    let later = series_of(&update(&mut state, Action::Right));
    assert_eq!(later.window, Some((50 * 86_400, 100 * 86_400)));
    assert!(
        update(&mut state, Action::Right).is_empty(),
        "already at the end: the same window"
    );
    for _ in 0..20 {
        update(&mut state, Action::ZoomIn);
    }
    let window = state.series.window.expect("a window");
    assert_eq!(window.1 - window.0, MIN_WINDOW_S);
    assert_eq!(
        series_of(&update(&mut state, Action::WholeSpan)).window,
        None
    );
    // The next sensor keeps the window; a resize asks for as many columns as it has.
    let next = series_of(&update(&mut state, Action::Down));
    assert_eq!(next.sensor_id, "W30");
    let resized = series_of(&update(&mut state, Action::Resize(80, 24)));
    assert_eq!(resized.columns, 160);
    // Sites with loggers in turn; BB has one sensor.
    let bb = series_of(&update(&mut state, Action::NextSite));
    assert_eq!((bb.site.as_str(), bb.sensor_id.as_str()), ("BB", "T5"));
    assert_eq!(series_of(&update(&mut state, Action::NextSite)).site, "AA");
    update(&mut state, Action::Back);
    assert_eq!(state.screen, Screen::Browse);
}

#[test]
fn a_suspect_record_shows_its_series_and_opens_the_series_screen_there() {
    let mut state = loaded();
    update(&mut state, Action::ShowReview);
    let record = ReviewItem {
        flag_id: 9,
        suspect: Suspect::Record {
            record_id: 77,
            site: "AA".into(),
            depth_cm: 10.0,
            kind: SensorKind::WaterContent,
            sensor_id: "W10".into(),
            time: 40 * 86_400,
            value: 0.31,
        },
        reason: "stuck sensor".into(),
        score: Some(2.0),
    };
    let effects = update(&mut state, Action::Loaded(Loaded::Review(Ok(vec![record]))));
    let around = series_of(&effects);
    assert_eq!(around.window, Some((37 * 86_400, 43 * 86_400)));
    assert_eq!(around.mark, Some(("W10".to_string(), 40 * 86_400)));
    assert_eq!(
        state.detail,
        Detail::Empty,
        "no sample to load for a record"
    );
    update(
        &mut state,
        Action::Loaded(Loaded::Series(Box::new(answer(&around)))),
    );
    assert!(state.review.series.is_some());
    assert_eq!(
        update(&mut state, Action::Dismiss),
        vec![Effect::DecideFlag {
            flag_id: 9,
            target: FlagTarget::LoggerRecord(77),
            accept: false
        }]
    );
    // 4 on a suspect record opens its series as Enter does (Enter: tests/tui.rs).
    assert_eq!(
        update(&mut state, Action::ShowSeries),
        vec![Effect::LoadSensors]
    );
    assert_eq!(state.screen, Screen::Series);
    let there = series_of(&update(
        &mut state,
        Action::Loaded(Loaded::Sensors(Ok(sensors()))),
    ));
    assert_eq!(there.sensor_id, "W10");
    assert_eq!(there.window, around.window);
    assert_eq!(there.mark, around.mark);
    // A flag decided on this screen reloads the sensors (and then the series).
    let effects = update(&mut state, Action::FlagChanged(Ok("accepted".into())));
    assert!(effects.contains(&Effect::LoadSensors), "{effects:?}");
}

#[test]
fn help_opens_over_any_screen_and_closes_back_to_it() {
    let mut state = loaded();
    update(&mut state, Action::ShowReview);
    update(&mut state, Action::ToggleHelp);
    assert_eq!(state.screen, Screen::Help);
    update(&mut state, Action::Down);
    assert_eq!(state.help_scroll, 1);
    update(&mut state, Action::Back);
    assert_eq!(state.screen, Screen::Review);
}

#[test]
fn the_other_fit_key_asks_for_the_selected_samples_next_current_fit() {
    let mut state = on_first_sample();
    let effects = update(&mut state, Action::NextCurrentFit);
    assert!(
        matches!(
            effects.as_slice(),
            [Effect::NextCurrentFit { sample_id: 1, .. }]
        ),
        "{effects:?}"
    );
    let effects = update(
        &mut state,
        Action::CurrentChanged(Ok("fit 2 is now current".into())),
    );
    assert!(state.status.text.contains("fit 2 is now current"));
    assert!(!effects.is_empty(), "the sample and tree are reloaded");
}

#[test]
fn in_the_k_view_the_readings_pane_flags_measured_conductivity() {
    use crate::store::conductivity::{SampleKs, Where};
    use crate::tui::app::conductivity::{ConductivityPanel, KCurveSource, KReadingView};
    let mut state = on_first_sample();
    let k = |id, h: f64, excluded| KReadingView {
        id,
        at: Where::Suction(h),
        k_cm_per_day: 1.0 / h,
        method: Some("evaporation".into()),
        excluded,
        point: Some((h.log10(), -h.log10())),
    };
    let Detail::Ready(d) = &mut state.detail else {
        panic!("a sample is open");
    };
    d.conductivity = Some(ConductivityPanel {
        points: vec![(1.0, -1.0)],
        excluded: vec![(2.0, -2.0)],
        readings: vec![k(7, 10.0, false), k(8, 100.0, true)],
        unplaced: 0,
        curve: Vec::new(),
        source: KCurveSource::None,
        model: None,
        measured_ks: SampleKs::default(),
    });
    state.reading = 3;
    update(&mut state, Action::ToggleConductivity);
    assert_eq!(state.reading, 0, "the cursor starts on the first K");
    assert_eq!(state.reading_rows(), 2);
    state.focus = Pane::Readings;
    update(&mut state, Action::Down);
    update(&mut state, Action::Down);
    assert_eq!(state.reading, 1, "the cursor stays within the K readings");
    // The flagged K is cleared; the other is flagged with a reason.
    update(&mut state, Action::ToggleFlag);
    assert_eq!(
        update(&mut state, Action::Submit),
        vec![Effect::ClearFlag {
            target: FlagTarget::ConductivityReading(8),
            note: String::new()
        }]
    );
    update(&mut state, Action::Up);
    update(&mut state, Action::ToggleFlag);
    for c in "ring leaked".chars() {
        update(&mut state, Action::Char(c));
    }
    assert_eq!(
        update(&mut state, Action::Submit),
        vec![Effect::SetFlag {
            target: FlagTarget::ConductivityReading(7),
            reason: "ring leaked".into()
        }]
    );
    // Back in the θ(h) view the same key flags retention readings.
    update(&mut state, Action::ToggleConductivity);
    update(&mut state, Action::ToggleFlag);
    assert!(matches!(
        state.input,
        Input::Reason {
            target: FlagTarget::Reading(10),
            ..
        }
    ));
}
