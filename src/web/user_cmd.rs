//! `seepd user add|remove|list`: the people who may sign in to the web pages, kept in the
//! database's `web_users` table with argon2 password hashes and a role (viewer or
//! responder). The password is read from standard input (one line), never from the command
//! line, and never printed.
//!
//! Owns those commands' arguments (`Action`) and wording.

use std::path::Path;

use anyhow::{bail, Context as _};
use chrono::Utc;

use crate::command::{emit, Operator, Run};
use crate::store::pages::Role;

/// The `seepd user` subcommands.
#[derive(clap::Subcommand, Debug)]
pub enum Action {
    /// Add a user, or change their password (read from standard input, one line).
    Add {
        name: String,
        /// `viewer` reads the pages; `responder` also acknowledges, silences and records
        /// manual readings.
        #[arg(long, default_value = "viewer")]
        role: String,
        #[command(flatten)]
        on: Operator,
    },
    /// Remove a user.
    Remove {
        name: String,
        #[command(flatten)]
        on: Operator,
    },
    /// List the users.
    List {
        #[command(flatten)]
        on: Operator,
    },
}

impl Run for Action {
    fn run(self, _now: chrono::DateTime<Utc>) -> anyhow::Result<()> {
        let (Action::Add { on, .. } | Action::Remove { on, .. } | Action::List { on }) = &self;
        let (db, _) = on.open()?;
        emit(&match &self {
            Action::Add { name, role, .. } => add(&db, name, role, &mut stdin()),
            Action::Remove { name, .. } => remove(&db, name),
            Action::List { .. } => list(&db),
        }?)
    }
}

/// `seepd user add NAME`: read the password from `input`, store its hash.
///
/// # Errors
/// An empty or short password, a bad name, database errors.
pub fn add(
    db: &Path,
    name: &str,
    role: &str,
    input: &mut dyn std::io::BufRead,
) -> anyhow::Result<String> {
    let Some(role) = Role::from_name(role) else {
        bail!("role {role:?}: expected viewer (reads the pages) or responder (also acknowledges, silences and records manual readings)");
    };
    let name = name.trim();
    if name.is_empty() || name.len() > 100 || name.chars().any(char::is_control) {
        bail!("user name {name:?}: expected 1 to 100 printable characters");
    }
    let mut line = String::new();
    input
        .read_line(&mut line)
        .context("reading the password from standard input")?;
    let password = line.trim_end_matches(['\r', '\n']);
    if password.chars().count() < 10 {
        bail!("the password must be at least 10 characters (read from standard input, one line)");
    }
    let hash = super::auth::hash_password(password)?;
    let store = crate::store::Store::open(db)?;
    let existed = store.put_user(name, &hash, role, Utc::now().timestamp_millis())?;
    let role = role.name();
    Ok(if existed {
        format!("User {name}: password changed; role {role}.\n")
    } else {
        format!("User {name} added with role {role}; they can sign in to the web pages.\n")
    })
}

/// `seepd user remove NAME` (their open sessions end at the next restart or after 12 h).
///
/// # Errors
/// Unknown user, database errors.
pub fn remove(db: &Path, name: &str) -> anyhow::Result<String> {
    let store = crate::store::Store::open(db)?;
    if !store.remove_user(name)? {
        bail!("there is no user {name:?}");
    }
    Ok(format!("User {name} removed.\n"))
}

/// `seepd user list`
///
/// # Errors
/// Database errors.
pub fn list(db: &Path) -> anyhow::Result<String> {
    let store = crate::store::Store::open(db)?;
    let users = store.users()?;
    if users.is_empty() {
        return Ok("No users (add one with `seepd user add NAME`).\n".into());
    }
    Ok(users
        .iter()
        .map(|(u, role)| format!("{u}\t{role}\n"))
        .collect())
}

/// Read a password line from standard input.
pub fn stdin() -> std::io::StdinLock<'static> {
    std::io::stdin().lock()
}
