//! The solver thread of `seepd run`: takes the live re-solve requests of the engine's
//! `LiveModels`, solves each section's seepage model (`derive::flownet`) and sends the answer
//! back (with the section's calibration applied when the request carries one); requests that queued up while it solved are coalesced to the newest per section. It
//! ends when the engine drops its end of the channel.
//!
//! Owns the thread. Must not touch the database (the answers become rows in the writer's next
//! commit).

use std::collections::BTreeMap;
use std::sync::mpsc::{channel, Receiver, Sender};

use crate::derive::flownet::solve_calibrated;
use crate::derive::model_live::{SolveAnswer, SolveRequest, SolveSummary};

/// Start the solver thread; the engine keeps the returned ends.
///
/// # Errors
/// The thread could not be started.
pub fn spawn() -> std::io::Result<(Sender<SolveRequest>, Receiver<SolveAnswer>)> {
    let (req_tx, req_rx) = channel::<SolveRequest>();
    let (ans_tx, ans_rx) = channel::<SolveAnswer>();
    std::thread::Builder::new()
        .name("seepage".into())
        .spawn(move || run(&req_rx, &ans_tx))?;
    Ok((req_tx, ans_rx))
}

fn run(requests: &Receiver<SolveRequest>, answers: &Sender<SolveAnswer>) {
    while let Ok(first) = requests.recv() {
        let mut newest: BTreeMap<String, SolveRequest> = BTreeMap::new();
        for r in std::iter::once(first).chain(requests.try_iter()) {
            let id = r.cfg.objects.sections[r.section].id.clone();
            newest.insert(id, r);
        }
        for (section_id, r) in newest {
            let started = std::time::Instant::now();
            let s = &r.cfg.objects.sections[r.section];
            // A solve that panics is answered as a failure: the section is never left
            // waiting for an answer that will not come.
            let result =
                std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| match &s.model {
                    Some(spec) => {
                        solve_calibrated(spec, r.fit.as_deref(), r.pool_m, r.tail_m, &r.piezometers)
                            .map(|net| SolveSummary::of(&net))
                    }
                    None => Err("the section has no model".into()),
                }))
                .unwrap_or_else(|_| Err("the solver failed unexpectedly".into()));
            tracing::debug!(
                section = %section_id,
                ms = started.elapsed().as_millis() as u64,
                ok = result.is_ok(),
                "Seepage model solved"
            );
            let answer = SolveAnswer {
                section_id,
                t_ms: r.t_ms,
                result,
            };
            if answers.send(answer).is_err() {
                return;
            }
        }
    }
}
