//! `linegate key`: the owner's release key pair for signed model blobs.

use std::path::PathBuf;

use crate::digest::lower_hex;
use crate::output::OutputSet;
use crate::release::sign;
use anyhow::Result;
use clap::{Args, Subcommand};

/// Flags of `linegate key`.
#[derive(Args)]
pub struct KeyArgs {
    #[command(subcommand)]
    pub action: KeyAction,
}

/// What to do with keys.
#[derive(Subcommand)]
pub enum KeyAction {
    /// Create a key pair: NAME.key (private, mode 0600, never printed) and NAME.pub.
    #[command(
        after_help = "Example:\n  linegate key new -o release\n  linegate pack ... --sign release.key\n  linegate inspect model.lgmb --public-key release.pub\n\nKeep NAME.key off test-station PCs and out of version control; give NAME.pub to the firmware build.\n\nExit codes: 0 key pair written; 2 usage or output error (an existing key is never overwritten without --force)."
    )]
    New {
        /// Name of the pair; writes NAME.key and NAME.pub.
        #[arg(long, short)]
        output: PathBuf,
        /// Overwrite an existing pair.
        #[arg(long)]
        force: bool,
    },
}

impl KeyArgs {
    /// Runs `linegate key`.
    pub fn run(&self, quiet: bool) -> Result<()> {
        match &self.action {
            KeyAction::New { output, force } => {
                let key = sign::generate().map_err(anyhow::Error::msg)?;
                let public = key.verifying_key();
                let mut set = OutputSet::default();
                set.add_private(
                    "private key (NAME.key)",
                    output.with_extension("key"),
                    sign::secret_text(&key),
                );
                set.add_as(
                    "public key (NAME.pub)",
                    output.with_extension("pub"),
                    sign::public_text(&public),
                );
                let files = set.commit(*force)?;
                if !quiet {
                    say!("key id {}", lower_hex(&sign::key_id(&public)));
                    for f in files {
                        say!("wrote {}", f.display());
                    }
                }
                Ok(())
            }
        }
    }
}
