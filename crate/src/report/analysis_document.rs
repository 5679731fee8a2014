//! The analysis of one recording as a [`Document`]: the job and caution, the inputs with their
//! digests, every setting, the summary, the figures, the notices and every front. The command
//! line's `--report` and the page's "Save report" both come from here, so they are the same
//! bytes.

use super::document::{Block, Document, Section, Table, CAUTION, JOB};
use super::AnalysisReport;
use serde::{Deserialize, Serialize};

/// One input file as a report names it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InputFile {
    /// What the file gave: `activity`, `layout`, `stimuli`, `voltage`, `sidecar`.
    pub role: String,
    pub name: String,
    pub size_bytes: u64,
    /// SHA-256 of the bytes, lower-case hex (FIPS 180-4); `None` when the shell did not
    /// compute it.
    pub sha256: Option<String>,
}

/// The analysis report as a document. `settings` is the settings JSON of the run (every key
/// is listed), `figures` the figure blocks in reading order.
pub fn analysis_document(
    report: &AnalysisReport,
    inputs: &[InputFile],
    settings: &serde_json::Value,
    figures: Vec<Block>,
) -> Document {
    let names: Vec<&str> = report.files.iter().map(|f| f.name.as_str()).collect();
    let mut sections = vec![Section {
        heading: String::new(),
        blocks: vec![
            Block::Paragraph { text: JOB.into() },
            Block::Paragraph {
                text: CAUTION.into(),
            },
        ],
    }];
    sections.push(Section {
        heading: "Inputs".into(),
        blocks: vec![
            Block::Table(inputs_table(inputs)),
            Block::Paragraph {
                text: format!(
                    "Analysed by ringline {} (analysis document schema {}).",
                    env!("CARGO_PKG_VERSION"),
                    super::ANALYSIS_SCHEMA
                ),
            },
        ],
    });
    sections.push(Section {
        heading: "Settings".into(),
        blocks: vec![Block::Table(settings_table(settings))],
    });
    let mut summary = vec![Block::Facts {
        facts: report.facts(),
    }];
    if let Some(rows) = &report.electrodes {
        summary.push(Block::Table(Table {
            caption: "Electrodes (spikes detected from voltage)".into(),
            header: [
                "channel",
                "site",
                "noise (µV)",
                "spikes",
                "rate (Hz)",
                "saturated share",
                "status",
            ]
            .map(String::from)
            .to_vec(),
            rows: rows
                .iter()
                .map(|r| {
                    vec![
                        r.channel.to_string(),
                        r.site.clone(),
                        format!("{:.2}", r.noise_uv),
                        r.spike_count.to_string(),
                        format!("{:.3}", r.rate_hz),
                        format!("{:.4}", r.saturated_fraction),
                        r.status.words(),
                    ]
                })
                .collect(),
            collapsed: rows.len() > 64,
        }));
    }
    sections.push(Section {
        heading: "Summary".into(),
        blocks: summary,
    });
    if let Some(r) = &report.response {
        sections.push(Section {
            heading: "Responses to stimulation".into(),
            blocks: r
                .to_text()
                .lines()
                .map(|line| Block::Paragraph {
                    text: line.trim().to_string(),
                })
                .collect(),
        });
    }
    sections.push(Section {
        heading: "Figures".into(),
        blocks: figures,
    });
    sections.push(Section {
        heading: "Notices".into(),
        blocks: vec![if report.notices.is_empty() {
            Block::Paragraph {
                text: "None.".into(),
            }
        } else {
            Block::Notices {
                items: report.notices.iter().map(|n| n.to_string()).collect(),
            }
        }],
    });
    sections.push(Section {
        heading: "Every burst".into(),
        blocks: vec![Block::Table(fronts_table(report))],
    });
    Document {
        title: format!("ringline report: {}", names.join(" + ")),
        sections,
    }
}

/// The files read, with their sizes and SHA-256.
pub(crate) fn inputs_table(inputs: &[InputFile]) -> Table {
    Table {
        caption: "Files read".into(),
        header: vec![
            "role".into(),
            "file".into(),
            "size (bytes)".into(),
            "SHA-256".into(),
        ],
        rows: inputs
            .iter()
            .map(|f| {
                vec![
                    f.role.clone(),
                    f.name.clone(),
                    f.size_bytes.to_string(),
                    f.sha256.clone().unwrap_or_else(|| "not computed".into()),
                ]
            })
            .collect(),
        collapsed: false,
    }
}

/// Every burst with its front (or why it has none).
fn fronts_table(report: &AnalysisReport) -> Table {
    let header = [
        "burst",
        "start (s)",
        "end (s)",
        "model",
        "speed (mm/s)",
        "95% CI (mm/s)",
        "origin site",
        "sites used",
        "residual RMS (ms)",
        "note",
    ]
    .map(String::from)
    .to_vec();
    let rows = report
        .bursts
        .iter()
        .map(|b| match &b.front {
            Some(f) => vec![
                b.burst.to_string(),
                format!("{:.3}", b.start_s),
                format!("{:.3}", b.end_s),
                f.model.to_string(),
                format!("{:.2}", f.speed_mm_s),
                format!("{:.2} to {:.2}", f.speed_ci95_mm_s[0], f.speed_ci95_mm_s[1]),
                f.origin_site.clone(),
                f.sites_used.to_string(),
                format!("{:.2}", f.residual_rms_ms),
                if f.failed {
                    "stopped before the end of its path".into()
                } else {
                    String::new()
                },
            ],
            None => {
                let mut row = vec![
                    b.burst.to_string(),
                    format!("{:.3}", b.start_s),
                    format!("{:.3}", b.end_s),
                ];
                row.extend(std::iter::repeat_n(String::new(), 6));
                row.push(format!(
                    "no front: {}",
                    b.no_front_reason.as_deref().unwrap_or("")
                ));
                row
            }
        })
        .collect();
    Table {
        caption: format!("Every burst and its front ({} bursts)", report.bursts.len()),
        header,
        rows,
        collapsed: true,
    }
}

/// Every key of a settings JSON document as `a.b.c = value`, in the document's order.
pub(crate) fn settings_table(settings: &serde_json::Value) -> Table {
    fn walk(prefix: &str, value: &serde_json::Value, rows: &mut Vec<Vec<String>>) {
        match value {
            serde_json::Value::Object(map) => {
                for (k, v) in map {
                    let key = if prefix.is_empty() {
                        k.clone()
                    } else {
                        format!("{prefix}.{k}")
                    };
                    walk(&key, v, rows);
                }
            }
            serde_json::Value::String(s) => rows.push(vec![prefix.into(), s.clone()]),
            serde_json::Value::Null => rows.push(vec![prefix.into(), "none".into()]),
            other => rows.push(vec![prefix.into(), other.to_string()]),
        }
    }
    let mut rows = Vec::new();
    walk("", settings, &mut rows);
    Table {
        caption: "Every setting (the keys of a settings file)".into(),
        header: vec!["setting".into(), "value".into()],
        rows,
        collapsed: true,
    }
}
