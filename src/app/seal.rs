//! `sworn seal` and `sworn amend`: the two commands that write a plan version to the ledger.

use super::{locked, shown, Outcome};
use crate::error::{Error, Result};
use crate::escape::terminal;
use crate::ledger::{ledger_path, Entry, Event, Ledger, PlanPrint};
use crate::plan;
use std::path::Path;

/// `sworn seal PLAN`.
pub fn seal(path: &Path) -> Result<Outcome> {
    let plan = plan::load(path)?;
    let lpath = ledger_path(&plan.path);
    let mut ledger = locked(&lpath, true)?;
    if ledger.ledger().entries().any(|e| e.event == Event::Sealed) {
        return Err(Error::Ledger {
            path: lpath,
            message:
                "the plan is already sealed; record changes with `sworn amend PLAN --reason TEXT`"
                    .into(),
        });
    }
    let print = PlanPrint::of(&plan.path, &plan.text)?;
    let mut entry = Entry::new(Event::Sealed);
    entry.plan = Some(print.clone());
    ledger.append(entry)?;
    println!("sealed {}", shown(path));
    println!(
        "content fingerprint (deposit this with the registry): sha256:{}",
        print.content_sha256
    );
    println!("ledger: {}", shown(&lpath));
    Ok(Outcome::Success)
}

/// `sworn amend PLAN --reason TEXT`.
pub fn amend(path: &Path, reason: &str) -> Result<Outcome> {
    let plan = plan::load(path)?;
    let lpath = ledger_path(&plan.path);
    if reason.trim().is_empty() {
        return Err(Error::Ledger {
            path: lpath,
            message: "an amendment needs a reason: --reason \"what changed and why\"".into(),
        });
    }
    let Some(mut ledger) = Ledger::lock(&lpath, false)? else {
        return Err(Error::Ledger {
            path: lpath,
            message: "there is no ledger: seal the plan first with `sworn seal PLAN`".into(),
        });
    };
    if let Some(p) = ledger.ledger().problems().first() {
        return Err(Error::Ledger {
            path: lpath,
            message: format!("the ledger does not verify ({p}); it cannot be amended"),
        });
    }
    let print = PlanPrint::of(&plan.path, &plan.text)?;
    let last = last_version(ledger.ledger(), &lpath, &print)?;
    let keys = plan::canonical::changed_keys(&last.canonical, &print.canonical);
    let mut entry = Entry::new(Event::Amended);
    entry.plan = Some(print.clone());
    entry.reason = Some(reason.to_string());
    ledger.append(entry)?;
    println!(
        "amended {}: changed keys {}",
        shown(path),
        terminal(&keys.join(", "))
    );
    println!("new content fingerprint: sha256:{}", print.content_sha256);
    if let Some(m) = ledger.ledger().current_moment() {
        println!(
            "this amendment is made {}: it is not part of the registered plan; runs disclose it and also report the registered version's results beside it",
            m.phrase()
        );
    }
    Ok(Outcome::Success)
}

/// The plan version an amendment follows (the last seal or amendment in `ledger`), refused
/// when the ledger holds no seal or its last version already has `print`'s content.
fn last_version(ledger: &Ledger, lpath: &Path, print: &PlanPrint) -> Result<PlanPrint> {
    let refuse = |message: String| Error::Ledger {
        path: lpath.to_path_buf(),
        message,
    };
    let last = ledger
        .entries()
        .filter(|e| e.plan.is_some() && matches!(e.event, Event::Sealed | Event::Amended))
        .last()
        .and_then(|e| e.plan.clone());
    let Some(last) = last else {
        return Err(refuse(
            "the ledger holds no seal: seal the plan first with `sworn seal PLAN`".into(),
        ));
    };
    if last.content_sha256 == print.content_sha256 {
        return Err(refuse(
            "the plan's content is unchanged since its last ledger entry; nothing to amend".into(),
        ));
    }
    Ok(last)
}
