//! A session's task blocks: from its events.csv, or from its protocol.

use super::{resolve, Pattern, Protocol};
use crate::session::{Block, BlockSource, Session};
use crate::Result;

/// Task labels that mark time without intended movement: `rest`, `pause`
/// (the prompter was paused), and any label ending in `-bad` (a repetition
/// the clinician marked bad while playing).
pub fn is_movement_block(block: &Block, dof: &str) -> bool {
    let t = block.task.trim();
    let still = t.eq_ignore_ascii_case("rest")
        || t.eq_ignore_ascii_case("pause")
        || t.to_ascii_lowercase().ends_with("-bad");
    !still && block.dof.as_deref().is_none_or(|d| d == dof)
}

/// The task blocks of a session and where they came from.
///
/// With an events.csv, its blocks are returned as they are, with `words`
/// filled from the protocol where a block matches one of its tasks (see
/// [`fill_words`]). Without one, the protocol's blocks at the manifest's
/// `protocol_start_s`, clipped to the EMG recording (blocks wholly outside
/// it are dropped). The protocol is found by [`resolve`] relative to the
/// session folder.
pub fn session_blocks(session: &Session) -> Result<(Vec<Block>, BlockSource)> {
    let protocol = resolve(&session.manifest.protocol, &session.root)?;
    match &session.events {
        Some(events) => {
            let mut blocks = events.clone();
            fill_words(&protocol, &mut blocks);
            Ok((blocks, BlockSource::Events))
        }
        None => {
            let (a, b) = session.emg.span();
            let blocks = protocol
                .blocks(session.manifest.protocol_start_s)
                .into_iter()
                .filter_map(|mut bl| {
                    bl.start_s = bl.start_s.max(a);
                    bl.end_s = bl.end_s.min(b);
                    (bl.end_s > bl.start_s).then_some(bl)
                })
                .collect();
            Ok((blocks, BlockSource::Protocol))
        }
    }
}

/// Fills `words` of blocks (in time order) from the protocol's tasks.
///
/// A block whose task label is a task id takes that task. Otherwise its label
/// (less a `-bad` suffix) is read as a pattern name: a block continuing the
/// run of the previous matched block (same label and DoF, with only `pause`
/// or `-bad` blocks between) takes the same task; any other block takes the
/// next task after the previous match with that pattern and DoF. `pause` and
/// unmatched blocks keep their words (usually none).
pub fn fill_words(protocol: &Protocol, blocks: &mut [Block]) {
    let mut order: Vec<usize> = (0..blocks.len()).collect();
    order.sort_by(|&i, &j| blocks[i].start_s.total_cmp(&blocks[j].start_s));
    let mut current: Option<(usize, String, Option<String>)> = None;
    for i in order {
        let b = &mut blocks[i];
        if b.task.eq_ignore_ascii_case("pause") {
            continue;
        }
        if let Some(t) = protocol.task(&b.task) {
            if b.words.is_none() {
                b.words = Some(t.words.clone());
            }
            let idx = protocol
                .tasks
                .iter()
                .position(|x| x.id == t.id)
                .unwrap_or(0);
            current = Some((idx, b.task.clone(), b.dof.clone()));
            continue;
        }
        let base = b.task.strip_suffix("-bad").unwrap_or(&b.task).to_string();
        let Some(pattern) = pattern_of(&base) else {
            continue;
        };
        let matches = |k: usize| {
            let t = &protocol.tasks[k];
            t.pattern == pattern && t.block_dof() == b.dof
        };
        let found = match &current {
            Some((k, label, dof)) if *label == base && *dof == b.dof && matches(*k) => Some(*k),
            Some((k, _, _)) => (k + 1..protocol.tasks.len()).find(|&q| matches(q)),
            None => (0..protocol.tasks.len()).find(|&q| matches(q)),
        };
        if let Some(k) = found {
            if b.words.is_none() {
                b.words = Some(protocol.tasks[k].words.clone());
            }
            current = Some((k, base, b.dof.clone()));
        }
    }
}

fn pattern_of(label: &str) -> Option<Pattern> {
    [
        Pattern::Paced,
        Pattern::HoldRelease,
        Pattern::Free,
        Pattern::Rest,
    ]
    .into_iter()
    .find(|p| p.as_str().eq_ignore_ascii_case(label))
}
