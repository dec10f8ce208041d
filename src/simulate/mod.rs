//! Synthetic mirrored sessions with known truth, for the demo and for tests.
//!
//! A [`Scenario`] (TOML) describes the limb, its muscles, rings of electrode
//! sites, one optional site fault, the task blocks and the mirroring lag.
//! [`simulate`] builds:
//!
//! 1. the intended movement of every DoF on the EMG clock ([`movement`]):
//!    paced cycles, hold-and-release (active move, hold, *passive* return with
//!    no muscle activity), free movement and rests;
//! 2. muscle activations that lead the movement by the electro-mechanical
//!    delay, with a position-dependent effort, one muscle able to serve two DoFs;
//! 3. raw EMG at every site ([`emg`]): activation-modulated band-limited noise
//!    with distance-decaying crosstalk, baseline noise, mains hum and the fault;
//! 4. the intact-side glove angles through a slowly varying mirroring lag
//!    ([`mirror`]) plus glove noise, on the glove's own clock.
//!
//! [`write_session`] writes the session folder (DESIGN.md section 3) and the
//! [`Truth`] file beside it. The same scenario and seed give the same bytes.

pub mod emg;
pub mod mirror;
pub mod movement;
mod scenario;
mod truth;
mod write;

pub use scenario::*;
pub use truth::*;
pub use write::{default_truth_path, write_session};

use crate::Result;

/// Rate of the truth map's grid, Hz.
pub const TRUTH_MAP_RATE_HZ: f64 = 100.0;
/// A site is informative for a direction when its pickup score is at least
/// this share of the best site's score for that direction ...
pub const INFORMATIVE_SHARE: f64 = 0.3;
/// ... and at least this absolute pickup.
pub const INFORMATIVE_MIN: f64 = 0.1;
/// A site is irrelevant when its best score for every direction is below this.
pub const IRRELEVANT_MAX: f64 = 0.01;

/// A simulated session in memory.
pub struct Simulated {
    /// Site positions.
    pub sites: Vec<emg::SitePos>,
    /// Raw EMG per site in mV, at the EMG rate from time 0.
    pub emg: Vec<Vec<f64>>,
    /// The glove recording.
    pub glove: mirror::Glove,
    /// The intended movement.
    pub movement: movement::Movement,
    /// The truth.
    pub truth: Truth,
}

/// Runs a scenario.
pub fn simulate(sc: &Scenario) -> Result<Simulated> {
    let mut rng = emg::stream(sc.seed, "movement");
    let mv = movement::build(sc, &mut rng);
    let act = movement::activations(sc, &mv);

    let sites = emg::site_positions(sc);
    let raw = emg::synthesize(sc, &sites, &act);
    let mut rng = emg::stream(sc.seed, "mirror");
    let lag = mirror::lag(sc, &mv, &mut rng);
    let glove = mirror::glove(sc, &mv, &lag, &mut rng);
    let map = mirror::truth_map(sc, &lag, sc.emg.rate_hz, TRUTH_MAP_RATE_HZ);
    if map.windows(2).any(|w| w[1] <= w[0]) {
        return Err(crate::Error::Analysis(
            "the scenario's lag makes the mirroring map non-monotone; reduce lag.wobble_s or lag.block_jitter_s".into(),
        ));
    }
    let truth = build_truth(sc, &sites, &mv, map);
    Ok(Simulated {
        sites,
        emg: raw,
        glove,
        movement: mv,
        truth,
    })
}

fn build_truth(
    sc: &Scenario,
    sites: &[emg::SitePos],
    mv: &movement::Movement,
    map: Vec<f64>,
) -> Truth {
    let w = emg::pickup(sc, sites);
    let faulty = sc.fault.as_ref().map(|f| f.site.clone());
    let mut informative = Vec::new();
    let mut best_any = vec![0.0f64; sites.len()];
    let mut is_inf = vec![false; sites.len()];
    for d in &sc.dof {
        for dir in [Direction::Positive, Direction::Negative] {
            let scores: Vec<f64> = (0..sites.len())
                .map(|k| {
                    sc.muscle
                        .iter()
                        .enumerate()
                        .map(|(m, mu)| {
                            let g: f64 = mu
                                .drives
                                .iter()
                                .filter(|dr| dr.dof == d.id && dr.direction == dir)
                                .map(|dr| dr.gain)
                                .sum();
                            w[k][m] * g
                        })
                        .sum()
                })
                .collect();
            let top = scores
                .iter()
                .enumerate()
                .filter(|(k, _)| Some(&sites[*k].id) != faulty.as_ref())
                .map(|(_, s)| *s)
                .fold(0.0, f64::max);
            let mut chosen: Vec<(usize, f64)> = scores
                .iter()
                .enumerate()
                .filter(|(k, s)| {
                    Some(&sites[*k].id) != faulty.as_ref()
                        && **s >= INFORMATIVE_SHARE * top
                        && **s >= INFORMATIVE_MIN
                })
                .map(|(k, s)| (k, *s))
                .collect();
            chosen.sort_by(|a, b| b.1.total_cmp(&a.1));
            for (k, s) in scores.iter().enumerate() {
                best_any[k] = best_any[k].max(*s);
            }
            for (k, _) in &chosen {
                is_inf[*k] = true;
            }
            informative.push(DirectionTruth {
                dof: d.id.clone(),
                direction: dir.as_str().into(),
                word: match dir {
                    Direction::Positive => d.positive.clone(),
                    Direction::Negative => d.negative.clone(),
                },
                sites: chosen.iter().map(|(k, _)| sites[*k].id.clone()).collect(),
                scores: sites
                    .iter()
                    .zip(&scores)
                    .map(|(s, v)| (s.id.clone(), round6(*v)))
                    .collect(),
            });
        }
    }
    let site_truth = sites
        .iter()
        .enumerate()
        .map(|(k, s)| {
            let fault = sc
                .fault
                .as_ref()
                .filter(|f| f.site == s.id)
                .map(|f| f.kind.as_str().to_string());
            let role = if fault.is_some() {
                Role::Faulty
            } else if is_inf[k] {
                Role::Informative
            } else if best_any[k] < IRRELEVANT_MAX {
                Role::Irrelevant
            } else {
                Role::Weak
            };
            SiteTruth {
                site: s.id.clone(),
                angle_deg: s.angle_deg,
                distance_cm: s.distance_cm,
                role,
                fault,
                pickup: sc
                    .muscle
                    .iter()
                    .zip(&w[k])
                    .map(|(m, v)| (m.id.clone(), round6(*v)))
                    .collect(),
            }
        })
        .collect();
    Truth {
        format: 1,
        scenario: sc.name.clone(),
        seed: sc.seed,
        emd_s: sc.emg.emd_s,
        offset_s: sc.intact.offset_s,
        sites: site_truth,
        informative,
        blocks: mv
            .blocks
            .iter()
            .map(|b| BlockTruth {
                start_s: round6(b.start_s),
                end_s: round6(b.end_s),
                task: b.spec.task_label(),
                dofs: b.spec.dofs.clone(),
                mirrored: !b.spec.unmirrored,
            })
            .collect(),
        map: MapTruth {
            rate_hz: TRUTH_MAP_RATE_HZ,
            t0_s: 0.0,
            intact_time_s: map.into_iter().map(round6).collect(),
        },
    }
}

/// Rounds to 1e-6 (keeps output files short and stable).
pub fn round6(x: f64) -> f64 {
    (x * 1e6).round() / 1e6
}
