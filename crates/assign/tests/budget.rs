//! The per-event search budget and the cancellation flag (issue 12: one
//! 200-jet event under the tW-pair hypothesis with 20 leading jets scored
//! 635 M assignments in 31 s, and a signal could not stop it). Each test
//! fails on the code before the budget existed: the search ran to the end.

use quarry_assign::{
    presets, BudgetLimit, SearchBudget, SearchConfig, SearchStatus, Searcher, BUDGET_CHECK_EVERY,
    DEFAULT_MAX_ASSIGNMENTS,
};
use quarry_event::{Event, Flavour, Jet, Lepton, Met};
use quarry_lorentz::FourMomentum;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

/// An event with `n` jets of similar pt spread over the detector, half of
/// them b-tagged, one muon and MET: many assignments of similar χ², so
/// pruning cuts little.
fn crowded_event(n: usize) -> Event {
    let mut e = Event::new(7);
    for i in 0..n {
        let pt = 200.0 - 0.5 * i as f64;
        let eta = -2.0 + 4.0 * ((i * 37) % 101) as f64 / 100.0;
        let phi = -3.0 + 6.0 * ((i * 53) % 97) as f64 / 96.0;
        let btag = if i % 2 == 0 { 0.9 } else { 0.1 };
        e.jets.push(
            Jet::new(FourMomentum::from_pt_eta_phi_m(pt, eta, phi, 8.0), btag).with_index(i as u32),
        );
    }
    e.muons.push(Lepton {
        p4: FourMomentum::from_pt_eta_phi_m(60.0, 0.3, 1.0, 0.1057),
        flavour: Flavour::Muon,
        charge: -1,
        truth: None,
        index: 0,
    });
    e.met = Met::new(40.0, -30.0);
    e
}

/// 20 leading jets, every jet admitted to every role; without pruning
/// (the search's bounds cut most of a random event, and the budget must
/// hold for the worst case) the event has about 10^10 assignments.
fn config(budget: SearchBudget) -> SearchConfig {
    SearchConfig {
        max_jets_override: Some(20),
        btag: quarry_assign::BtagPolicy::Ignore,
        prune: false,
        budget,
        ..SearchConfig::default()
    }
}

#[test]
fn an_event_past_its_assignment_budget_stops_with_the_budget_in_its_status() {
    let h = presets::get("twtw-ljets").unwrap();
    let limit = 2_000_000;
    let mut s = Searcher::new(
        &h,
        config(SearchBudget {
            max_assignments: Some(limit),
            max_time: None,
        }),
    )
    .unwrap();
    let out = s.search(&crowded_event(200));
    assert_eq!(
        out.status,
        SearchStatus::BudgetExceeded(BudgetLimit::Assignments(limit))
    );
    assert!(out.ranked.is_empty(), "a stopped search reports no K best");
    let work = out.evaluated.complete + out.evaluated.partial;
    // Checked every BUDGET_CHECK_EVERY assignments; one step of the walk
    // adds at most one candidate list on top.
    assert!(
        (limit..limit + BUDGET_CHECK_EVERY + 64).contains(&work),
        "work {work}"
    );
    assert_eq!(
        BudgetLimit::Assignments(limit).to_string(),
        "search budget of 2000000 assignments exceeded"
    );
    // An 8-jet event is searched in full, even without pruning, far below
    // the default budget.
    let mut s = Searcher::new(&h, config(SearchBudget::default())).unwrap();
    let small = s.search(&crowded_event(8));
    assert_eq!(small.status, SearchStatus::Found);
    assert!(small.evaluated.complete + small.evaluated.partial < DEFAULT_MAX_ASSIGNMENTS / 1000);
}

#[test]
fn a_time_budget_stops_a_long_event() {
    let h = presets::get("twtw-ljets").unwrap();
    let t = Duration::from_millis(100);
    let mut s = Searcher::new(
        &h,
        config(SearchBudget {
            max_assignments: None,
            max_time: Some(t),
        }),
    )
    .unwrap();
    let start = Instant::now();
    let out = s.search(&crowded_event(200));
    assert_eq!(
        out.status,
        SearchStatus::BudgetExceeded(BudgetLimit::Time(t))
    );
    // Generous: a loaded machine may deschedule the search; without the
    // budget this event takes tens of seconds.
    assert!(
        start.elapsed() < Duration::from_secs(10),
        "{:?}",
        start.elapsed()
    );
}

#[test]
fn a_cancellation_flag_stops_the_search_in_progress() {
    let h = presets::get("twtw-ljets").unwrap();
    let mut s = Searcher::new(&h, config(SearchBudget::UNLIMITED)).unwrap();
    let flag = Arc::new(AtomicBool::new(false));
    s.set_cancel(Some(flag.clone()));
    let setter = {
        let flag = flag.clone();
        std::thread::spawn(move || {
            std::thread::sleep(Duration::from_millis(200));
            flag.store(true, Ordering::Relaxed);
            Instant::now()
        })
    };
    let out = s.search(&crowded_event(200));
    let stopped = Instant::now();
    let set_at = setter.join().unwrap();
    assert_eq!(out.status, SearchStatus::Cancelled);
    assert!(out.ranked.is_empty());
    assert!(
        stopped.saturating_duration_since(set_at) < Duration::from_secs(2),
        "stopped {:?} after the flag",
        stopped.saturating_duration_since(set_at)
    );
    // Cleared, the same searcher searches again.
    flag.store(false, Ordering::Relaxed);
    assert_eq!(s.search(&crowded_event(8)).status, SearchStatus::Found);
}
