//! Tests of the acceptance decision.

use super::*;

/// Limits 1800..2200 N/m, nominal 2000 N/m, decisions on fair or better.
fn limits() -> Limits {
    Limits {
        nominal_n_per_m: 2000.0,
        lower_n_per_m: 1800.0,
        upper_n_per_m: 2200.0,
        max_anisotropy_percent: None,
        max_unevenness_percent: None,
        min_quality: Grade::Fair,
    }
}

fn input(x: f64, u: f64, grade: Grade) -> DecisionInput {
    DecisionInput {
        tension: Some(Estimate {
            value: x,
            standard_uncertainty: u,
        }),
        anisotropy_percent: None,
        unevenness_percent: None,
        unevenness_problem: None,
        grade,
        grade_reasons: vec![],
    }
}

/// The table: u = 10 N/m, k = 2, so w = 20 N/m under the guarded
/// rule. Every value is exactly representable, and so are L ± w and
/// H ± w, so the closed-interval edges are tested exactly.
#[test]
fn decision_table_both_rules() {
    use Decision::*;
    let rows: &[(f64, Decision, Decision)] = &[
        // x,     simple, guarded
        (1700.0, Fail, Fail),          // far below
        (1779.0, Fail, Fail),          // below L − w
        (1780.0, Fail, Indeterminate), // at L − w: in the band
        (1790.0, Fail, Indeterminate), // below L, in the band (conditional fail)
        (1800.0, Pass, Indeterminate), // at L
        (1810.0, Pass, Indeterminate), // above L, in the band (conditional pass)
        (1820.0, Pass, Pass),          // at L + w: first accepted value
        (2000.0, Pass, Pass),          // nominal
        (2180.0, Pass, Pass),          // at H − w
        (2190.0, Pass, Indeterminate), // in the band below H
        (2200.0, Pass, Indeterminate), // at H
        (2210.0, Fail, Indeterminate), // in the band above H
        (2220.0, Fail, Indeterminate), // at H + w
        (2221.0, Fail, Fail),          // beyond H + w
        (2500.0, Fail, Fail),          // far above
    ];
    for (x, simple, guarded) in rows {
        let i = input(*x, 10.0, Grade::Sound);
        let s = decide(&i, &limits(), &DecisionRule::new(Rule::Simple));
        let g = decide(&i, &limits(), &DecisionRule::new(Rule::Guarded));
        assert_eq!(&s.decision, simple, "simple at {x}: {:?}", s.reasons);
        assert_eq!(&g.decision, guarded, "guarded at {x}: {:?}", g.reasons);
        assert_eq!(s.rule, "simple");
        assert_eq!(g.rule, "guarded");
        assert_eq!(s.guard_band_n_per_m, Some(0.0));
        // Tolerance: w = 2·10 exactly in binary floating point.
        assert_eq!(g.guard_band_n_per_m, Some(20.0));
    }
}

#[test]
fn guard_band_side_is_named() {
    let g = decide(
        &input(1810.0, 10.0, Grade::Sound),
        &limits(),
        &DecisionRule::new(Rule::Guarded),
    );
    assert!(g.reasons[0].contains("conditional pass"), "{:?}", g.reasons);
    assert!(g.reasons[0].contains("lower limit"), "{:?}", g.reasons);
    let g = decide(
        &input(2210.0, 10.0, Grade::Sound),
        &limits(),
        &DecisionRule::new(Rule::Guarded),
    );
    assert!(g.reasons[0].contains("conditional fail"), "{:?}", g.reasons);
    assert!(g.reasons[0].contains("upper limit"), "{:?}", g.reasons);
}

#[test]
fn margins_in_n_per_m_and_percent_of_tolerance() {
    // Tolerance: the margins are differences of small integers, exact
    // in floating point; 1e-12 only allows for the division.
    let v = decide(
        &input(1850.0, 5.0, Grade::Sound),
        &limits(),
        &DecisionRule::new(Rule::Simple),
    );
    let m = v.margin.unwrap();
    assert_eq!(m.nearest_limit, LimitSide::Lower);
    assert!((m.n_per_m - 50.0).abs() < 1e-12);
    assert!((m.percent_of_tolerance - 12.5).abs() < 1e-12);
    assert!((v.deviation_from_nominal_n_per_m.unwrap() + 150.0).abs() < 1e-12);
    let v = decide(
        &input(2240.0, 5.0, Grade::Sound),
        &limits(),
        &DecisionRule::new(Rule::Simple),
    );
    let m = v.margin.unwrap();
    assert_eq!(m.nearest_limit, LimitSide::Upper);
    assert!((m.n_per_m + 40.0).abs() < 1e-12);
    assert!((m.percent_of_tolerance + 10.0).abs() < 1e-12);
    assert_eq!(v.decision, Decision::Fail);
}

#[test]
fn poor_grades_and_missing_tension_are_not_measured() {
    for rule in [Rule::Simple, Rule::Guarded] {
        let r = DecisionRule::new(rule);
        // A value right on nominal must still not pass when doubtful.
        let mut i = input(2000.0, 1.0, Grade::Doubtful);
        i.grade_reasons = vec!["rms residual 31 cents".into()];
        let v = decide(&i, &limits(), &r);
        let Decision::NotMeasured { reason } = &v.decision else {
            panic!("doubtful passed: {v:?}")
        };
        assert!(
            reason.contains("doubtful") && reason.contains("fair"),
            "{reason}"
        );
        assert!(reason.contains("31 cents"), "{reason}");
        assert!(v.margin.is_none());

        let v = decide(&input(2000.0, 1.0, Grade::Unfit), &limits(), &r);
        assert_eq!(v.decision.name(), "not_measured");

        let mut i = input(2000.0, 1.0, Grade::Sound);
        i.tension = None;
        assert_eq!(decide(&i, &limits(), &r).decision.name(), "not_measured");
        for (x, u) in [(f64::NAN, 1.0), (2000.0, f64::INFINITY), (2000.0, -1.0)] {
            let v = decide(&input(x, u, Grade::Sound), &limits(), &r);
            assert_eq!(v.decision.name(), "not_measured", "{x} ± {u}");
        }
    }
    // Fair is decided on when min-quality is fair, not when it is sound.
    let r = DecisionRule::new(Rule::Simple);
    assert_eq!(
        decide(&input(2000.0, 1.0, Grade::Fair), &limits(), &r).decision,
        Decision::Pass
    );
    let strict = Limits {
        min_quality: Grade::Sound,
        ..limits()
    };
    assert_eq!(
        decide(&input(2000.0, 1.0, Grade::Fair), &strict, &r)
            .decision
            .name(),
        "not_measured"
    );
}

#[test]
fn guard_bands_wider_than_the_tolerance_never_pass() {
    // u = 120 N/m, k = 2: w = 240 N/m > half the 400 N/m tolerance.
    let v = decide(
        &input(2000.0, 120.0, Grade::Sound),
        &limits(),
        &DecisionRule::new(Rule::Guarded),
    );
    assert_eq!(v.decision, Decision::Indeterminate);
    assert!(v.acceptance_interval_n_per_m.is_none());
    assert!(v
        .reasons
        .iter()
        .any(|r| r.contains("wider than the tolerance")));
    // Far outside still fails.
    let v = decide(
        &input(1000.0, 120.0, Grade::Sound),
        &limits(),
        &DecisionRule::new(Rule::Guarded),
    );
    assert_eq!(v.decision, Decision::Fail);
}

#[test]
fn coverage_factor_sets_the_guard_band() {
    let r = DecisionRule {
        rule: Rule::Guarded,
        coverage_factor: 3.0,
    };
    // w = 30 N/m: 1825 is accepted with k = 2 but not with k = 3.
    let i = input(1825.0, 10.0, Grade::Sound);
    assert_eq!(decide(&i, &limits(), &r).decision, Decision::Indeterminate);
    assert_eq!(
        decide(&i, &limits(), &DecisionRule::new(Rule::Guarded)).decision,
        Decision::Pass
    );
}

#[test]
fn anisotropy_limit_combines_with_tension() {
    let lim = Limits {
        max_anisotropy_percent: Some(5.0),
        ..limits()
    };
    let r = DecisionRule::new(Rule::Guarded);
    let with = |a: f64, ua: f64| DecisionInput {
        anisotropy_percent: Some(Estimate {
            value: a,
            standard_uncertainty: ua,
        }),
        ..input(2000.0, 10.0, Grade::Sound)
    };
    assert_eq!(decide(&with(2.0, 0.5), &lim, &r).decision, Decision::Pass);
    assert_eq!(
        decide(&with(-4.5, 0.5), &lim, &r).decision,
        Decision::Indeterminate
    );
    assert_eq!(decide(&with(7.0, 0.5), &lim, &r).decision, Decision::Fail);
    // A tension failure is not hidden by a good anisotropy.
    let mut i = with(1.0, 0.1);
    i.tension = Some(Estimate {
        value: 1500.0,
        standard_uncertainty: 10.0,
    });
    assert_eq!(decide(&i, &lim, &r).decision, Decision::Fail);
    // Limited but not measured: no decision.
    let v = decide(&input(2000.0, 10.0, Grade::Sound), &lim, &r);
    assert_eq!(v.decision.name(), "not_measured");
}

#[test]
fn unevenness_limit_is_judged_and_a_missing_pair_is_said() {
    let lim = Limits {
        max_unevenness_percent: Some(2.0),
        ..limits()
    };
    let with = |s: Option<(f64, f64)>| DecisionInput {
        unevenness_percent: s.map(|(v, u)| Estimate {
            value: v,
            standard_uncertainty: u,
        }),
        ..input(2000.0, 10.0, Grade::Sound)
    };
    let g = DecisionRule::new(Rule::Guarded);
    let s = DecisionRule::new(Rule::Simple);
    // u = 0.25 %, k = 2: w = 0.5 %; values exact in binary.
    let v = decide(&with(Some((1.0, 0.25))), &lim, &g);
    assert_eq!(v.decision, Decision::Pass);
    let j = v.unevenness.unwrap();
    assert_eq!(j.decision, "pass");
    assert_eq!(j.guard_band_percent, 0.5);
    assert_eq!(
        decide(&with(Some((1.75, 0.25))), &lim, &g).decision,
        Decision::Indeterminate
    );
    assert_eq!(
        decide(&with(Some((1.75, 0.25))), &lim, &s).decision,
        Decision::Pass
    );
    assert_eq!(
        decide(&with(Some((2.25, 0.25))), &lim, &s).decision,
        Decision::Fail
    );
    assert_eq!(
        decide(&with(Some((3.0, 0.25))), &lim, &g).decision,
        Decision::Fail
    );
    // No split pair: decided on the tension, with the reason.
    for r in [s, g] {
        let v = decide(&with(None), &lim, &r);
        assert_eq!(v.decision, Decision::Pass);
        assert!(v.unevenness.is_none());
        assert!(
            v.reasons
                .iter()
                .any(|x| x.contains(EVENNESS_NOT_MEASURABLE)),
            "{:?}",
            v.reasons
        );
    }
    // ...and a tension failure still fails.
    let mut i = with(None);
    i.tension = Some(Estimate {
        value: 1500.0,
        standard_uncertainty: 10.0,
    });
    assert_eq!(decide(&i, &lim, &g).decision, Decision::Fail);
    // Without the limit nothing is said about evenness.
    let v = decide(&with(None), &limits(), &g);
    assert!(v.reasons.iter().all(|x| !x.contains("evenness")));
    // A pair found but not evaluated is not passed.
    let mut i = with(None);
    i.unevenness_problem = Some("the (1,1) pair has a member without an uncertainty".into());
    let v = decide(&i, &lim, &s);
    let Decision::NotMeasured { reason } = &v.decision else {
        panic!("{v:?}")
    };
    assert!(reason.contains("(1,1) pair"), "{reason}");
    // A non-finite value cannot be judged.
    let v = decide(&with(Some((f64::NAN, 0.1))), &lim, &g);
    assert_eq!(v.decision.name(), "not_measured");
}

#[test]
fn verdict_serialises_with_decision_tag() {
    let v = decide(
        &input(2000.0, 10.0, Grade::Sound),
        &limits(),
        &DecisionRule::new(Rule::Guarded),
    );
    let j = serde_json::to_value(&v).unwrap();
    assert_eq!(j["decision"], "pass");
    assert_eq!(j["rule"], "guarded");
    assert_eq!(j["margin"]["nearest_limit"], "lower");
    let v = decide(
        &input(2000.0, 10.0, Grade::Unfit),
        &limits(),
        &DecisionRule::new(Rule::Guarded),
    );
    let j = serde_json::to_value(&v).unwrap();
    assert_eq!(j["decision"], "not_measured");
    assert!(j["reason"].as_str().unwrap().contains("unfit"));
}

/// Parses a grade name (`sound`, `fair`, `doubtful`, `unfit`).
fn grade_from_name(name: &str) -> Option<Grade> {
    [Grade::Sound, Grade::Fair, Grade::Doubtful, Grade::Unfit]
        .into_iter()
        .find(|g| g.name() == name)
}

#[test]
fn grade_names_round_trip() {
    for g in [Grade::Sound, Grade::Fair, Grade::Doubtful, Grade::Unfit] {
        assert_eq!(grade_from_name(g.name()), Some(g));
    }
    assert_eq!(grade_from_name("excellent"), None);
}
