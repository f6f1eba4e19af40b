//! The consistency diagnosis against an independent implementation.
//!
//! Source: `tests/vectors/diagnosis_cases.json`, written by
//! `tests/tools/gen_diagnosis.py` (numpy 2.4.6, scipy 1.17.1; the versions
//! are also recorded in the file's `source` field). That script implements
//! `docs/diagnosis.md` on its own:
//! - residuals r_E, r_S, r_H from its own functions, with the mode sign;
//! - sensitivities by complex-step differentiation of the exact corrected
//!   residuals (Squire & Trapp, SIAM Review 40(1), 1998), exact to rounding;
//! - covariance by GUM first-order propagation with correlations kept
//!   (JCGM 100:2008 §5.1.2), UA (configured, or learned from a learning
//!   window and then passed the same way) one more independent column;
//! - the global test, measurement test and GLR for a single bias
//!   (Narasimhan & Jordache, *Data Reconciliation and Gross Error
//!   Detection*, 2000, ch. 7), χ² quantiles from `scipy.stats.chi2`;
//! - each channel's bias as the exact least-squares fit to the available
//!   equalities (`scipy.optimize.least_squares` polished by Gauss–Newton),
//!   then, when σ̇ still fails, the nearest root of r_S (bracketed by a
//!   scan on both sides, `scipy.optimize.brentq`, Newton polish). Where
//!   the specification is silent the script reads it so: an equality fit
//!   with no finite minimum among the valid corrections gives no
//!   candidate; a channel whose σ̇ has no root (hot2 never moves it) keeps
//!   its equality fit, and the second law does not bind it.
//!
//! Every case is compared in full and every disagreement listed, each
//! naming its case, before the test fails.
//!
//! Tolerances: residuals and their uncertainties agree to rounding (1e-9
//! relative, plus 1e-9 of the residual's u absolute: both sides compute the
//! same closed forms); γ, z, GLR and the linear bias to 1e-6 relative (the
//! core's Jacobian is analytic, the script's by complex step: both exact);
//! the refined bias to 1e-6 of max(|bias|, u_channel) (the core
//! differentiates by central differences while refining, so it stops within
//! about 1e-8·u of the exact value the script finds).
use heatbound::diagnosis::{CHI2_95, Diagnosis, Losses, Relation, Settings, Ua, Window, diagnose};
use heatbound::monitor::Channel;
use serde_json::Value;

const VECTORS: &str = include_str!("../vectors/diagnosis_cases.json");

fn num(v: &Value, what: &str) -> f64 {
    v.as_f64()
        .unwrap_or_else(|| panic!("{what}: not a number: {v}"))
}

fn channel(name: &str) -> Channel {
    match name {
        "hot" => Channel::Hot,
        "hot2" => Channel::Hot2,
        "cold" => Channel::Cold,
        "heat_in" => Channel::HeatIn,
        "work" => Channel::Work,
        "heat_out" => Channel::HeatOut,
        other => panic!("unknown channel {other}"),
    }
}

fn relation(name: &str) -> Relation {
    match name {
        "first_law" => Relation::FirstLaw,
        "second_law" => Relation::SecondLaw,
        "hot_pair" => Relation::HotPair,
        other => panic!("unknown relation {other}"),
    }
}

/// `u` key of a channel in the vectors, in the core's column order.
const U_KEYS: [&str; 6] = [
    "hot_k",
    "hot2_k",
    "cold_k",
    "heat_in_rel",
    "work_rel",
    "heat_out_rel",
];

fn u_of(input: &Value, ch: Channel) -> f64 {
    let key = match ch {
        Channel::Hot => "hot_k",
        Channel::Hot2 => "hot2_k",
        Channel::Cold => "cold_k",
        Channel::HeatIn => "heat_in_rel",
        Channel::Work => "work_rel",
        Channel::HeatOut => "heat_out_rel",
    };
    num(&input["u"][key], key)
}

/// The core's window from a case's (or a learning window's) integrals.
fn window_of(name: &str, input: &Value) -> Window<f64> {
    let f = |key: &str| num(&input[key], &format!("{name}: {key}"));
    let d = f("duration_s");
    let qi = f("heat_in_j");
    let w = f("work_j");
    let measured = !input["heat_out_j"].is_null();
    let qo = if measured { f("heat_out_j") } else { qi - w };
    Window {
        reverse: match input["mode"].as_str().unwrap() {
            "engine" => false,
            "heat_pump" | "cooler" => true,
            other => panic!("{name}: unknown mode {other}"),
        },
        duration_s: d,
        heat_in_j: qi,
        work_j: w,
        heat_out_j: qo,
        heat_out_measured: measured,
        hot_mean_k: qi / f("entropy_in_j_per_k"),
        cold_mean_k: qo / f("entropy_out_j_per_k"),
        t0_k: f("t0_k"),
        t0_is_cold_mean: input["t0_is_cold_mean"].as_bool().unwrap(),
        hot_time_integral_k_s: f("hot_time_integral_k_s"),
        hot_pair_k: input["hot_pair_integral_k_s"].as_f64().map(|p| p / d),
    }
}

/// The core's inputs for one case.
fn build(name: &str, input: &Value) -> (Window<f64>, Settings<f64>, Option<Ua<f64>>) {
    let window = window_of(name, input);
    let mut u = [0.0; 6];
    for (slot, key) in u.iter_mut().zip(U_KEYS) {
        // hot2's uncertainty is absent without the sensor: the core ignores it.
        *slot = input["u"][key].as_f64().unwrap_or(1.0);
    }
    let settings = Settings {
        u,
        coverage_factor: num(&input["coverage_factor"], name),
    };
    let ua = (!input["ua"].is_null()).then(|| {
        Ua::configured(&Losses {
            ua_w_per_k: num(&input["ua"]["w_per_k"], name),
            u_ua_w_per_k: num(&input["ua"]["u_w_per_k"], name),
        })
    });
    (window, settings, ua)
}

/// The disagreements found in one case, each naming the case.
struct Report<'a> {
    case: &'a str,
    errors: Vec<String>,
}

impl Report<'_> {
    fn fail(&mut self, msg: String) {
        self.errors.push(format!("{}: {msg}", self.case));
    }

    /// `|got − want| ≤ rel·|want| + abs`.
    fn near(&mut self, what: &str, got: f64, want: f64, rel: f64, abs: f64) {
        let d = (got - want).abs();
        let tol = rel * want.abs() + abs;
        if d.is_nan() || d > tol {
            self.fail(format!(
                "{what}: got {got:e}, want {want:e}, |difference| {d:e} > {tol:e}"
            ));
        }
    }

    fn same<T: PartialEq + core::fmt::Debug>(&mut self, what: &str, got: T, want: T) {
        if got != want {
            self.fail(format!("{what}: got {got:?}, want {want:?}"));
        }
    }
}

fn check_residuals(r: &mut Report, d: &Diagnosis<f64>, exp: &Value) {
    let res = &exp["residuals"];
    for (rel, value_key, u_key) in [
        (Relation::FirstLaw, "first_law_w", "u_first_law_w"),
        (
            Relation::SecondLaw,
            "second_law_w_per_k",
            "u_second_law_w_per_k",
        ),
        (Relation::HotPair, "hot_pair_k", "u_hot_pair_k"),
    ] {
        match (res[value_key].as_f64(), d.residual(rel)) {
            (None, None) => {}
            (None, Some(g)) => r.fail(format!(
                "{} available ({g:?}), the vectors have none",
                rel.name()
            )),
            (Some(_), None) => r.fail(format!("{} not available", rel.name())),
            (Some(want), Some(g)) => {
                let want_u = num(&res[u_key], r.case);
                r.near(&format!("{} u", rel.name()), g.u, want_u, 1e-9, 0.0);
                r.near(
                    &format!("{} value", rel.name()),
                    g.value,
                    want,
                    1e-9,
                    1e-9 * want_u,
                );
            }
        }
    }
}

/// Compares one case; returns the worst bias difference over u, the worst
/// relative difference of a linear estimate, and the disagreements.
fn check_case(case: &Value) -> (f64, f64, Vec<String>) {
    let name = case["name"].as_str().unwrap();
    let input = &case["input"];
    let exp = &case["expected"];
    let mut r = Report {
        case: name,
        errors: Vec::new(),
    };
    let (window, settings, ua) = build(name, input);
    let d = match diagnose(&window, &settings, ua.as_ref(), false) {
        Ok(d) => d,
        Err(e) => {
            r.fail(format!("diagnose failed: {e}"));
            return (0.0, 0.0, r.errors);
        }
    };

    check_residuals(&mut r, &d, exp);
    let consistent = exp["consistent"].as_bool().unwrap();
    r.same("consistent", d.consistent, consistent);

    // The active set, and the χ² critical value for its size.
    let active: Vec<Relation> = exp["active"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| relation(x.as_str().unwrap()))
        .collect();
    for rel in Relation::ALL {
        r.same(
            &format!("{} active", rel.name()),
            d.is_active(rel),
            active.contains(&rel),
        );
    }
    let dof = exp["dof"].as_u64().unwrap() as usize;
    r.same("degrees of freedom", d.active.count_ones() as usize, dof);
    if dof > 0 {
        r.near(
            "χ² 95 %",
            CHI2_95[dof - 1],
            num(&exp["critical"], name),
            1e-12,
            0.0,
        );
    }
    r.near("gamma", d.gamma, num(&exp["gamma"], name), 1e-6, 1e-12);
    r.same("suspect", d.suspect, exp["suspect"].as_str().map(channel));
    if consistent {
        r.same("candidates when consistent", d.candidates.len(), 0);
    }

    // Each candidate the core lists, against the vectors' value for it.
    let want: Vec<&str> = exp["candidates"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c.as_str().unwrap())
        .collect();
    let mut worst_bias = 0.0_f64;
    let mut worst_linear = 0.0_f64;
    for c in &d.candidates {
        let ch = c.channel.name();
        let e = &exp["channels"][ch];
        let what = |field: &str| format!("{ch} {field}");
        if !want.contains(&ch) {
            r.fail(format!(
                "{ch} is a candidate (bias {:e}, explains {}, second_law_binds {}), the vectors have none (their bias: {})",
                c.bias, c.explains, c.second_law_binds, e["bias"]
            ));
            continue;
        }
        let u = u_of(input, c.channel);
        r.same(
            &what("explains"),
            c.explains,
            e["explains"].as_bool().unwrap(),
        );
        r.same(
            &what("second_law_binds"),
            c.second_law_binds,
            e["second_law_binds"].as_bool().unwrap(),
        );
        let want_bias = num(&e["bias"], &what("bias"));
        let scale = want_bias.abs().max(u);
        r.near(&what("bias"), c.bias, want_bias, 0.0, 1e-6 * scale);
        worst_bias = worst_bias.max((c.bias - want_bias).abs() / u);
        r.near(
            &what("bias_over_u"),
            c.bias_over_u,
            want_bias.abs() / u,
            0.0,
            1e-6 * scale / u,
        );
        r.near(
            &what("glr"),
            c.glr,
            num(&e["glr"], &what("glr")),
            1e-6,
            1e-12,
        );
        r.near(&what("z"), c.z, num(&e["z"], &what("z")), 1e-6, 1e-12);
        let want_linear = num(&e["bias_linear"], &what("bias_linear"));
        r.near(
            &what("bias_linear"),
            c.bias_linear,
            want_linear,
            1e-6,
            1e-9 * u,
        );
        worst_linear =
            worst_linear.max((c.bias_linear - want_linear).abs() / want_linear.abs().max(u));
    }
    let got: Vec<&str> = d.candidates.iter().map(|c| c.channel.name()).collect();
    for w in &want {
        if !got.contains(w) {
            let e = &exp["channels"][*w];
            r.fail(format!(
                "{w} is no candidate; the vectors have bias {}, explains {}, second_law_binds {}",
                e["bias"], e["explains"], e["second_law_binds"]
            ));
        }
    }
    // Rank order. Two candidates of the same group whose |bias|/u tie
    // (hot and hot2 with equal uncertainties, seen alike through the first
    // law and the pair, tie exactly) may come in either order: rounding
    // decides it.
    if got.len() == want.len() && got.iter().all(|g| want.contains(g)) {
        let rank = |ch: &str| {
            let e = &exp["channels"][ch];
            (
                e["explains"].as_bool().unwrap(),
                num(&e["bias"], name).abs() / u_of(input, channel(ch)),
            )
        };
        let in_order = got.iter().zip(&want).all(|(g, w)| {
            let (rg, rw) = (rank(g), rank(w));
            g == w || (rg.0 == rw.0 && (rg.1 - rw.1).abs() <= 1e-9 * rg.1.max(rw.1))
        });
        if !in_order {
            r.fail(format!(
                "candidates in rank order: got {got:?}, want {want:?}"
            ));
        }
    }
    (worst_bias, worst_linear, r.errors)
}

#[test]
fn every_case_matches_the_independent_implementation() {
    let doc: Value = serde_json::from_str(VECTORS).unwrap();
    let cases = doc["cases"].as_array().unwrap();
    assert!(cases.len() >= 40, "the vectors hold {} cases", cases.len());
    let (mut worst_bias, mut worst_linear) = (0.0_f64, 0.0_f64);
    // Every case is checked, and every disagreement reported, before failing.
    let mut failed = Vec::new();
    for case in cases {
        let (b, l, errors) = check_case(case);
        worst_bias = worst_bias.max(b);
        worst_linear = worst_linear.max(l);
        failed.extend(errors);
    }
    println!("worst |bias − reference| / u over every candidate: {worst_bias:e}");
    println!("worst relative difference of a linear GLR estimate: {worst_linear:e}");
    assert!(
        failed.is_empty(),
        "{} disagreements with the vectors:\n{}",
        failed.len(),
        failed.join("\n")
    );
}

#[test]
fn learned_ua_matches_the_vectors() {
    // The learned cases pass UA as a plain value; here the core learns it
    // from the same learning window (same channel uncertainties) and must
    // find the value and uncertainty the script found (docs/diagnosis.md
    // §5; the script differentiates UA by complex step, the core by hand).
    let doc: Value = serde_json::from_str(VECTORS).unwrap();
    let mut learned = 0;
    for case in doc["cases"].as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let ua = &case["input"]["ua"];
        if ua["source"] != "learned" {
            continue;
        }
        learned += 1;
        let (_, settings, _) = build(name, &case["input"]);
        let w = window_of(name, &ua["learned_from"]);
        let got = Ua::<f64>::learn(&w, &settings.u, 0)
            .unwrap_or_else(|| panic!("{name}: UA not learned"));
        let want = num(&ua["w_per_k"], name);
        let want_u = num(&ua["u_w_per_k"], name);
        assert!(
            (got.w_per_k - want).abs() <= 1e-9 * want.abs(),
            "{name}: learned UA {} W/K, want {want}",
            got.w_per_k
        );
        assert!(
            (got.u_w_per_k - want_u).abs() <= 1e-9 * want_u,
            "{name}: u(learned UA) {} W/K, want {want_u}",
            got.u_w_per_k
        );
    }
    assert!(learned >= 4, "{learned} learned-UA cases");
}

#[test]
fn the_vectors_exercise_every_outcome() {
    // The file must keep the cases that make the comparison above mean
    // something: a named suspect, several explaining channels and none,
    // the second law binding a bias, and consistent windows.
    let doc: Value = serde_json::from_str(VECTORS).unwrap();
    let cases = doc["cases"].as_array().unwrap();
    let count =
        |pred: &dyn Fn(&Value) -> bool| cases.iter().filter(|c| pred(&c["expected"])).count();
    let named = count(&|e| !e["suspect"].is_null());
    let unnamed = count(&|e| e["suspect"].is_null() && !e["consistent"].as_bool().unwrap());
    let consistent = count(&|e| e["consistent"].as_bool().unwrap());
    let binds = count(&|e| {
        e["candidates"].as_array().unwrap().iter().any(|c| {
            e["channels"][c.as_str().unwrap()]["second_law_binds"]
                .as_bool()
                .unwrap()
        })
    });
    let suspect_binds = count(&|e| {
        e["suspect"]
            .as_str()
            .is_some_and(|s| e["channels"][s]["second_law_binds"].as_bool().unwrap())
    });
    let reversed_with_pair = cases
        .iter()
        .filter(|c| {
            c["input"]["mode"] != "engine" && !c["input"]["hot_pair_integral_k_s"].is_null()
        })
        .count();
    assert!(named >= 5, "{named} cases name a suspect");
    assert!(unnamed >= 5, "{unnamed} inconsistent cases name none");
    assert!(consistent >= 5, "{consistent} consistent cases");
    assert!(
        binds >= 5,
        "{binds} cases where the second law binds a bias"
    );
    assert!(
        suspect_binds >= 2,
        "{suspect_binds} cases whose suspect is bound by the second law"
    );
    assert!(
        reversed_with_pair >= 2,
        "{reversed_with_pair} heat-pump or cooler cases with hot2"
    );
}
