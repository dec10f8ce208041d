//! What the sheet says, in order, independent of HTML or PDF: both
//! renderers walk the same blocks, so they carry the same words.

use super::figures::{self, effect_of, Figure};
use super::model::{DofResult, SitesReport};
use super::words::{
    advice, ensure_sentence, flag_kind, fmt_num, fmt_r2, frequency, position, REVIEW_NOTICE,
};
use crate::error::Result;

/// One block of the sheet.
pub(crate) enum Block {
    /// Sheet title and the review badge.
    Title { title: String, badge: String },
    /// Key facts of the record as label–value pairs.
    Fields(Vec<(String, String)>),
    /// A framed statement.
    Notice(String),
    /// A section heading.
    Heading(String),
    /// Body text.
    Para(String),
    /// Small explanatory text.
    Note(String),
    /// A bullet with a bold lead-in.
    Bullet {
        lead: String,
        rest: String,
        action: Option<String>,
    },
    /// A table; column titles with relative widths.
    Table {
        cols: Vec<(String, f64)>,
        rows: Vec<Vec<String>>,
        bold_first: bool,
    },
    /// A figure at full width (`max_w` points at most in the PDF) with a
    /// caption under it.
    Figure(Box<Figure>, f64, String),
    /// Two figures side by side.
    FigurePair(Box<Figure>, Option<Box<Figure>>),
    /// The clinician review and sign-off box, one check line per planned site.
    SignOff { sites: Vec<(String, String)> },
}

fn confidence_cell(report: &SitesReport, site: &str, dofs: &[String]) -> String {
    let mut parts = Vec::new();
    for d in dofs {
        let Some(dof) = report.dofs.iter().find(|x| &x.dof == d) else {
            continue;
        };
        if let Some(s) = dof.sites.iter().find(|s| s.site == site) {
            parts.push(format!(
                "{}: {}, {}",
                d,
                s.confidence,
                frequency(dof, s.frequency)
            ));
        }
    }
    if parts.is_empty() {
        "not assessed".into()
    } else {
        parts.join("; ")
    }
}

fn list_or(items: &[String], none: &str) -> String {
    if items.is_empty() {
        none.to_string()
    } else {
        items.join(", ")
    }
}

fn baselines_sentence(dof: &DofResult) -> String {
    let mut parts = vec![format!("model {}", fmt_r2(dof.cv.r2))];
    for b in &dof.baselines {
        parts.push(format!(
            "{} {}",
            figures::baseline_name(&b.name),
            fmt_r2(b.cv.r2)
        ));
    }
    format!(
        "Cross-validated R² (on held-out blocks; 1 = perfect, 0 = no better than the mean): {}.",
        parts.join("; ")
    )
}

fn dof_blocks(report: &SitesReport, dof: &DofResult, figs: &[Figure], out: &mut Vec<Block>) {
    let fig = |name: &str| figs.iter().find(|f| f.name == name).cloned().map(Box::new);
    out.push(Block::Heading(format!(
        "{} (positive angle = {})",
        dof.dof, dof.positive
    )));
    out.push(Block::Para(format!(
        "Sites in the model: {}. {}",
        list_or(&dof.selected, "none"),
        baselines_sentence(dof)
    )));
    let planned_here = |site: &str| {
        report
            .plan
            .sites
            .iter()
            .any(|p| p.site == site && p.dofs.iter().any(|d| d == &dof.dof))
    };
    let mut shown: Vec<&super::model::SiteResult> = dof
        .sites
        .iter()
        .filter(|s| s.selected || s.frequency >= 0.1 || planned_here(&s.site))
        .collect();
    shown.sort_by(|a, b| {
        b.selected
            .cmp(&a.selected)
            .then(b.frequency.total_cmp(&a.frequency))
    });
    let rows: Vec<Vec<String>> = shown
        .iter()
        .map(|s| {
            let alts: Vec<String> = s
                .alternates
                .iter()
                .map(|a| {
                    format!(
                        "{} (r = {}, R² {} if swapped in)",
                        a.site,
                        fmt_num(a.correlation, 2),
                        fmt_r2(a.cv.r2)
                    )
                })
                .collect();
            vec![
                s.site.clone(),
                position(report, &s.site),
                if s.selected { "yes" } else { "no" }.into(),
                if planned_here(&s.site) { "yes" } else { "no" }.into(),
                frequency(dof, s.frequency),
                s.confidence.clone(),
                list_or(&alts, "none"),
            ]
        })
        .collect();
    if !rows.is_empty() {
        out.push(Block::Table {
            cols: vec![
                ("Site".into(), 0.6),
                ("Where (cm from the lateral epicondyle)".into(), 1.8),
                ("Model".into(), 0.65),
                ("Plan".into(), 0.55),
                ("Stability".into(), 1.5),
                ("Confidence".into(), 1.15),
                (
                    "Alternates (envelope correlation; R² if swapped in)".into(),
                    2.8,
                ),
            ],
            rows,
            bold_first: true,
        });
    }
    let rest: Vec<String> = dof
        .sites
        .iter()
        .filter(|s| !shown.iter().any(|x| x.site == s.site))
        .map(|s| s.site.clone())
        .collect();
    if !rest.is_empty() {
        out.push(Block::Note(format!(
            "Other sites, chosen in fewer than 10% of resamples: {}.",
            rest.join(", ")
        )));
    }
    if let Some(st) = fig(&figures::dof_figure_name("stages", &dof.dof, None)) {
        let caption = st.caption.clone();
        out.push(Block::FigurePair(st, None));
        out.push(Block::Note(caption));
    }
    for p in &report.plan.sites {
        if !p.dofs.iter().any(|d| d == &dof.dof) || effect_of(dof, &p.site).is_none() {
            continue;
        }
        let surf = fig(&figures::dof_figure_name("effect", &dof.dof, Some(&p.site)));
        let slices = fig(&figures::dof_figure_name("slices", &dof.dof, Some(&p.site)));
        if let Some(surf) = surf {
            let caption = surf.caption.clone();
            out.push(Block::FigurePair(surf, slices));
            out.push(Block::Note(format!(
                "Planned site {}. {}. Right: the same effect at 25%, 50% and 75% of the range.",
                p.site, caption
            )));
        }
    }
}

/// The sheet's blocks, in order.
pub(crate) fn sheet_blocks(report: &SitesReport) -> Result<Vec<Block>> {
    let figs = figures::figures(report)?;
    let mut out = Vec::new();
    let planned: Vec<String> = report.plan.sites.iter().map(|p| p.site.clone()).collect();
    out.push(Block::Title {
        title: "Electrode site plan".into(),
        badge: "Decision aid — clinician review required".into(),
    });
    out.push(Block::Fields(vec![
        ("Subject code".into(), report.subject.clone()),
        ("Recorded".into(), report.recorded.clone()),
        (
            "Residual limb".into(),
            format!("{} forearm", report.residual_side),
        ),
        ("Protocol".into(), report.protocol.clone()),
        (
            "Channel budget".into(),
            format!("{} channels", report.plan.budget),
        ),
        ("Planned sites".into(), list_or(&planned, "none")),
        ("Produced by".into(), report.tool.clone()),
        ("Resampling seed".into(), report.seed.to_string()),
    ]));

    out.push(Block::Heading("Planned sites".into()));
    if report.plan.sites.is_empty() {
        out.push(Block::Para(
            "No site was planned: no DoF's model selected a site. Do not fit from this session."
                .into(),
        ));
    } else {
        out.push(Block::Para(format!(
            "The plan uses {} of {} channels. \"If left out\" is how much the cross-validated R², \
             summed over the DoFs, falls when that site is dropped: the larger, the more the \
             site matters.",
            report.plan.sites.len(),
            report.plan.budget
        )));
        let rows = report
            .plan
            .sites
            .iter()
            .map(|p| {
                vec![
                    p.site.clone(),
                    position(report, &p.site),
                    p.dofs.join(", "),
                    confidence_cell(report, &p.site, &p.dofs),
                    format!("R² falls by {}", fmt_num(p.marginal_value, 2)),
                    list_or(&p.alternates, "none listed"),
                ]
            })
            .collect();
        out.push(Block::Table {
            cols: vec![
                ("Site".into(), 0.6),
                ("Where (cm from the lateral epicondyle)".into(), 1.9),
                ("Serves".into(), 1.0),
                ("Confidence".into(), 2.4),
                ("If left out".into(), 1.2),
                ("Alternates".into(), 1.0),
            ],
            rows,
            bold_first: true,
        });
    }

    out.push(Block::Heading("Site map".into()));
    if let Some(map) = figs.iter().find(|f| f.name == "site-map.svg") {
        out.push(Block::Figure(
            Box::new(map.clone()),
            10_000.0,
            "The forearm drawn unrolled: both side edges are the dorsal midline, angles grow \
             toward the radial side, and the elbow is at the top. Distances are measured \
             distally from the lateral epicondyle."
                .into(),
        ));
    }

    out.push(Block::Heading("How well the plan serves each DoF".into()));
    let rows = report
        .plan
        .dofs
        .iter()
        .map(|d| {
            vec![
                d.dof.clone(),
                fmt_r2(d.r2),
                fmt_r2(d.best_r2),
                if d.loss > 0.005 {
                    format!("loses {}", fmt_num(d.loss, 2))
                } else {
                    "none".into()
                },
            ]
        })
        .collect();
    out.push(Block::Table {
        cols: vec![
            ("DoF".into(), 1.0),
            ("CV R² with the planned sites".into(), 1.6),
            ("CV R² of its own best model".into(), 1.6),
            ("Loss from the budget".into(), 1.4),
        ],
        rows,
        bold_first: true,
    });
    for d in report.plan.dofs.iter().filter(|d| d.loss > 0.02) {
        out.push(Block::Para(format!(
            "{}: with only {} channels the plan gives R² {} instead of {}; if this movement \
             matters most to the wearer, give it the channel of the site with the smallest \
             \"if left out\" value.",
            d.dof,
            report.plan.budget,
            fmt_r2(d.r2),
            fmt_r2(d.best_r2)
        )));
    }

    out.push(Block::Heading(
        "Flags — look at these before fitting".into(),
    ));
    if report.flags.is_empty() {
        out.push(Block::Para(
            "No flags were raised. Still check every placement on the wearer.".into(),
        ));
    }
    for f in &report.flags {
        out.push(Block::Bullet {
            lead: format!("{} — {}:", flag_kind(&f.what), f.at),
            rest: ensure_sentence(&f.why),
            action: Some(advice(f).to_string()),
        });
    }

    for dof in &report.dofs {
        dof_blocks(report, dof, &figs, &mut out);
    }

    out.push(Block::Heading("Alignment per task block".into()));
    out.push(Block::Para(
        "How well the intact-hand recording could be matched in time to the attempted \
         movement. Lag is the median of intact-hand time minus EMG time; a wide spread or a \
         doubtful block means the two sides were not moving in step."
            .into(),
    ));
    let rows = report
        .alignment
        .iter()
        .map(|b| {
            vec![
                b.task.clone(),
                if b.dof == "*" {
                    "all".into()
                } else {
                    b.dof.clone()
                },
                format!("{}–{}", fmt_num(b.start_s, 1), fmt_num(b.end_s, 1)),
                fmt_num(1000.0 * b.lag_s, 0),
                fmt_num(1000.0 * b.lag_spread_s, 0),
                b.quality.clone(),
                list_or(&b.reasons, ""),
            ]
        })
        .collect();
    out.push(Block::Table {
        cols: vec![
            ("Task".into(), 1.3),
            ("DoF".into(), 0.8),
            ("EMG time, s".into(), 1.0),
            ("Lag, ms".into(), 0.7),
            ("Spread, ms".into(), 0.8),
            ("Quality".into(), 0.8),
            ("Notes".into(), 2.6),
        ],
        rows,
        bold_first: false,
    });

    out.push(Block::Heading("Cautions".into()));
    out.push(Block::Notice(REVIEW_NOTICE.into()));
    for (lead, rest) in super::words::CAUTIONS {
        out.push(Block::Bullet {
            lead: lead.into(),
            rest: rest.into(),
            action: None,
        });
    }

    out.push(Block::Heading("Clinician review and sign-off".into()));
    out.push(Block::SignOff {
        sites: report
            .plan
            .sites
            .iter()
            .map(|p| (p.site.clone(), position(report, &p.site)))
            .collect(),
    });
    Ok(out)
}
