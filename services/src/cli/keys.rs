//! `telltale keys add|list|revoke`: the service's API keys. A key is shown
//! once, when created; the database keeps only its SHA-256.

use crate::UsageError;
use crate::serve::db::{Db, Scope};
use anyhow::Context;
use clap::{Args, Subcommand, ValueEnum};
use std::io::Write;
use std::path::PathBuf;

/// Scope of a key.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum KeyScope {
    /// Read routes only (GET)
    Read,
    /// Read and write routes (scoring, feedback)
    Write,
}

/// Arguments of `telltale keys`.
#[derive(Debug, Args)]
pub struct KeysArgs {
    /// What to do
    #[command(subcommand)]
    pub action: KeysAction,
}

/// The key actions.
#[derive(Debug, Subcommand)]
pub enum KeysAction {
    /// Create a key and print it once on stdout
    Add {
        /// The service's database (as given to `telltale serve --db`)
        #[arg(long)]
        db: PathBuf,
        /// read or write
        #[arg(long, value_enum)]
        scope: KeyScope,
        /// Who the key is for (shown in `keys list` and the feedback audit trail's key id)
        #[arg(long)]
        name: String,
    },
    /// List the keys (id, scope, name, created, revoked), never their secrets
    List {
        /// The service's database
        #[arg(long)]
        db: PathBuf,
    },
    /// Revoke a key by its id; requests with it are refused from then on
    Revoke {
        /// The service's database
        #[arg(long)]
        db: PathBuf,
        /// The key's id (from `keys list`)
        id: String,
    },
}

pub(crate) fn run(args: &KeysArgs) -> anyhow::Result<()> {
    let open =
        |db: &PathBuf| Db::open(db).with_context(|| format!("opening --db {}", db.display()));
    let mut out = std::io::stdout().lock();
    match &args.action {
        KeysAction::Add { db, scope, name } => {
            if name.trim().is_empty() {
                return Err(
                    UsageError("--name must not be empty; say who the key is for".into()).into()
                );
            }
            let scope = match scope {
                KeyScope::Read => Scope::Read,
                KeyScope::Write => Scope::Write,
            };
            let (info, token) = open(db)?.add_key(name, scope)?;
            eprintln!(
                "key {} ({}) created; it is shown only now, store it safely:",
                info.id,
                scope.as_str()
            );
            writeln!(out, "{token}")?;
        }
        KeysAction::List { db } => {
            writeln!(out, "id\tscope\tname\tcreated\trevoked")?;
            for k in open(db)?.list_keys()? {
                writeln!(
                    out,
                    "{}\t{}\t{}\t{}\t{}",
                    k.id,
                    k.scope.as_str(),
                    k.name,
                    k.created,
                    k.revoked.as_deref().unwrap_or("-")
                )?;
            }
        }
        KeysAction::Revoke { db, id } => {
            if !open(db)?.revoke_key(id)? {
                return Err(UsageError(format!(
                    "no active key {id:?} in {}; `telltale keys list --db {}` shows the keys",
                    db.display(),
                    db.display()
                ))
                .into());
            }
            eprintln!("key {id} revoked");
        }
    }
    out.flush()?;
    Ok(())
}
