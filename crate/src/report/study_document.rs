//! A study's comparison of conditions as a [`Document`]: the job and caution, the study
//! tables it read (with their SHA-256), every setting, the recordings, the comparisons, the
//! estimation plots and level curves, and what was left out. `ringline compare --report` and
//! the page's "Save the study report" both come from here, so they are the same bytes.

use super::analysis_document::{settings_table, InputFile};
use super::document::{Block, Document, Section, Table, CAUTION, JOB};
use crate::study::compare::{CompareReport, StudyTexts};

/// Columns of recordings.csv every study report shows, after the manifest's own columns and
/// the outcome (the compared metrics follow).
const RECORDING_COLUMNS: [&str; 5] = [
    "burst_count",
    "front_count",
    "median_speed_mm_s",
    "median_speed_ci95_low_mm_s",
    "median_speed_ci95_high_mm_s",
];

/// A CSV text as a table of its rows (all columns, or those named in `keep` in their order).
fn csv_table(text: &str, caption: String, keep: Option<&[String]>, collapsed: bool) -> Table {
    let mut reader = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .flexible(true)
        .from_reader(text.as_bytes());
    let header: Vec<String> = reader
        .headers()
        .map(|h| h.iter().map(str::to_string).collect())
        .unwrap_or_default();
    let columns: Vec<usize> = match keep {
        Some(names) => names
            .iter()
            .filter_map(|n| header.iter().position(|h| h == n))
            .collect(),
        None => (0..header.len()).collect(),
    };
    let rows = reader
        .records()
        .filter_map(Result::ok)
        .map(|r| {
            columns
                .iter()
                .map(|&c| r.get(c).unwrap_or("").to_string())
                .collect()
        })
        .collect();
    Table {
        caption,
        header: columns.iter().map(|&c| header[c].clone()).collect(),
        rows,
        collapsed,
    }
}

/// The comparison report as a document; `figures` are the SVG files of
/// [`super::compare_figures::compare_output_files`] (name, text), in their order.
pub fn study_document(
    report: &CompareReport,
    texts: &StudyTexts<'_>,
    figures: &[(String, String)],
) -> Document {
    let input = |name: &str, text: &str| InputFile {
        role: "study table".into(),
        name: name.into(),
        size_bytes: text.len() as u64,
        sha256: Some(super::workbook::sha256_hex(text.as_bytes())),
    };
    let inputs: Vec<InputFile> = [
        Some(input("recordings.csv", texts.recordings)),
        texts.fronts.map(|t| input("fronts.csv", t)),
        texts.bursts.map(|t| input("bursts.csv", t)),
    ]
    .into_iter()
    .flatten()
    .collect();
    // The manifest's columns and the outcome, the headline numbers, then the compared metrics.
    let header: Vec<String> = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .from_reader(texts.recordings.as_bytes())
        .headers()
        .map(|h| h.iter().map(|c| c.trim().to_string()).collect())
        .unwrap_or_default();
    let outcome = header.iter().position(|h| h == "outcome").unwrap_or(0);
    let mut keep: Vec<String> = header[..=outcome.min(header.len().saturating_sub(1))].to_vec();
    for name in RECORDING_COLUMNS
        .iter()
        .map(|s| s.to_string())
        .chain(report.units.iter().map(|m| m.metric.clone()))
    {
        if header.contains(&name) && !keep.contains(&name) {
            keep.push(name);
        }
    }
    let recordings = csv_table(
        texts.recordings,
        "Recordings (more columns in recordings.csv)".into(),
        Some(&keep),
        false,
    );
    let comparisons = csv_table(
        &report.comparisons_csv(),
        "Comparisons (as comparisons.csv)".into(),
        None,
        false,
    );
    let settings = serde_json::to_value(&report.settings).unwrap_or(serde_json::Value::Null);
    let mut sections = vec![
        Section {
            heading: String::new(),
            blocks: vec![
                Block::Paragraph { text: JOB.into() },
                Block::Paragraph {
                    text: CAUTION.into(),
                },
            ],
        },
        Section {
            heading: "Inputs".into(),
            blocks: vec![
                Block::Table(super::analysis_document::inputs_table(&inputs)),
                Block::Paragraph {
                    text: format!("Compared by ringline {}.", env!("CARGO_PKG_VERSION")),
                },
            ],
        },
        Section {
            heading: "Settings".into(),
            blocks: vec![Block::Table(settings_table(&settings))],
        },
        Section {
            heading: "Comparisons".into(),
            blocks: report
                .to_text()
                .lines()
                .filter(|l| !l.trim().is_empty())
                .take(3)
                .map(|l| Block::Paragraph {
                    text: l.trim().to_string(),
                })
                .chain([Block::Table(comparisons)])
                .collect(),
        },
        Section {
            heading: "Figures".into(),
            blocks: figures
                .iter()
                .filter(|(name, _)| name.ends_with(".svg"))
                .map(|(name, svg)| Block::Figure {
                    name: name.trim_end_matches(".svg").to_string(),
                    caption: if name.starts_with("levels-") {
                        format!("{}: median and quartiles over units at each ordered level", &name[7..name.len() - 4])
                    } else {
                        format!("{}: every unit's value per condition, and each condition's difference from the reference with its 95% interval", name.trim_start_matches("estimation-").trim_end_matches(".svg"))
                    },
                    svg: svg.clone(),
                })
                .collect(),
        },
        Section {
            heading: "Recordings".into(),
            blocks: vec![Block::Table(recordings)],
        },
    ];
    sections.push(Section {
        heading: "Left out".into(),
        blocks: vec![if report.left_out.is_empty() {
            Block::Paragraph {
                text: "None: every recording of the study was compared.".into(),
            }
        } else {
            Block::Notices {
                items: report.left_out.clone(),
            }
        }],
    });
    Document {
        title: format!(
            "ringline study report: {} compared by {}",
            report.conditions.join(", "),
            report.settings.by
        ),
        sections,
    }
}
