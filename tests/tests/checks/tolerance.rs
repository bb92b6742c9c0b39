//! Checks of the chain tolerance analyses (`flipwright::tolerance`): reproducibility of the
//! Monte Carlo run, the binomial statistics against their published formulas, the chain worst
//! case against the stage worst case it combines, and typed errors on bad options.

use flipwright::chain::loads::StageLoads;
use flipwright::design_file::DesignFile;
use flipwright::device::ebers_moll::EbersMoll;
use flipwright::stage::margins::MarginKind;
use flipwright::stage::synthesis::synthesise;
use flipwright::stage::worst_case;
use flipwright::stage::{Load, StageDesign};
use flipwright::tolerance::statistics::{sample_size, wilson_interval, wilson_two_sided};
use flipwright::tolerance::{
    chain_worst_case, monte_carlo_yield, Distribution, LoadedChain, MonteCarloOptions, ToleranceError,
};
use proptest::prelude::*;

/// The demo design with its values chosen by synthesis.
fn demo() -> StageDesign {
    static DEMO: std::sync::OnceLock<StageDesign> = std::sync::OnceLock::new();
    DEMO.get_or_init(|| {
        let file = DesignFile::demo();
        let mut input = file.synthesis_input().expect("demo input");
        input.values = synthesise(&input).expect("demo synthesises").values;
        StageDesign::new(input).expect("demo validates")
    })
    .clone()
}

fn options(trials: u32, seed: u64, distribution: Distribution) -> MonteCarloOptions {
    MonteCarloOptions { trials, seed, distribution, ..MonteCarloOptions::default() }
}

/// Reproducibility (our own requirement, no outside source): one seed gives the same run bit
/// for bit, another seed a different one, for both distributions.
#[test]
fn same_seed_same_digest_and_report_different_seed_different_digest() {
    let chain = LoadedChain::uniform(&demo(), 4).expect("chain");
    for distribution in [Distribution::Uniform, Distribution::Normal] {
        let a = monte_carlo_yield(&chain, &options(2000, 11, distribution)).expect("run a");
        let b = monte_carlo_yield(&chain, &options(2000, 11, distribution)).expect("run b");
        let c = monte_carlo_yield(&chain, &options(2000, 12, distribution)).expect("run c");
        assert_eq!(a, b, "{distribution:?}: same seed, same report");
        assert_eq!(a.digest.len(), 16);
        assert_ne!(a.digest, c.digest, "{distribution:?}: different seeds, different digests");
    }
    let u = monte_carlo_yield(&chain, &options(2000, 11, Distribution::Uniform)).expect("uniform");
    let n = monte_carlo_yield(&chain, &options(2000, 11, Distribution::Normal)).expect("normal");
    assert_ne!(u.digest, n.digest, "the distribution changes the draws");
}

/// Wilson score interval, computed here independently from the closed form of E. B. Wilson,
/// JASA 22 (1927), as written by Agresti & Coull, Am. Stat. 52 (1998), eq. (2):
/// [p̂ + z²/2n ± z√(p̂(1−p̂)/n + z²/4n²)] / (1 + z²/n).
fn wilson_by_formula(x: f64, n: f64, z: f64) -> (f64, f64) {
    let p = x / n;
    let centre = p + z * z / (2.0 * n);
    let spread = z * (p * (1.0 - p) / n + z * z / (4.0 * n * n)).sqrt();
    let scale = 1.0 + z * z / n;
    ((centre - spread) / scale, (centre + spread) / scale)
}

#[test]
fn wilson_interval_matches_the_closed_formula() {
    let z = 1.959_963_984_540_054; // z(0.975), normal table (common practice)
    for (x, n) in [(0u64, 10u64), (1, 10), (5, 10), (9, 10), (10, 10), (81, 263), (950, 1000), (9990, 10000)]
    {
        let (low, high) = wilson_by_formula(x as f64, n as f64, z);
        let ours = wilson_interval(x, n, z);
        assert!((ours.low - low.max(0.0)).abs() < 1e-12, "{x}/{n}: low {} vs {low}", ours.low);
        assert!((ours.high - high.min(1.0)).abs() < 1e-12, "{x}/{n}: high {} vs {high}", ours.high);
        // The confidence level is turned into z by our own quantile.
        let by_level = wilson_two_sided(x, n, 0.95);
        assert!((by_level.low - ours.low).abs() < 1e-8 && (by_level.high - ours.high).abs() < 1e-8);
    }
}

/// A quoted case, value from memory: R. G. Newcombe, Statistics in Medicine 17 (1998),
/// example 81/263 (p̂ = 0.308): 95 % score (Wilson) interval without continuity correction
/// 0.2553 … 0.3662.
#[test]
fn wilson_interval_of_a_quoted_case() {
    let i = wilson_two_sided(81, 263, 0.95);
    assert!((i.low - 0.2553).abs() < 0.00006, "low {}", i.low);
    assert!((i.high - 0.3662).abs() < 0.00006, "high {}", i.high);
}

/// Sample size for a proportion, n = z²p(1−p)/E² (W. G. Cochran, Sampling Techniques, 1977):
/// p = 0.5, E = 0.05 at 95 % gives 384.1 → 385, the common textbook figure.
#[test]
fn cochran_sample_size_of_the_textbook_case() {
    assert_eq!(sample_size(0.5, 0.05, 0.95), Some(385));
    // p = 0.5, E = 0.01 at 95 %: 9603.6 → 9604 (same formula, common practice).
    assert_eq!(sample_size(0.5, 0.01, 0.95), Some(9604));
    assert_eq!(sample_size(f64::NAN, 0.05, 0.95), None);
}

fn worst(report: &flipwright::tolerance::ChainWorstCase, kind: MarginKind) -> f64 {
    report.margins.iter().find(|m| m.kind == kind).map(|m| m.worst).expect("margin present")
}

/// The chain worst case against the stage worst case it combines (definition, no outside
/// source): never above nominal, equal to the smallest per-stage worst, and the stage with
/// the heavier load on Q2 limits the output swing (a heavier resistive load pulls the off
/// collector's high level down: Ohm's law, common practice).
#[test]
fn chain_worst_case_combines_the_stage_worst_cases() {
    let design = demo();
    let own = design.input().loads;
    let heavy = Load::Resistance { resistance_ohm: 10e3, return_v: 0.0 };
    let loads = [
        StageLoads { stage: 0, loads: own, capacitance_f: [0.0; 2], sources: Vec::new() },
        StageLoads { stage: 1, loads: [own[0], heavy], capacitance_f: [0.0; 2], sources: Vec::new() },
        StageLoads { stage: 2, loads: own, capacitance_f: [0.0; 2], sources: Vec::new() },
    ];
    let chain = LoadedChain::from_loads(&design, &loads).expect("chain");
    assert_eq!(chain.distinct.len(), 2);
    let report = chain_worst_case(&chain).expect("worst case");
    assert_eq!(report.stage_count, 3);
    for m in &report.margins {
        assert!(
            m.worst <= m.nominal + 1e-12 * m.nominal.abs().max(1.0),
            "{:?}: worst {} above nominal {}",
            m.kind,
            m.worst,
            m.nominal
        );
    }
    let mut per_stage = Vec::new();
    for d in &chain.distinct {
        let model = EbersMoll::from_datasheet(d.transistor()).expect("model").model;
        per_stage.push(worst_case::analyse(d, &model).expect("stage worst case"));
    }
    for m in &report.margins {
        let smallest = per_stage
            .iter()
            .filter_map(|r| r.margins.iter().find(|w| w.kind == m.kind).map(|w| w.worst))
            .fold(f64::INFINITY, f64::min);
        assert_eq!(m.worst, smallest, "{:?}", m.kind);
    }
    let swing = report.margins.iter().find(|m| m.kind == MarginKind::OutputSwing).expect("swing");
    assert_eq!(swing.limiting_stage, 1, "the heavily loaded stage limits the swing");
    assert!(
        worst(&report, MarginKind::OutputSwing)
            < per_stage[0].margins.iter().find(|w| w.kind == MarginKind::OutputSwing).expect("swing").worst
    );
}

/// Bad options are typed errors naming the field (our own rule: no panic on user input).
#[test]
fn bad_options_are_typed_errors() {
    let chain = LoadedChain::uniform(&demo(), 2).expect("chain");
    let field = |o: MonteCarloOptions| match monte_carlo_yield(&chain, &o) {
        Err(ToleranceError::InvalidOption { field, .. }) => field,
        other => panic!("expected an invalid option, got {other:?}"),
    };
    assert_eq!(field(MonteCarloOptions { trials: 0, ..MonteCarloOptions::default() }), "trials");
    assert_eq!(
        field(MonteCarloOptions { confidence: f64::NAN, ..MonteCarloOptions::default() }),
        "confidence"
    );
    assert_eq!(
        field(MonteCarloOptions { half_width: f64::NAN, ..MonteCarloOptions::default() }),
        "half_width"
    );
    assert_eq!(
        field(MonteCarloOptions { histogram_bins: 0, ..MonteCarloOptions::default() }),
        "histogram_bins"
    );
    assert!(matches!(LoadedChain::uniform(&demo(), 0), Err(ToleranceError::InvalidOption { .. })));
    // A NaN tolerance never reaches the analysis: the design does not validate.
    let mut input = demo().input().clone();
    input.conditions.resistor_tolerance = f64::NAN;
    assert!(StageDesign::new(input).is_err());
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]
    /// Any options give a report or a typed error, never a panic; a report's yield lies in
    /// its own interval.
    #[test]
    fn any_options_give_a_report_or_a_typed_error(
        trials in 0u32..300,
        seed in any::<u64>(),
        confidence in prop_oneof![Just(f64::NAN), Just(f64::INFINITY), -1.0f64..2.0],
        half_width in prop_oneof![Just(f64::NAN), -1.0f64..1.0],
        bins in 0u32..300,
        normal in any::<bool>(),
    ) {
        let chain = LoadedChain::uniform(&demo(), 2).expect("chain");
        let o = MonteCarloOptions {
            trials, seed, confidence, half_width, histogram_bins: bins,
            distribution: if normal { Distribution::Normal } else { Distribution::Uniform },
        };
        match monte_carlo_yield(&chain, &o) {
            Ok(r) => {
                prop_assert!(r.interval.low <= r.yield_fraction && r.yield_fraction <= r.interval.high);
                prop_assert!(r.lower_bound <= r.yield_fraction);
            }
            Err(ToleranceError::InvalidOption { .. }) => {}
            Err(other) => prop_assert!(false, "unexpected error {other:?}"),
        }
    }
}
