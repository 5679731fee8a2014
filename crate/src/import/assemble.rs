//! Putting read files together into a [`Recording`]: activity on a layout. Lives with the
//! importers so that the recording model does not depend on them.

use super::{ImportError, ImportProblem, Layout, RoiTraceTable, SpikeList};
use crate::place::{Notice, Place};
use crate::recording::{Activity, Metadata, Recording, Site, SourceFile};
use std::collections::{HashMap, HashSet};

impl Recording {
    /// Puts a spike list on a layout.
    ///
    /// Every site with spikes must have a position: otherwise the error lists the unplaced
    /// sites. Sites with a position but no spikes are kept as silent sites and reported.
    /// The spike list's trains move into the recording (a large list is not held twice).
    pub fn from_spike_list(
        layout: &Layout,
        mut spikes: SpikeList,
    ) -> Result<Recording, ImportError> {
        let index = site_index(layout);
        let unplaced: Vec<&str> = spikes
            .sites
            .iter()
            .filter(|s| !index.contains_key(s.site.as_str()))
            .map(|s| s.site.as_str())
            .collect();
        if !unplaced.is_empty() {
            return Err(unplaced_error(
                &spikes.file,
                &layout.file,
                "spikes",
                &unplaced,
            ));
        }
        let mut trains_s = vec![Vec::new(); layout.sites.len()];
        for s in &mut spikes.sites {
            let mut train = std::mem::take(&mut s.times_s);
            train.shrink_to_fit();
            trains_s[index[s.site.as_str()]] = train;
        }
        let mut notices: Vec<Notice> = layout.notices.clone();
        notices.extend(spikes.notices.iter().cloned());
        let silent: Vec<&str> = layout
            .sites
            .iter()
            .zip(&trains_s)
            .filter(|(_, t)| t.is_empty())
            .map(|(s, _)| s.id.as_str())
            .collect();
        if !silent.is_empty() {
            notices.push(Notice::new(
                Place::file(&spikes.file),
                format!(
                    "{} sites of the layout have no spikes and are kept as silent: {}",
                    silent.len(),
                    silent.join(", ")
                ),
            ));
        }
        Ok(Recording {
            sites: layout.sites.clone(),
            activity: Activity::Spikes { trains_s },
            metadata: Metadata {
                sources: vec![
                    SourceFile {
                        name: spikes.file.clone(),
                        kind: "spike_list".into(),
                    },
                    SourceFile {
                        name: layout.file.clone(),
                        kind: "layout".into(),
                    },
                ],
                sample_interval_s: None,
                time_quantum_s: spikes.time_quantum_s,
                latest_event: spikes.latest_place.clone(),
            },
            notices,
            stimuli: spikes.stimuli.clone(),
        })
    }

    /// Puts ROI traces on a layout. Every ROI column must have a position; layout sites with
    /// no trace are left out of the recording and reported.
    pub fn from_roi_traces(
        layout: &Layout,
        traces: &RoiTraceTable,
    ) -> Result<Recording, ImportError> {
        let index = site_index(layout);
        let unplaced: Vec<&str> = traces
            .rois
            .iter()
            .filter(|r| !index.contains_key(r.roi.as_str()))
            .map(|r| r.roi.as_str())
            .collect();
        if !unplaced.is_empty() {
            return Err(unplaced_error(
                &traces.file,
                &layout.file,
                "a trace",
                &unplaced,
            ));
        }
        let sites: Vec<Site> = traces
            .rois
            .iter()
            .map(|r| layout.sites[index[r.roi.as_str()]].clone())
            .collect();
        let with_trace: HashSet<&str> = traces.rois.iter().map(|r| r.roi.as_str()).collect();
        let mut notices: Vec<Notice> = layout.notices.clone();
        notices.extend(traces.notices.iter().cloned());
        let without: Vec<&str> = layout
            .sites
            .iter()
            .filter(|s| !with_trace.contains(s.id.as_str()))
            .map(|s| s.id.as_str())
            .collect();
        if !without.is_empty() {
            notices.push(Notice::new(
                Place::file(&layout.file),
                format!(
                    "{} layout sites have no trace column and are not part of the recording: {}",
                    without.len(),
                    without.join(", ")
                ),
            ));
        }
        Ok(Recording {
            sites,
            activity: Activity::Traces {
                time_s: traces.time_s.clone(),
                frame_interval_s: traces.frame_interval_s,
                values: traces.rois.iter().map(|r| r.values.clone()).collect(),
            },
            metadata: Metadata {
                sources: vec![
                    SourceFile {
                        name: traces.file.clone(),
                        kind: "roi_traces".into(),
                    },
                    SourceFile {
                        name: layout.file.clone(),
                        kind: "layout".into(),
                    },
                ],
                sample_interval_s: Some(traces.frame_interval_s),
                time_quantum_s: None,
                latest_event: None,
            },
            notices,
            stimuli: None,
        })
    }
}

fn site_index(layout: &Layout) -> HashMap<&str, usize> {
    layout
        .sites
        .iter()
        .enumerate()
        .map(|(i, s)| (s.id.as_str(), i))
        .collect()
}

fn unplaced_error(
    activity_file: &str,
    layout_file: &str,
    what: &str,
    unplaced: &[&str],
) -> ImportError {
    const SHOWN: usize = 20;
    let mut list = unplaced
        .iter()
        .take(SHOWN)
        .copied()
        .collect::<Vec<_>>()
        .join(", ");
    if unplaced.len() > SHOWN {
        list.push_str(&format!(" and {} more", unplaced.len() - SHOWN));
    }
    let mut place = Place::file(activity_file);
    if let [one] = unplaced {
        place = place.at_site(one);
    }
    ImportError::new(
        place,
        ImportProblem::UnplacedSites,
        format!(
            "{} sites have {} but no position in the layout {}: {}",
            unplaced.len(),
            what,
            layout_file,
            list
        ),
    )
}
